"""Parsing of the files and single entries the ledger takes in; all validation before any write.

Each parser returns the rows to write (dicts keyed by column) or raises
:class:`~rhofollow.io.ledger.records.IngestError` listing every problem (file, row, column,
reason). RV files are read by :func:`rhofollow.io.rvdata.read_rv_file`, the project's only RV
reader, with its rules (see that module); occultation and observation files are CSV.
"""
from __future__ import annotations

import datetime as _dt
import hashlib
import json
import math
from pathlib import Path

from rhofollow.core.types import IssueCollector, RVSeries
from rhofollow.io.ledger.records import (OBSERVATION_KINDS, OBSERVATION_OUTCOMES, TIMING_KINDS,
                                         IngestError)
from rhofollow.io.ledger.schema import KEYS, row_key
from rhofollow.io.rvdata import RVDataError, cell_number, read_csv_rows, read_rv_file

__all__ = ["RowErrors", "Rows", "sha256", "now_utc", "parse_rv", "parse_occultations",
           "parse_done", "occultation_entry", "done_entry", "target_json", "parse_targets_jsonl",
           "parse_posteriors_jsonl"]


def now_utc() -> str:
    """The current UTC time as ISO text with microseconds and a ``Z``.

    Returns
    -------
    str
        E.g. ``2027-01-10T03:04:05.123456Z``.
    """
    return _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def sha256(data: bytes) -> str:
    """Hex SHA-256 of ``data`` (the content hash of an ingest).

    Parameters
    ----------
    data : bytes
        The ingested content.

    Returns
    -------
    str
        64 hex digits.
    """
    return hashlib.sha256(data).hexdigest()


class RowErrors(IssueCollector):
    """Collects the problems of one source; :meth:`raise_if_any` rejects it with all of them."""

    error = IngestError


class Rows(list):
    """Parsed rows (dicts) with their data-row numbers in ``numbers``."""

    numbers: list[int]


def _read_csv(path: Path, required: tuple[str, ...], errs: RowErrors) -> list[tuple[int, dict]]:
    """Rows of a CSV file as (data-row number, {column: stripped text}); '#' lines are comments."""
    header, rows = read_csv_rows(path, errs)
    missing = [c for c in required if c not in header]
    for c in missing:
        errs.add(0, c, "required column is missing")
    dup = sorted({h for h in header if header.count(h) > 1})
    for c in dup:
        errs.add(0, c, "column appears more than once")
    errs.raise_if_any()
    if not rows and not errs.issues:
        errs.add(0, "", "header only, no data rows")
    return rows


def _num(errs, i, row, col, *, required=True, positive=False, name="") -> float | None:
    return cell_number(errs, i, row, col, name, required=required, positive=positive)


def _utc(errs, i, row, col, *, required=True, name="") -> str | None:
    text = row.get(col, "")
    if text == "":
        if required:
            errs.add(i, col, "value is missing", name)
        return None
    try:
        t = _dt.datetime.fromisoformat(text.replace("Z", "+00:00"))
    except ValueError:
        errs.add(i, col, f"'{text}' is not an ISO date-time (e.g. 2026-03-14T02:30:00)", name)
        return None
    if t.tzinfo is not None:
        t = t.astimezone(_dt.timezone.utc).replace(tzinfo=None)
    return t.isoformat(timespec="seconds")


def _check_within_file(table: str, rows: list[tuple[int, dict]], errs: RowErrors) -> Rows:
    """Drop exact repeats inside one file; flag the same key with different values."""
    seen: dict[str, tuple[int, dict]] = {}
    out = Rows()
    out.numbers = []
    vals = KEYS[table][1]
    for i, r in rows:
        k = row_key(table, r)
        if k in seen:
            j, other = seen[k]
            if any(other[c] != r[c] for c in vals):
                errs.add(i, ",".join(vals), f"same entry as row {j} with different values",
                         r.get("target", ""))
            continue
        seen[k] = (i, r)
        out.append(r)
        out.numbers.append(i)
    return out


# ------------------------------------------------------------------------------- RVs

def _rv_rows(series: dict[str, RVSeries]) -> Rows:
    """The rows to write for RV series read from one file, in the file's row order."""
    recs = []
    for name, s in series.items():
        for row, t, v, e, inst in zip(s.rows.tolist(), s.bjd_tdb.tolist(), s.rv_ms.tolist(),
                                      s.rv_err_ms.tolist(), s.instrument.tolist()):
            recs.append((row, dict(target=name, bjd_tdb=t, rv_ms=v, rv_err_ms=e, instrument=inst)))
    recs.sort(key=lambda x: x[0])
    out = Rows(r for _i, r in recs)
    out.numbers = [i for i, _r in recs]
    return out


def parse_rv(path: Path, target: str | None) -> Rows:
    """Rows of an RV file (CSV or ECSV; ``target`` names a file without a ``target`` column).

    Parameters
    ----------
    path : Path
    target : str or None
        The target of a file without a ``target`` column (required then); with such a column,
        every row must name it.

    Returns
    -------
    Rows
        Dicts ``target``, ``bjd_tdb`` (BJD_TDB, days), ``rv_ms``, ``rv_err_ms`` (m/s),
        ``instrument``, in the file's order, with their data-row numbers.

    Raises
    ------
    IngestError
        With every problem the RV reader found (file, row, column, reason).
    """
    try:
        series = read_rv_file(path, target=target, name_from_stem=False)
    except RVDataError as exc:
        raise IngestError(str(path), exc.issues) from None
    return _rv_rows(series)


# ------------------------------------------------------------------------------- occultations

def _detection_fields(errs, i, r, name, rec) -> None:
    rec["mid_bjd_tdb"] = _num(errs, i, r, "mid_bjd_tdb", name=name)
    rec["mid_err_min"] = _num(errs, i, r, "mid_err_min", positive=True, name=name)
    for c in ("window_start_bjd_tdb", "window_end_bjd_tdb", "depth_limit_ppm"):
        if r.get(c, ""):
            errs.add(i, c, "only a non_detection has a window and a depth limit", name)


def _non_detection_fields(errs, i, r, name, rec) -> None:
    s = rec["window_start_bjd_tdb"] = _num(errs, i, r, "window_start_bjd_tdb", name=name)
    e = rec["window_end_bjd_tdb"] = _num(errs, i, r, "window_end_bjd_tdb", name=name)
    rec["depth_limit_ppm"] = _num(errs, i, r, "depth_limit_ppm", positive=True, name=name)
    if s is not None and e is not None and e <= s:
        errs.add(i, "window_end_bjd_tdb", "the window ends before it starts", name)
    for c in ("mid_bjd_tdb", "mid_err_min"):
        if r.get(c, ""):
            errs.add(i, c, "a non_detection has a window, not a mid-time", name)


def _timing_record(errs, i, r, name) -> dict:
    kind = r.get("kind", "")
    if kind not in TIMING_KINDS:
        errs.add(i, "kind", f"'{kind}' is not one of {', '.join(TIMING_KINDS)}", name)
    rec = dict(target=name, kind=kind, mid_bjd_tdb=None, mid_err_min=None,
               window_start_bjd_tdb=None, window_end_bjd_tdb=None, depth_limit_ppm=None,
               band_um=_num(errs, i, r, "band_um", required=False, positive=True, name=name),
               instrument=r.get("instrument", ""))
    if kind == "detection":
        _detection_fields(errs, i, r, name, rec)
    elif kind == "non_detection":
        _non_detection_fields(errs, i, r, name, rec)
    for c in ("mid_bjd_tdb", "window_start_bjd_tdb", "window_end_bjd_tdb"):
        v = rec[c]
        if v is not None and not 2.0e6 < v < 3.0e6:
            errs.add(i, c, f"{v!r} is not a full BJD_TDB (expected ~2.4e6 days)", name)
    b = rec["band_um"]
    if b is not None and not 0.3 <= b <= 30.0:
        errs.add(i, "band_um", f"{b!r} is outside 0.3-30 microns", name)
    return rec


def parse_occultations(path: Path) -> Rows:
    """Rows of a CSV of occultation detections and non-detections.

    Columns ``target``, ``kind`` (``detection``: ``mid_bjd_tdb`` BJD_TDB days and ``mid_err_min``
    minutes; ``non_detection``: ``window_start_bjd_tdb``, ``window_end_bjd_tdb`` BJD_TDB days and
    ``depth_limit_ppm``), optional ``band_um`` (microns, 0.3-30) and ``instrument``.

    Parameters
    ----------
    path : pathlib.Path
        The CSV file.

    Returns
    -------
    Rows
        One ``occultation_timings`` row per data row (units as in the columns), with the data-row
        numbers.

    Raises
    ------
    IngestError
        With every problem of the file (file, row, column, reason).
    """
    return _parse_rows(path, ("target", "kind"), _timing_record, "occultation_timings")


def _parse_rows(path: Path, required: tuple, make_record, table: str) -> Rows:
    """Every row of a ledger CSV through ``make_record(errs, i, row, name)``, then the within-file
    checks of ``table``; raises :class:`IngestError` with every problem of the file."""
    errs = RowErrors(str(path))
    rows = _read_csv(path, required, errs)
    errs.raise_if_any()
    out = []
    for i, r in rows:
        name = r["target"]
        if not name:
            errs.add(i, "target", "value is missing")
        out.append((i, make_record(errs, i, r, name)))
    errs.raise_if_any()
    checked = _check_within_file(table, out, errs)
    errs.raise_if_any()
    return checked


def occultation_entry(target: str, values: dict) -> dict:
    """The row of one occultation entry given as keyword values (validated like a CSV row).

    Parameters
    ----------
    target : str
        The target's name.
    values : dict
        Column -> value, the columns of :func:`parse_occultations` (numbers in their units, None for
        an empty cell).

    Returns
    -------
    dict
        The ``occultation_timings`` row; a bad entry raises :class:`IngestError` (row 1, column,
        reason).
    """
    r = {k: ("" if v is None else str(v) if isinstance(v, str) else repr(float(v)))
         for k, v in values.items()}
    errs = RowErrors("occultation entry")
    if not target:
        errs.add(1, "target", "value is missing")
    rec = _timing_record(errs, 1, r, target)
    errs.raise_if_any()
    return rec


# ------------------------------------------------------------------------------- observations

def _observation_record(errs, i, r, name) -> dict:
    kind = r.get("kind", "")
    if kind not in OBSERVATION_KINDS:
        errs.add(i, "kind", f"'{kind}' is not one of {', '.join(OBSERVATION_KINDS)}", name)
    outcome = r.get("outcome", "") or "ok"
    if outcome not in OBSERVATION_OUTCOMES:
        errs.add(i, "outcome", f"'{outcome}' is not one of {', '.join(OBSERVATION_OUTCOMES)}",
                 name)
    start = _utc(errs, i, r, "start_utc", name=name)
    end = _utc(errs, i, r, "end_utc", required=False, name=name)
    if start and end and end < start:
        errs.add(i, "end_utc", "ends before it starts", name)
    return dict(target=name, start_utc=start, end_utc=end, instrument=r.get("instrument", ""),
                kind=kind, outcome=outcome, note=r.get("note", ""))


def parse_done(path: Path) -> Rows:
    """Rows of a CSV of observations done.

    Columns ``target``, ``start_utc``, ``kind`` and optional ``end_utc`` (ISO UTC), ``instrument``,
    ``outcome`` (default ok), ``note``.

    Parameters
    ----------
    path : pathlib.Path
        The CSV file.

    Returns
    -------
    Rows
        One ``observations`` row per data row (times ISO UTC), with the data-row numbers.

    Raises
    ------
    IngestError
        With every problem of the file (file, row, column, reason).
    """
    return _parse_rows(path, ("target", "start_utc", "kind"), _observation_record, "observations")


def done_entry(target: str, values: dict) -> dict:
    """The row of one observation given as keyword values (validated like a CSV row).

    Parameters
    ----------
    target : str
        The target's name.
    values : dict
        Column -> text, the columns of :func:`parse_done` (times ISO UTC).

    Returns
    -------
    dict
        The ``observations`` row; a bad entry raises :class:`IngestError` (row 1, column, reason).
    """
    errs = RowErrors("observation entry")
    if not target:
        errs.add(1, "target", "value is missing")
    rec = _observation_record(errs, 1, dict(values, target=target), target)
    errs.raise_if_any()
    return rec


# ------------------------------------------------------------------------------- targets, posteriors

def target_json(t) -> str:
    """Canonical JSON of a catalogue row; non-finite numbers become null.

    Parameters
    ----------
    t : rhofollow.core.types.Target
        The validated catalogue row.

    Returns
    -------
    str
        Compact JSON with sorted keys: ``row``, ``source`` and ``values`` (column -> [value, lower
        error, upper error] in the catalogue's canonical units).
    """
    def f(x):
        return x if math.isfinite(x) else None
    values = {k: [f(m.value), f(m.err_lo), f(m.err_hi)] for k, m in sorted(t.values.items())}
    return json.dumps({"row": t.row, "source": t.source, "values": values}, sort_keys=True,
                      separators=(",", ":"))


def parse_targets_jsonl(path: Path) -> list[tuple[str, str | None, str]]:
    """(name, catalogue JSON or None, source) per line of an exported ``targets.jsonl``.

    Parameters
    ----------
    path : pathlib.Path
        The exported file.

    Returns
    -------
    list of (str, str or None, str)
        Target name, canonical catalogue JSON (None when the target has no catalogue row), source;
        a line that is not a target record raises :class:`IngestError`.
    """
    errs = RowErrors(str(path))
    trows = []
    for i, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
        try:
            d = json.loads(line)
            cat = d["catalogue"]
            trows.append((str(d["name"]), None if cat is None else
                          json.dumps(cat, sort_keys=True, separators=(",", ":")), d["source"]))
        except (ValueError, KeyError, TypeError) as exc:
            errs.add(i, "", f"not a target record ({exc})")
    errs.raise_if_any()
    return trows


def parse_posteriors_jsonl(path: Path) -> list[dict]:
    """Rows of the ``posterior_versions`` table from an exported ``posteriors.jsonl``.

    Parameters
    ----------
    path : pathlib.Path
        The exported file.

    Returns
    -------
    list of dict
        ``posterior_versions`` rows (ESS and sample count as numbers, summary as compact JSON); a
        line that is not a posterior record raises :class:`IngestError`.
    """
    errs = RowErrors(str(path))
    prows = []
    for i, line in enumerate(path.read_text(encoding="utf-8").splitlines(), start=1):
        try:
            d = json.loads(line)
            prows.append(dict(target=str(d["target"]), created_utc=str(d["created_utc"]),
                              source_hash=str(d["source_hash"]),
                              n_samples=int(d["n_samples"]), ess=float(d["ess"]),
                              summary_json=json.dumps(d["summary"], sort_keys=True,
                                                      separators=(",", ":"))))
        except (ValueError, KeyError, TypeError) as exc:
            errs.add(i, "", f"not a posterior record ({exc})")
    errs.raise_if_any()
    return prows
