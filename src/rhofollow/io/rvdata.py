"""Measured radial velocities from CSV or ECSV files, validated as a whole (nothing half-read).

Columns (exact names):

============  =====  ==============================================================
column        unit   meaning
============  =====  ==============================================================
bjd_tdb       d      mid-exposure time, BJD_TDB
rv_ms         m/s    radial velocity (any zero point; offsets are fitted per instrument)
rv_err_ms     m/s    1-sigma error, > 0 (without stellar jitter)
instrument    —      instrument name; must match an instrument model when names are given
target        —      target name; needed when one file holds several targets
============  =====  ==============================================================

Per target the times must be in increasing order; a time repeated with the same instrument is
rejected. A directory holds one file per target named ``<target>.csv`` (or ``.ecsv``) without a
``target`` column, or files with a ``target`` column. Row numbers in messages count data rows
from 1 (the header is not counted).
"""
from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from rhofollow.errors import InputError

__all__ = ["RVDataError", "RVData", "RV_COLUMNS", "read_rv_file", "read_rv_dir", "read_rv_data"]

RV_COLUMNS = ("bjd_tdb", "rv_ms", "rv_err_ms", "instrument")


class RVDataError(InputError, ValueError):
    """A malformed RV file; the message names the file, row and column."""


@dataclass
class RVData:
    """Validated RVs of one target (arrays of equal length, time-ordered)."""

    target: str
    bjd_tdb: np.ndarray
    rv_ms: np.ndarray
    rv_err_ms: np.ndarray
    instrument: np.ndarray   # str per epoch
    source: str = ""

    @property
    def n(self) -> int:
        return len(self.bjd_tdb)

    @property
    def instruments(self) -> list[str]:
        """Instrument names in order of first appearance."""
        return list(dict.fromkeys(self.instrument.tolist()))

    def groups(self) -> np.ndarray:
        """Integer instrument index per epoch (for per-instrument offsets)."""
        names = self.instruments
        return np.array([names.index(i) for i in self.instrument], dtype=int)


def _rows_from_file(path: Path):
    """(column names, list of row dicts of strings) from CSV or ECSV."""
    src = str(path)
    suffix = path.suffix.lower()
    if suffix == ".ecsv":
        from astropy.table import Table

        try:
            t = Table.read(path, format="ascii.ecsv")
        except Exception as exc:  # noqa: BLE001 - astropy raises many types for bad files
            raise RVDataError(f"{src}: not a readable ECSV file ({exc})") from None
        cols = list(t.colnames)
        rows = [{c: ("" if np.ma.is_masked(r[c]) else str(r[c])) for c in cols} for r in t]
        return cols, rows
    try:
        with path.open(newline="", encoding="utf-8") as fh:
            lines = [ln for ln in fh if ln.strip() and not ln.lstrip().startswith("#")]
    except FileNotFoundError:
        raise RVDataError(f"{src}: RV file not found") from None
    except UnicodeDecodeError:
        raise RVDataError(f"{src}: not a UTF-8 text file") from None
    reader = csv.DictReader(lines)
    cols = [c.strip() for c in (reader.fieldnames or [])]
    reader.fieldnames = cols
    rows = []
    for i, r in enumerate(reader, start=1):
        if None in r:
            raise RVDataError(f"{src}, row {i}: more fields than the {len(cols)} header columns")
        rows.append({k: (v or "").strip() for k, v in r.items()})
    return cols, rows


def _float(v: str, src, row, col):
    try:
        x = float(v)
    except ValueError:
        raise RVDataError(f"{src}, row {row}, column '{col}': not a number ({v!r})") from None
    if not math.isfinite(x):
        raise RVDataError(f"{src}, row {row}, column '{col}': value must be finite, got {v!r}")
    return x


def read_rv_file(path, known_instruments=None, target: str | None = None) -> dict[str, RVData]:
    """Read one RV file; returns target name -> :class:`RVData`.

    Parameters
    ----------
    path : CSV or ECSV file
    known_instruments : names allowed in the ``instrument`` column (None = any)
    target : name for a file without a ``target`` column (default: the file stem)

    Raises :class:`RVDataError` on the first problem; nothing is returned half-read.
    """
    p = Path(path)
    src = str(p)
    if not p.is_file():
        raise RVDataError(f"{src}: RV file not found")
    cols, rows = _rows_from_file(p)
    missing = [c for c in RV_COLUMNS if c not in cols]
    if missing:
        raise RVDataError(f"{src}: missing column{'s' if len(missing) > 1 else ''} "
                          f"{', '.join(repr(c) for c in missing)} (need {', '.join(RV_COLUMNS)})")
    if not rows:
        raise RVDataError(f"{src}: no data rows")
    known = None if known_instruments is None else set(known_instruments)
    has_target = "target" in cols
    per: dict[str, list] = {}
    for i, r in enumerate(rows, start=1):
        t = _float(r["bjd_tdb"], src, i, "bjd_tdb")
        if not 2.0e6 < t < 3.0e6:
            raise RVDataError(f"{src}, row {i}, column 'bjd_tdb': {t} is not a full BJD_TDB "
                              "(expected about 2.4e6 days)")
        v = _float(r["rv_ms"], src, i, "rv_ms")
        err = _float(r["rv_err_ms"], src, i, "rv_err_ms")
        if err <= 0:
            raise RVDataError(f"{src}, row {i}, column 'rv_err_ms': error must be positive, got {err:g}")
        inst = r["instrument"]
        if not inst:
            raise RVDataError(f"{src}, row {i}, column 'instrument': empty")
        if known is not None and inst not in known:
            raise RVDataError(f"{src}, row {i}, column 'instrument': unknown instrument {inst!r} "
                              f"(known: {', '.join(sorted(known)) or 'none'})")
        name = r["target"] if has_target else (target or p.stem)
        if not name:
            raise RVDataError(f"{src}, row {i}, column 'target': empty")
        per.setdefault(name, []).append((i, t, v, err, inst))
    out = {}
    for name, recs in per.items():
        rown = np.array([x[0] for x in recs])
        t = np.array([x[1] for x in recs])
        inst = np.array([x[4] for x in recs], dtype=object).astype(str)
        back = np.flatnonzero(np.diff(t) < 0)
        if back.size:
            j = back[0] + 1
            raise RVDataError(f"{src}, row {rown[j]}, column 'bjd_tdb': times of {name} are not in "
                              f"increasing order ({t[j]} after {t[j - 1]})")
        dup = np.flatnonzero((np.diff(t) == 0) & (inst[1:] == inst[:-1]))
        if dup.size:
            j = dup[0] + 1
            raise RVDataError(f"{src}, row {rown[j]}, column 'bjd_tdb': duplicate time {t[j]} for "
                              f"{name} with instrument {inst[j]!r} (also row {rown[j - 1]})")
        out[name] = RVData(target=name, bjd_tdb=t, rv_ms=np.array([x[2] for x in recs]),
                           rv_err_ms=np.array([x[3] for x in recs]), instrument=inst, source=src)
    return out


def read_rv_dir(path, known_instruments=None) -> dict[str, RVData]:
    """Read every ``*.csv`` / ``*.ecsv`` in a directory; target name -> :class:`RVData`.

    A target found in two files is an error (naming both files).
    """
    d = Path(path)
    if not d.is_dir():
        raise RVDataError(f"{d}: not a directory")
    files = sorted(f for f in d.iterdir() if f.suffix.lower() in (".csv", ".ecsv") and f.is_file())
    if not files:
        raise RVDataError(f"{d}: no .csv or .ecsv RV files")
    out: dict[str, RVData] = {}
    for f in files:
        for name, data in read_rv_file(f, known_instruments).items():
            if name in out:
                raise RVDataError(f"{f}: RVs of {name} also in {out[name].source}; keep one file per target")
            out[name] = data
    return out


def read_rv_data(path, known_instruments=None) -> dict[str, RVData]:
    """A file or a directory of RV files (dispatches to :func:`read_rv_file` / :func:`read_rv_dir`)."""
    p = Path(path)
    if p.is_dir():
        return read_rv_dir(p, known_instruments)
    return read_rv_file(p, known_instruments)
