"""Measured radial velocities from CSV or ECSV files: the only RV reader.

The ``--rv-data`` option of the ``rv`` and ``plan`` commands and the ledger's RV ingest
(:meth:`rhofollow.io.ledger.Ledger.ingest_rv_file`) both read through :func:`read_rv_file`, so one
file gives the same RVs, and the same problems, on either route.

Columns (exact names):

============  =====  ==============================================================
column        unit   meaning
============  =====  ==============================================================
bjd_tdb       d      mid-exposure time, full BJD_TDB (2.0e6 < value < 3.0e6)
rv_ms         m/s    radial velocity (any zero point; offsets are fitted per instrument)
rv_err_ms     m/s    1-sigma error, > 0 (without stellar jitter)
instrument    —      instrument name; must match an instrument model when names are given
target        —      target name; needed when one file holds several targets
============  =====  ==============================================================

Rules
-----
* File kinds: a name ending in ``.ecsv`` is read as ECSV (astropy); any other file as CSV text
  (UTF-8, a byte-order mark allowed; blank lines and lines starting with ``#`` are skipped; a cell
  quoted against spreadsheet formulas by :func:`rhofollow.io.safety.csv_text` is unquoted).
* Errors: every problem of the file is collected as a :class:`~rhofollow.core.types.RowIssue`
  (file, data row, column, reason) and the whole file is rejected with one
  :class:`RVDataError` listing them; nothing is returned half-read. Row numbers count data rows
  from 1 (header, comment and blank lines are not counted); row 0 is the file or its header.
  An issue names the target when it comes from the file's ``target`` column.
* Target: the ``target`` column when the file has one (if a ``target`` is also given, every row
  must name it); otherwise the given ``target``; otherwise the file name without its suffix
  (``<target>.csv``), unless the caller asks for an explicit name (the ledger does: a file called
  ``rv.csv`` must not create a target "rv").
* Time order: the file's row order does not matter; each target's series is returned in time
  order (a stable sort, so equal times keep the file's order).
* Repeats: a row repeating an earlier one exactly (target, time, instrument, RV and error) is the
  same measurement listed twice and is kept once; the same target, time and instrument with
  another RV or error is an error. The same time with two instruments is two measurements.

A directory holds one file per target named ``<target>.csv`` (or ``.ecsv``) without a ``target``
column, or files with a ``target`` column; a target found in two files is an error.
"""
from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np

from rhofollow.core.types import IssueCollector, RowIssue, RVSeries
from rhofollow.errors import InputError
from rhofollow.io.safety import csv_unquote

__all__ = ["RVDataError", "RVData", "RVSeries", "RV_COLUMNS", "read_rv_file", "read_rv_dir",
           "read_rv_data"]

RV_COLUMNS = ("bjd_tdb", "rv_ms", "rv_err_ms", "instrument")
#: The series type under the name this module gave it first (the same class as :class:`RVSeries`).
RVData = RVSeries

_MAX_REPORTED_ISSUES = 20
_NO_TARGET = "the file has no 'target' column; name the target (--target)"


class RVDataError(InputError, ValueError):
    """A malformed RV file or folder; ``issues`` lists every problem (file, row, column, reason)."""

    def __init__(self, source: str, issues: list[RowIssue]):
        self.source = str(source)
        self.issues = list(issues)
        shown = "; ".join(str(i) for i in self.issues[:_MAX_REPORTED_ISSUES])
        more = len(self.issues) - _MAX_REPORTED_ISSUES
        super().__init__(shown + (f"; and {more} more" if more > 0 else ""), file=self.source)


class _Issues(IssueCollector):
    """Collects the problems of one file; :meth:`raise_if_any` rejects the file with all of them."""

    error = RVDataError


# ------------------------------------------------------------------------------- file reading

def _read_ecsv(path: Path, errs: _Issues) -> tuple[list[str], list[tuple[int, dict]]]:
    from astropy.table import Table

    try:
        t = Table.read(path, format="ascii.ecsv")
    except Exception as exc:  # noqa: BLE001 - astropy raises many types for bad files
        errs.add(0, "", f"not a readable ECSV file ({exc})")
        errs.raise_if_any()
    cols = list(t.colnames)
    rows = [(i, {c: ("" if np.ma.is_masked(r[c]) else str(r[c]).strip()) for c in cols})
            for i, r in enumerate(t, start=1)]
    return cols, rows


def _read_csv(path: Path, errs: _Issues) -> tuple[list[str], list[tuple[int, dict]]]:
    return read_csv_rows(path, errs, not_found="RV file not found")


def read_csv_rows(path: Path, errs, *, not_found: str | None = None) -> tuple[list[str], list[tuple[int, dict]]]:
    """(header, rows) of a CSV file, rows as (1-based data-row number, {column: stripped text}).

    '#' lines and blank lines are skipped, formula-quoted cells unquoted; a row with the wrong number
    of fields is a problem in ``errs``. Shared by the RV reader and the ledger's other file kinds.

    Parameters
    ----------
    path : pathlib.Path
        The CSV file (UTF-8, a byte-order mark allowed).
    errs : object
        Problem collector: anything with ``add(row, column, reason)`` and ``raise_if_any()``.
    not_found : str or None
        Reason recorded when the file does not exist (None: a generic "cannot read the file").

    Returns
    -------
    header : list of str
        The column names.
    rows : list of (int, dict)
        Data-row number and {column: text} of every row with the right number of fields.
    """
    try:
        text = path.read_bytes().decode("utf-8-sig")
    except FileNotFoundError as exc:
        errs.add(0, "", not_found or f"cannot read the file ({exc.strerror or exc})")
    except OSError as exc:
        errs.add(0, "", f"cannot read the file ({exc.strerror or exc})")
    except UnicodeDecodeError:
        errs.add(0, "", "not UTF-8 text")
    errs.raise_if_any()
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        errs.add(0, "", "no header line and no data")
        errs.raise_if_any()
    reader = csv.reader(lines)
    header = [csv_unquote(h.strip()) for h in next(reader)]
    rows = []
    for i, cells in enumerate(reader, start=1):
        if len(cells) != len(header):
            errs.add(i, "", f"has {len(cells)} fields, the header has {len(header)}")
            continue
        rows.append((i, {h: csv_unquote(c.strip()) for h, c in zip(header, cells)}))
    return header, rows


def _check_header(cols: list[str], n_rows: int, errs: _Issues) -> None:
    for c in RV_COLUMNS:
        if c not in cols:
            errs.add(0, c, f"required column is missing (need {', '.join(RV_COLUMNS)})")
    for c in sorted({h for h in cols if cols.count(h) > 1}):
        errs.add(0, c, "column appears more than once")
    if n_rows == 0 and not errs.issues:
        errs.add(0, "", "header only, no data rows")
    errs.raise_if_any()


# ------------------------------------------------------------------------------- row checks

def cell_number(errs, i: int, row: dict, col: str, name: str = "", *, required: bool = True,
                positive: bool = False) -> float | None:
    """The finite number in ``row[col]``, or None with the problem added to ``errs``.

    Shared by the RV reader and the ledger's other file kinds (same wording).

    Parameters
    ----------
    errs : object
        Problem collector: anything with ``add(row, column, reason, name)``.
    i : int
        Data-row number (from 1), for the problem.
    row : dict
        {column: text} of the row.
    col : str
        The column to read.
    name : str
        Target named in the problem ("" for none).
    required : bool
        An empty cell is a problem (else it gives None silently).
    positive : bool
        The number must be > 0.

    Returns
    -------
    float or None
        The number, in the column's own unit (None when missing or bad).
    """
    text = row.get(col, "")
    if text == "":
        if required:
            errs.add(i, col, "value is missing", name)
        return None
    try:
        v = float(text)
    except ValueError:
        errs.add(i, col, f"'{text}' is not a number", name)
        return None
    if not math.isfinite(v):
        errs.add(i, col, f"'{text}' is not a finite number", name)
        return None
    if positive and v <= 0:
        errs.add(i, col, f"must be > 0, got {text}", name)
        return None
    return v


def _row_target(errs: _Issues, i: int, row: dict, has_column: bool, default: str) -> tuple[str, str]:
    """(target of the row, name to put in its issues)."""
    if not has_column:
        return default, ""
    name = row.get("target", "")
    if not name:
        errs.add(i, "target", "value is missing")
    elif default and name != default:
        errs.add(i, "target", f"'{name}' differs from the target given ({default})", name)
    return name, name


def _parse_row(errs: _Issues, i: int, row: dict, has_column: bool, default: str, known):
    """(row, target, time, rv, error, instrument) of a valid row, or None (issues added)."""
    name, who = _row_target(errs, i, row, has_column, default)
    n0 = len(errs.issues)
    t = cell_number(errs, i, row, "bjd_tdb", who)
    if t is not None and not 2.0e6 < t < 3.0e6:
        errs.add(i, "bjd_tdb", f"{row['bjd_tdb']} is not a full BJD_TDB (expected ~2.4e6 days)", who)
    v = cell_number(errs, i, row, "rv_ms", who)
    err = cell_number(errs, i, row, "rv_err_ms", who, positive=True)
    inst = row.get("instrument", "")
    if not inst:
        errs.add(i, "instrument", "value is missing", who)
    elif known is not None and inst not in known:
        errs.add(i, "instrument", f"unknown instrument '{inst}' (known: "
                 f"{', '.join(sorted(known)) or 'none'})", who)
    if len(errs.issues) > n0 or not name:
        return None
    return i, name, t, v, err, inst


def _series(errs: _Issues, name: str, recs: list[tuple], source: str, who: str) -> RVSeries:
    """One target's series in time order; exact repeats kept once, conflicting repeats flagged."""
    seen: dict[tuple, tuple] = {}
    kept = []
    for r in recs:
        key = (r[2], r[5])                     # time, instrument
        if key in seen:
            if seen[key][3:5] != r[3:5]:
                errs.add(r[0], "rv_ms,rv_err_ms", f"same entry as row {seen[key][0]} with "
                         "different values", who)
            continue
        seen[key] = r
        kept.append(r)
    kept.sort(key=lambda r: r[2])              # stable: equal times keep the file's order
    return RVSeries(target=name, bjd_tdb=np.array([r[2] for r in kept], dtype=float),
                    rv_ms=np.array([r[3] for r in kept], dtype=float),
                    rv_err_ms=np.array([r[4] for r in kept], dtype=float),
                    instrument=np.array([r[5] for r in kept], dtype=object).astype(str),
                    source=source, rows=np.array([r[0] for r in kept], dtype=int))


def read_rv_file(path, known_instruments=None, target: str | None = None, *,
                 name_from_stem: bool = True) -> dict[str, RVSeries]:
    """Read one RV file (CSV or ECSV) with the rules of the module notes.

    Parameters
    ----------
    path : str or path-like
        The file; ``.ecsv`` is read as ECSV, anything else as CSV.
    known_instruments : iterable of str, optional
        Names allowed in the ``instrument`` column (None: any name).
    target : str, optional
        The target of a file without a ``target`` column; with such a column, every row must
        name this target.
    name_from_stem : bool
        Without a ``target`` column and without ``target``, name the target after the file
        (``HTS-104.csv`` -> ``HTS-104``); when False that is an error instead.

    Returns
    -------
    dict of str to RVSeries
        Target name -> its RVs (BJD_TDB in days, RV and 1-sigma error in m/s) in time order, with
        the data-row number of each RV in ``rows``.

    Raises
    ------
    RVDataError
        Listing every problem of the file (file, row, column, reason); nothing is returned.
    """
    p = Path(path)
    src = str(p)
    errs = _Issues(src)
    if p.is_dir():
        errs.add(0, "", "is a folder, not an RV file")
        errs.raise_if_any()
    cols, rows = (_read_ecsv if p.suffix.lower() == ".ecsv" else _read_csv)(p, errs)
    _check_header(cols, len(rows) + len(errs.issues), errs)
    has_column = "target" in cols
    default = target or ("" if has_column or not name_from_stem else p.stem)
    if not has_column and not default:
        errs.add(0, "target", _NO_TARGET)
        errs.raise_if_any()
    known = None if known_instruments is None else set(known_instruments)
    per: dict[str, list[tuple]] = {}
    for i, r in rows:
        rec = _parse_row(errs, i, r, has_column, default, known)
        if rec is not None:
            per.setdefault(rec[1], []).append(rec)
    errs.raise_if_any()
    out = {name: _series(errs, name, recs, src, name if has_column else "")
           for name, recs in per.items()}
    errs.raise_if_any()
    return out


def read_rv_dir(path, known_instruments=None) -> dict[str, RVSeries]:
    """Read every ``*.csv`` / ``*.ecsv`` file of a folder (target named by the file or its column).

    Parameters
    ----------
    path : str or path-like
        The folder.
    known_instruments : iterable of str, optional
        As in :func:`read_rv_file`.

    Returns
    -------
    dict of str to RVSeries
        Target name -> RVs. A target found in two files is an error naming both files.
    """
    d = Path(path)
    if not d.is_dir():
        raise RVDataError(str(d), [RowIssue(str(d), 0, "", "not a directory")])
    files = sorted(f for f in d.iterdir() if f.suffix.lower() in (".csv", ".ecsv") and f.is_file())
    if not files:
        raise RVDataError(str(d), [RowIssue(str(d), 0, "", "no .csv or .ecsv RV files")])
    out: dict[str, RVSeries] = {}
    for f in files:
        for name, data in read_rv_file(f, known_instruments).items():
            if name in out:
                raise RVDataError(str(f), [RowIssue(str(f), 0, "target", f"RVs of {name} also in "
                                                    f"{out[name].source}; keep one file per target")])
            out[name] = data
    return out


def read_rv_data(path, known_instruments=None) -> dict[str, RVSeries]:
    """A file or a folder of RV files (:func:`read_rv_file` or :func:`read_rv_dir`).

    Parameters
    ----------
    path : str or path-like
    known_instruments : iterable of str, optional

    Returns
    -------
    dict of str to RVSeries
    """
    p = Path(path)
    if p.is_dir():
        return read_rv_dir(p, known_instruments)
    return read_rv_file(p, known_instruments)
