"""Is a new measurement one the ledger already holds under another key?

An RV of a target within :data:`~rhofollow.io.ledger.records.RV_SAME_TIME_D` of a stored one, an
occultation detection within :data:`~rhofollow.io.ledger.records.OCC_SAME_SIGMA` combined 1-sigma
errors of a stored detection, or a non-detection window overlapping a stored one is the same
measurement. (A row with an identical key is the idempotent re-ingest case, handled by the store.)
"""
from __future__ import annotations

import math
import sqlite3

import numpy as np

from rhofollow.core.types import RowIssue
from rhofollow.io.ledger.records import OCC_SAME_SIGMA, RV_SAME_TIME_D
from rhofollow.io.ledger.schema import KEYS, row_key

__all__ = ["same_measurements", "duplicate_issues", "describe", "brief"]

_MEASURE_COL = {"rv_measurements": "bjd_tdb", "occultation_timings": "mid_bjd_tdb"}


def _stored(conn: sqlite3.Connection, table: str, rows: list[dict]) -> dict[str, list[dict]]:
    cols = ("id", "row_key") + KEYS[table][0] + KEYS[table][1]
    stored: dict[str, list[dict]] = {}
    for name in sorted({r["target"] for r in rows}):
        stored[name] = [dict(zip(cols, v)) for v in conn.execute(
            f"SELECT {', '.join(cols)} FROM {table} WHERE target = ?", (name,))]
    return stored


def _same_rvs(table: str, rows: list[dict], stored: dict[str, list[dict]]):
    out = []
    arrays = {}
    for name, old in stored.items():
        old.sort(key=lambda o: o["bjd_tdb"])
        arrays[name] = np.array([o["bjd_tdb"] for o in old], dtype=float)
    for n, r in enumerate(rows):
        t, old = arrays[r["target"]], stored[r["target"]]
        lo, hi = np.searchsorted(t, [r["bjd_tdb"] - RV_SAME_TIME_D, r["bjd_tdb"] + RV_SAME_TIME_D],
                                 side="left")
        key = row_key(table, r)
        hits = [old[j] for j in range(lo, hi) if old[j]["row_key"] != key
                and abs(old[j]["bjd_tdb"] - r["bjd_tdb"]) <= RV_SAME_TIME_D]
        if hits:
            out.append((n, hits))
    return out


def _same_timing(r: dict, o: dict) -> bool:
    if r["kind"] == "detection":
        tol = OCC_SAME_SIGMA * math.hypot(r["mid_err_min"], o["mid_err_min"]) / 1440.0
        return abs(o["mid_bjd_tdb"] - r["mid_bjd_tdb"]) <= tol
    return (o["window_start_bjd_tdb"] < r["window_end_bjd_tdb"]
            and r["window_start_bjd_tdb"] < o["window_end_bjd_tdb"])


def same_measurements(conn: sqlite3.Connection, table: str | None, rows: list[dict]
                      ) -> list[tuple[int, list[dict]]]:
    """Each new row that repeats a stored measurement under another key.

    Parameters
    ----------
    conn : sqlite3.Connection
    table : str or None
        ``rv_measurements`` or ``occultation_timings`` (other tables have no such repeats).
    rows : list of dict
        The rows about to be written.

    Returns
    -------
    list of (int, list of dict)
        (index in ``rows``, the stored rows it repeats, each with its ``id``).
    """
    if table not in ("rv_measurements", "occultation_timings") or not rows:
        return []
    stored = _stored(conn, table, rows)
    if table == "rv_measurements":
        return _same_rvs(table, rows, stored)
    out = []
    for n, r in enumerate(rows):
        key = row_key(table, r)
        hits = [o for o in stored[r["target"]]
                if o["row_key"] != key and o["kind"] == r["kind"] and _same_timing(r, o)]
        if hits:
            out.append((n, hits))
    return out


def duplicate_issues(source: str, table: str, rows: list[dict], same) -> list[RowIssue]:
    """One issue per new row that repeats stored measurements (row, column, the stored one).

    Parameters
    ----------
    source : str
        The file (or entry) the rows come from.
    table : str
        ``rv_measurements`` or ``occultation_timings``.
    rows : list of dict
        The new rows (a :class:`~rhofollow.io.ledger.ingest.Rows` carries their data-row numbers).
    same : list of (int, list of dict)
        The repeats found by :func:`same_measurements`.

    Returns
    -------
    list of RowIssue
        One error per repeating row, naming its measurement column and the stored measurement.
    """
    numbers = getattr(rows, "numbers", None)
    return [RowIssue(source, numbers[n] if numbers else n + 1,
                     "window_start_bjd_tdb" if rows[n].get("kind") == "non_detection"
                     else _MEASURE_COL[table],
                     f"the same measurement as the ledger's {describe(table, old[0])}"
                     + (f" (and {len(old) - 1} more)" if len(old) > 1 else ""),
                     name=rows[n]["target"]) for n, old in same]


def describe(table: str, o: dict) -> str:
    """A stored measurement in words (for the duplicate message).

    Parameters
    ----------
    table : str
        ``rv_measurements`` or ``occultation_timings``.
    o : dict
        The stored row (times BJD_TDB days, RVs m/s, timing errors minutes).

    Returns
    -------
    str
        E.g. ``RV at BJD_TDB 2461030.12345: 12.3 +/- 2.1 m/s (AQ-Vel)``.
    """
    inst = f" ({o['instrument']})" if o.get("instrument") else ""
    if table == "rv_measurements":
        return f"RV at BJD_TDB {o['bjd_tdb']:.5f}: {o['rv_ms']:g} +/- {o['rv_err_ms']:g} m/s{inst}"
    if o["kind"] == "detection":
        return f"occultation detection at BJD_TDB {o['mid_bjd_tdb']:.5f} +/- {o['mid_err_min']:g} min{inst}"
    return (f"occultation non-detection over BJD_TDB {o['window_start_bjd_tdb']:.5f}-"
            f"{o['window_end_bjd_tdb']:.5f}{inst}")


def brief(table: str, row: dict) -> str:
    """The identifying columns of a row as ``column=value`` text.

    Parameters
    ----------
    table : str
        The ledger table of the row.
    row : dict
        The row.

    Returns
    -------
    str
        The row's key columns that are set, comma-separated.
    """
    return ", ".join(f"{c}={row[c]}" for c in KEYS[table][0] if row.get(c) not in (None, ""))
