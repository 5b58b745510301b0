"""read_catalogue: a file in, validated targets and every row problem out."""
from __future__ import annotations

import math
import os
from pathlib import Path
import astropy.units as u

from rhofollow.core.types import CatalogueResult, Measurement, RowIssue, Target
from rhofollow.io.catalogue.binding import _Bound, _bind_columns, _parse_number, _text
from rhofollow.io.catalogue.checks import _check_row
from rhofollow.io.catalogue.columns import CatalogueError, SUPPORTED_EXTENSIONS, _CONTROL, _ERROR_MAX
from rhofollow.io.catalogue.tables import _RawTable, _read_astropy, _read_csv


def read_catalogue(path: str | os.PathLike, *, require_coords: bool = False) -> CatalogueResult:
    """Read and validate a candidate catalogue.

    Parameters
    ----------
    path : str or path-like
        A ``.csv``, ``.ecsv`` or VOTable (``.vot``, ``.xml``, ``.votable``) file.
    require_coords : bool
        Also require ``ra_deg`` and ``dec_deg`` (for anything that schedules).

    Returns
    -------
    CatalogueResult
        Valid rows as :class:`Target` (values in the canonical units), and every problem as a
        :class:`RowIssue` (severity "error": row skipped; "warning": row kept; row 0 = file level).

    Raises
    ------
    CatalogueError
        The file is missing, of an unsupported kind, unreadable, has no data rows or no ``name``
        column, or two columns give the same quantity.
    """
    source = str(path)
    table = _open_table(Path(path), source)
    issues: list[RowIssue] = [RowIssue(source, 0, "", n, severity="warning")
                              for n in table.file_notes]
    name_col, bound = _bind_columns(table, source, issues)

    def label(canon: str) -> str:
        b = bound.get(canon, {}).get("value")
        return b.raw.header if b is not None else canon

    targets: list[Target] = []
    first_row: dict[str, tuple[int, str]] = {}
    for i in range(table.n_rows):
        row = i + 1
        errs: list[tuple[str, str]] = list(table.row_problems.get(row, []))
        warns: list[tuple[str, str]] = list(table.row_notes.get(row, []))
        name = _row_name(_text(name_col.cells[i]), name_col.header, row, first_row, errs)
        values, given, err_pairs = _row_values(bound, i, errs, warns)
        e2, w2 = _check_row(dict(values), given, label, require_coords, err_pairs)
        errs += e2
        warns += w2
        for col, reason in errs:
            issues.append(RowIssue(source, row, col, reason, name=name))
        for col, reason in warns:
            issues.append(RowIssue(source, row, col, reason, name=name, severity="warning"))
        if errs:
            continue
        meas = {c: Measurement(x, *err_pairs.get(c, (0.0, 0.0))) for c, x in values.items()}
        targets.append(Target(name=name, row=row, source=source, values=meas,
                              warnings=[f"column '{c}': {r}" if c else r for c, r in warns]))
    return CatalogueResult(source=source, n_rows=table.n_rows, targets=targets, issues=issues)


def _open_table(p: Path, source: str) -> _RawTable:
    """The raw table of the catalogue file ``p``, or a :class:`CatalogueError` naming ``source``."""
    ext = p.suffix.lower()
    if ext not in SUPPORTED_EXTENSIONS:
        raise CatalogueError(source, f"unsupported file type '{p.suffix or '(none)'}'; use .csv, "
                             ".ecsv or a VOTable (.vot, .xml, .votable)")
    if not p.exists():
        raise CatalogueError(source, "file not found")
    if p.is_dir():
        raise CatalogueError(source, "is a directory, not a catalogue file")
    fmt = SUPPORTED_EXTENSIONS[ext]
    try:
        table = _read_csv(p, source) if fmt == "csv" else _read_astropy(p, source, fmt)
    except PermissionError:
        raise CatalogueError(source, "cannot be read (permission denied)") from None
    except OSError as exc:
        raise CatalogueError(source, f"cannot be read ({exc.strerror or exc})") from None
    if table.n_rows == 0:
        raise CatalogueError(source, "has a header but no data rows")
    return table


def _row_name(name: str, header: str, row: int, first_row: dict[str, tuple[int, str]],
              errs: list[tuple[str, str]]) -> str:
    """The row's name as reported (control characters shown as '?'); a missing, unprintable or
    duplicate name (case and spacing ignored; ``first_row`` remembers the names seen) goes to
    ``errs``."""
    ctrl = _CONTROL.search(name)
    if not name:
        errs.append((header, "name is required but missing"))
    elif ctrl:
        errs.append((header, f"name contains a control character (U+{ord(ctrl.group()):04X} "
                             f"at position {ctrl.start() + 1}); names must be printable text"))
        name = _CONTROL.sub("?", name)
    else:
        key = " ".join(name.split()).casefold()
        if key in first_row:
            errs.append((header, f"duplicate name '{name}' (first used in row {first_row[key][0]})"))
        else:
            first_row[key] = (row, name)
    return name


def _row_values(bound: dict[str, dict[str, _Bound]], i: int, errs: list[tuple[str, str]],
                warns: list[tuple[str, str]]):
    """Parse the cells of row index ``i``: (values in canonical units, canonical columns given,
    (lower, upper) 1-sigma errors in canonical units). Problems go to ``errs`` / ``warns``."""
    values: dict[str, float] = {}
    given: set[str] = set()
    err_pairs: dict[str, tuple[float, float]] = {}
    for canon, kinds in bound.items():
        vb = kinds.get("value")
        if vb is None:
            continue
        cell = vb.raw.cells[i]
        if cell is None:
            if any(kinds[k].raw.cells[i] is not None for k in kinds if k != "value"
                   and not kinds[k].problem):
                warns.append((vb.raw.header, f"an error is given for {canon} but no value; "
                                             "ignored"))
            continue
        given.add(canon)
        x = _cell_value(vb, cell, errs)
        if x is None:
            continue
        values[canon] = x
        got = _cell_errors(canon, kinds, i, errs)
        if got is not None:
            pair = _error_pair(canon, kinds, got, errs)
            if pair is not None:
                err_pairs[canon] = pair
    return values, given, err_pairs


def _cell_value(vb: _Bound, cell, errs: list[tuple[str, str]]) -> float | None:
    """The value of one cell in canonical units, or None with the reason added to ``errs``."""
    if vb.problem:
        errs.append((vb.raw.header, f"unusable column: {vb.problem}"))
        return None
    x, why = _parse_number(cell)
    if why:
        errs.append((vb.raw.header, why))
        return None
    try:
        x = vb.convert(x)
    except (ValueError, ArithmeticError, u.UnitsError) as exc:
        x, why = None, f"value {cell} cannot be converted ({exc})"
    if x is None or not math.isfinite(x):
        errs.append((vb.raw.header, why or f"value {cell} is not finite after unit "
                                           "conversion"))
        return None
    return x


def _cell_errors(canon: str, kinds: dict[str, _Bound], i: int,
                 errs: list[tuple[str, str]]) -> dict[str, float] | None:
    """The uncertainties given for ``canon`` in row index ``i`` ({kind: error in canonical units},
    kind "err", "errlo" or "errhi"), or None when one of them is unusable (reasons in ``errs``)."""
    got = {}
    ok = True
    for kind in ("err", "errlo", "errhi"):
        eb = kinds.get(kind)
        if eb is None or eb.raw.cells[i] is None:
            continue
        if eb.problem:
            errs.append((eb.raw.header, f"unusable column: {eb.problem}"))
            ok = False
            continue
        e, why = _parse_number(eb.raw.cells[i])
        if why:
            errs.append((eb.raw.header, why))
            ok = False
            continue
        if e < 0:
            errs.append((eb.raw.header, f"an uncertainty cannot be negative, got {e:g}"))
            ok = False
            continue
        e_max = _ERROR_MAX.get(canon)
        if e_max is not None and not e * eb.factor <= e_max:
            errs.append((eb.raw.header, f"an uncertainty of {e * eb.factor:g} is larger than "
                                        f"the whole physical range of {canon} ({e_max:g})"))
            ok = False
            continue
        got[kind] = e * eb.factor
    return got if ok else None


def _error_pair(canon: str, kinds: dict[str, _Bound], got: dict[str, float],
                errs: list[tuple[str, str]]) -> tuple[float, float] | None:
    """(lower, upper) 1-sigma error of ``canon`` from its symmetric or asymmetric uncertainties, or
    None when none is given or they conflict (the conflict added to ``errs``)."""
    if "err" in got and ("errlo" in got or "errhi" in got):
        errs.append((kinds["err"].raw.header, f"give either {canon}_err or "
                     f"{canon}_errlo/{canon}_errhi, not both"))
    elif ("errlo" in got) != ("errhi" in got):
        have, miss = ("errlo", "errhi") if "errlo" in got else ("errhi", "errlo")
        errs.append((kinds[have].raw.header, f"{canon}_{have} is given without "
                     f"{canon}_{miss}"))
    elif "err" in got:
        return got["err"], got["err"]
    elif got:
        return got["errlo"], got["errhi"]
    return None
