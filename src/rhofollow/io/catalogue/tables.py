"""Raw tables: what the CSV, ECSV and VOTable readers produce before any column is interpreted."""
from __future__ import annotations

import csv
import re
import warnings
from dataclasses import dataclass, field
from pathlib import Path
import astropy.units as u

from rhofollow.io.catalogue.columns import CatalogueError


# ---------------------------------------------------------------------------------------------
# Raw table: what every reader produces
# ---------------------------------------------------------------------------------------------

@dataclass
class _RawColumn:
    header: str                      # as written in the file, stripped
    unit: object                     # astropy unit, UnrecognizedUnit, or None
    cells: list                      # one entry per data row; None = blank
    problem: str = ""                # column-level problem (every non-blank cell then fails)


@dataclass
class _RawTable:
    columns: list[_RawColumn]
    n_rows: int
    row_problems: dict[int, list[tuple[str, str]]] = field(default_factory=dict)
    row_notes: dict[int, list[tuple[str, str]]] = field(default_factory=dict)
    file_notes: list[str] = field(default_factory=list)


def _read_csv(path: Path, source: str) -> _RawTable:
    """Read a comma-separated file; every cell stays text. Lines starting with '#' are comments."""
    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            lines = [row for row in csv.reader(fh)]
    except UnicodeDecodeError:
        raise CatalogueError(source, "is not UTF-8 text (is it a spreadsheet or binary file? "
                             "export it as CSV)") from None
    except csv.Error as exc:
        raise CatalogueError(source, f"is not a readable CSV file ({exc})") from None
    rows = [r for r in lines if any(c.strip() for c in r) and not r[0].lstrip().startswith("#")]
    if not rows:
        raise CatalogueError(source, "is empty (no header row)")
    header = [h.strip() for h in rows[0]]
    # Drop trailing empty header cells (a trailing comma on the header line).
    while header and header[-1] == "":
        header.pop()
    if len(header) == 1:
        for sep, label in ((";", "semicolons"), ("\t", "tabs")):
            if sep in header[0]:
                raise CatalogueError(source, f"the header uses {label} to separate columns; "
                                     "CSV catalogues must be comma-separated")
    data = rows[1:]
    n_cols = len(header)
    cols = [_RawColumn(h, None, []) for h in header]
    table = _RawTable(cols, len(data))
    for i, r in enumerate(data, start=1):
        cells = list(r)
        if len(cells) > n_cols:
            extra = [c for c in cells[n_cols:] if c.strip()]
            if extra:
                table.row_problems.setdefault(i, []).append(
                    ("(whole row)", f"has {len(cells)} cells but the header has {n_cols} columns"))
            cells = cells[:n_cols]
        elif len(cells) < n_cols:
            table.row_notes.setdefault(i, []).append(
                ("", f"has {len(cells)} cells but the header has {n_cols} columns; "
                     "the missing cells are treated as blank"))
            cells = cells + [""] * (n_cols - len(cells))
        for c, v in zip(cols, cells):
            v = v.strip()
            c.cells.append(v if v else None)
    return table


def _read_astropy(path: Path, source: str, fmt: str) -> _RawTable:
    """Read ECSV or VOTable through astropy.table; astropy's warnings become file-level notes."""
    from astropy.table import Table
    from astropy.time import Time

    label = "ECSV" if fmt == "ascii.ecsv" else "VOTable"
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            t = Table.read(path, format=fmt)
        except Exception as exc:  # noqa: BLE001 - any reader failure is a file-level problem
            t = _ecsv_as_text(path) if fmt == "ascii.ecsv" else None
            if t is None:
                msg = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
                raise CatalogueError(source, f"cannot be read as {label} ({msg})") from None
    notes = []
    for w in caught:
        if issubclass(w.category, u.UnitsWarning):
            continue  # unrecognised units are judged per column (ppm is known here)
        text = str(w.message).strip().splitlines()[0] if str(w.message).strip() else ""
        if text and text not in notes:
            notes.append(f"{label} reader: {text}")
    cols = []
    n = len(t)
    for name in t.colnames:
        col = t[name]
        header = str(name).strip()
        if isinstance(col, Time):
            try:
                cells = [float(x) for x in col.tdb.jd]
            except Exception as exc:  # noqa: BLE001
                cols.append(_RawColumn(header, None, [None] * n,
                                       f"time column cannot be converted to BJD_TDB ({exc})"))
                continue
            cols.append(_RawColumn(header, u.d, cells))
            continue
        if getattr(col, "ndim", 1) > 1:
            cols.append(_RawColumn(header, None, [None] * n,
                                   "has more than one value per row"))
            continue
        unit = getattr(col, "unit", None)
        cells = []
        for v in col.tolist():
            if isinstance(v, bytes):
                v = v.decode("utf-8", "replace")
            if isinstance(v, str):
                v = v.strip() or None
            cells.append(v)
        cols.append(_RawColumn(header, unit, cells))
    return _RawTable(cols, n, file_notes=notes)


_ECSV_NUMERIC = re.compile(r"datatype: *(float\d*|int\d*|uint\d*)\b")


def _ecsv_as_text(path: Path):
    """Re-read an ECSV whose numeric cells do not all parse, with those columns as text.

    The header keeps the units; each bad cell then becomes a row-level issue instead of sinking
    the whole file. Returns None when the file still cannot be read.
    """
    from astropy.table import Table

    try:
        lines = path.read_text(encoding="utf-8").split("\n")
        fixed = [_ECSV_NUMERIC.sub("datatype: string", ln) if ln.startswith("# - {") else ln
                 for ln in lines]
        return Table.read("\n".join(fixed), format="ascii.ecsv")
    except Exception:  # noqa: BLE001 - the caller reports the original failure
        return None


# ---------------------------------------------------------------------------------------------
