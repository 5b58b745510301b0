"""The campaign ledger: one SQLite file per campaign that remembers what was observed and measured.

Tables (schema version :data:`SCHEMA_VERSION`)
----------------------------------------------
``schema_version``       one row, the version of the layout below
``ingests``              every file (or single entry) taken in: kind, source, content hash, time, counts
``targets``              target name with the catalogue row it came from (JSON, or NULL for a stub)
``observations``         observations done: UTC start/end, instrument, kind, outcome, note
``rv_measurements``      RVs: BJD_TDB, m/s, error m/s, instrument
``occultation_timings``  a measured mid-time (BJD_TDB, error in minutes) or a non-detection over a
                         window (BJD_TDB start/end) with the depth the observation could have seen (ppm)
``posterior_versions``   target, creation time (UTC), hash of the inputs, N, ESS, summary JSON

Guarantees
----------
* WAL journal; every ingest runs in one ``BEGIN IMMEDIATE`` transaction: all rows of a file or none.
* A file is validated completely before the transaction starts; a malformed file raises
  :class:`IngestError` naming file, row and column, and nothing is written.
* Idempotent: a file whose content hash was already taken adds nothing, and every row has a unique
  key, so overlapping files add only the rows that are new. A row whose key exists with different
  values is a conflict and rejects the file.
* The same measurement twice is refused: a new RV of a target within :data:`RV_SAME_TIME_D` of a
  stored one, a new occultation detection within :data:`OCC_SAME_SIGMA` combined 1-sigma errors
  of a stored detection, or a non-detection window overlapping a stored one, raises
  :class:`DuplicateMeasurementError` (nothing written) unless the ingest is told to ``replace``
  the stored measurement or to ``keep_both``.
* A full disk raises :class:`LedgerError` "no space left on ...; nothing was written" (the
  transaction is rolled back).
* Only parameterised SQL; table and column names come from constants in this module.
* CSV files written by :meth:`Ledger.export` quote text cells a spreadsheet would run as a
  formula (:mod:`rhofollow.io.safety`); the reader undoes that quoting.
"""
from __future__ import annotations

import csv
import datetime as _dt
import hashlib
import json
import math
import os
import sqlite3
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path

from rhofollow.io.atomic import is_no_space
from rhofollow.io.safety import csv_text, csv_unquote
from rhofollow.core.types import RowIssue
from rhofollow.errors import LedgerError

__all__ = [
    "SCHEMA_VERSION", "DEFAULT_LEDGER", "LedgerError", "IngestError", "IngestReport", "Ledger",
    "RVMeasurement", "OccultationTiming", "Observation", "PosteriorVersion",
    "OBSERVATION_KINDS", "OBSERVATION_OUTCOMES", "TIMING_KINDS", "DuplicateMeasurementError",
    "DUPLICATE_POLICIES", "RV_SAME_TIME_D", "OCC_SAME_SIGMA",
]

SCHEMA_VERSION = 2
DEFAULT_LEDGER = "rhofollow-ledger.sqlite"

OBSERVATION_KINDS = ("rv", "occultation", "transit", "photometry", "imaging", "spectroscopy", "other")
OBSERVATION_OUTCOMES = ("ok", "partial", "lost")
TIMING_KINDS = ("detection", "non_detection")

#: Environment variables read only by the test-suite hooks (slow ingest, marker once inside a
#: transaction). They never change what is written.
_DELAY_ENV = "RHOFOLLOW_TEST_INGEST_DELAY_S"
_MARKER_ENV = "RHOFOLLOW_TEST_INGEST_MARKER"

_MAX_REPORTED_ISSUES = 20

#: What to do with a measurement that repeats one already stored: refuse the ingest (default),
#: replace the stored one, or keep both as independent measurements.
DUPLICATE_POLICIES = ("refuse", "replace", "keep_both")
#: Two RVs of one target closer in time than this are one measurement (60 s: shorter than an
#: exposure plus read-out; common practice, no source).
RV_SAME_TIME_D = 60.0 / 86400.0
#: Two occultation detections of one target whose mid-times differ by less than this many
#: combined 1-sigma errors are one measurement (separate events are a period apart).
OCC_SAME_SIGMA = 3.0


class IngestError(LedgerError):
    """A file that cannot be taken in; ``issues`` lists every problem (file, row, column, reason)."""

    def __init__(self, source: str, issues: list[RowIssue]):
        self.source = source
        self.issues = list(issues)
        shown = "; ".join(str(i) for i in self.issues[:_MAX_REPORTED_ISSUES])
        more = len(self.issues) - _MAX_REPORTED_ISSUES
        tail = f"; and {more} more" if more > 0 else ""
        super().__init__(f"{source} rejected, nothing was written: {shown}{tail}")


class DuplicateMeasurementError(IngestError):
    """New measurements repeat stored ones; the ingest wrote nothing (see :data:`DUPLICATE_POLICIES`)."""

    def __init__(self, source: str, issues: list[RowIssue]):
        super().__init__(source, issues)
        self.args = (self.args[0] + ". If it is the same measurement, give --replace to replace the "
                     "stored one; if they are independent measurements, give --keep-both",)


# --------------------------------------------------------------------------------------------
# Read-API records

@dataclass(frozen=True)
class RVMeasurement:
    """One radial velocity (BJD_TDB days, m/s)."""

    target: str
    bjd_tdb: float
    rv_ms: float
    rv_err_ms: float
    instrument: str


@dataclass(frozen=True)
class OccultationTiming:
    """A measured occultation mid-time or a non-detection over a window (times BJD_TDB)."""

    target: str
    kind: str                      # "detection" or "non_detection"
    mid_bjd_tdb: float | None      # detection only
    mid_err_min: float | None      # detection only, 1-sigma, minutes
    window_start_bjd_tdb: float | None   # non-detection only
    window_end_bjd_tdb: float | None     # non-detection only
    depth_limit_ppm: float | None  # non-detection: smallest depth the observation would have seen
    band_um: float | None          # central wavelength of the band, microns (optional)
    instrument: str

    @property
    def mid_err_d(self) -> float | None:
        return None if self.mid_err_min is None else self.mid_err_min / 1440.0


@dataclass(frozen=True)
class Observation:
    """An observation done (UTC ISO times)."""

    target: str
    start_utc: str
    end_utc: str | None
    instrument: str
    kind: str
    outcome: str
    note: str


@dataclass(frozen=True)
class PosteriorVersion:
    """One stored posterior summary of a target."""

    id: int
    target: str
    created_utc: str
    source_hash: str
    n_samples: int
    ess: float
    summary: dict


@dataclass
class IngestReport:
    """What one ingest did: exactly the rows added, per table, and what was skipped."""

    source: str
    kind: str
    content_hash: str
    already_ingested: bool = False
    added: dict[str, list[dict]] = field(default_factory=dict)
    updated: dict[str, list[dict]] = field(default_factory=dict)
    replaced: dict[str, list[dict]] = field(default_factory=dict)
    duplicates: int = 0
    ingest_id: int | None = None

    @property
    def n_added(self) -> int:
        return sum(len(v) for v in self.added.values())

    @property
    def counts(self) -> dict[str, int]:
        return {k: len(v) for k, v in self.added.items() if v}

    def to_dict(self) -> dict:
        d = asdict(self)
        d["n_added"] = self.n_added
        return d

    def describe(self) -> str:
        if self.already_ingested:
            return f"{self.source}: already in the ledger (same content), nothing added"
        parts = [f"{n} {t.replace('_', ' ')}" for t, n in self.counts.items()]
        upd = sum(len(v) for v in self.updated.values())
        s = f"{self.source}: added " + (", ".join(parts) if parts else "nothing")
        if upd:
            s += f"; updated {upd} target row(s)"
        rep = sum(len(v) for v in self.replaced.values())
        if rep:
            s += f"; replaced {rep} stored measurement(s)"
        if self.duplicates:
            s += f"; {self.duplicates} row(s) already present"
        return s


# --------------------------------------------------------------------------------------------
# Schema

_SCHEMA_V1 = """
CREATE TABLE schema_version (version INTEGER NOT NULL);
CREATE TABLE targets (name TEXT PRIMARY KEY, catalogue_json TEXT);
CREATE TABLE observations (id INTEGER PRIMARY KEY, target TEXT NOT NULL, time_utc TEXT NOT NULL,
    instrument TEXT NOT NULL, kind TEXT NOT NULL, outcome TEXT NOT NULL);
CREATE TABLE rv_measurements (id INTEGER PRIMARY KEY, target TEXT NOT NULL, bjd_tdb REAL NOT NULL,
    rv_ms REAL NOT NULL, rv_err_ms REAL NOT NULL, instrument TEXT NOT NULL,
    UNIQUE (target, bjd_tdb, instrument));
CREATE TABLE occultation_timings (id INTEGER PRIMARY KEY, target TEXT NOT NULL,
    mid_bjd_tdb REAL NOT NULL, mid_err_d REAL NOT NULL);
CREATE TABLE posterior_versions (id INTEGER PRIMARY KEY, target TEXT NOT NULL,
    created_utc TEXT NOT NULL, summary_json TEXT NOT NULL);
INSERT INTO schema_version (version) VALUES (1);
"""

_SCHEMA_V2_TABLES = {
    "ingests": """CREATE TABLE ingests (id INTEGER PRIMARY KEY, kind TEXT NOT NULL,
        source TEXT NOT NULL, content_hash TEXT NOT NULL UNIQUE, ingested_utc TEXT NOT NULL,
        counts_json TEXT NOT NULL)""",
    "targets": """CREATE TABLE targets (name TEXT PRIMARY KEY, catalogue_json TEXT, source TEXT,
        ingest_id INTEGER REFERENCES ingests(id))""",
    "observations": """CREATE TABLE observations (id INTEGER PRIMARY KEY,
        target TEXT NOT NULL REFERENCES targets(name), start_utc TEXT NOT NULL, end_utc TEXT,
        instrument TEXT NOT NULL, kind TEXT NOT NULL, outcome TEXT NOT NULL, note TEXT NOT NULL,
        row_key TEXT NOT NULL UNIQUE, ingest_id INTEGER REFERENCES ingests(id))""",
    "rv_measurements": """CREATE TABLE rv_measurements (id INTEGER PRIMARY KEY,
        target TEXT NOT NULL REFERENCES targets(name), bjd_tdb REAL NOT NULL, rv_ms REAL NOT NULL,
        rv_err_ms REAL NOT NULL CHECK (rv_err_ms > 0), instrument TEXT NOT NULL,
        row_key TEXT NOT NULL UNIQUE, ingest_id INTEGER REFERENCES ingests(id))""",
    "occultation_timings": """CREATE TABLE occultation_timings (id INTEGER PRIMARY KEY,
        target TEXT NOT NULL REFERENCES targets(name),
        kind TEXT NOT NULL CHECK (kind IN ('detection', 'non_detection')),
        mid_bjd_tdb REAL, mid_err_min REAL, window_start_bjd_tdb REAL, window_end_bjd_tdb REAL,
        depth_limit_ppm REAL, band_um REAL, instrument TEXT NOT NULL,
        row_key TEXT NOT NULL UNIQUE, ingest_id INTEGER REFERENCES ingests(id),
        CHECK ((kind = 'detection' AND mid_bjd_tdb IS NOT NULL AND mid_err_min > 0)
            OR (kind = 'non_detection' AND window_end_bjd_tdb > window_start_bjd_tdb
                AND depth_limit_ppm > 0)))""",
    "posterior_versions": """CREATE TABLE posterior_versions (id INTEGER PRIMARY KEY,
        target TEXT NOT NULL REFERENCES targets(name), created_utc TEXT NOT NULL,
        source_hash TEXT NOT NULL, n_samples INTEGER NOT NULL, ess REAL NOT NULL,
        summary_json TEXT NOT NULL, row_key TEXT NOT NULL UNIQUE,
        ingest_id INTEGER REFERENCES ingests(id))""",
}
_SCHEMA_V2_INDEXES = (
    "CREATE INDEX IF NOT EXISTS ix_obs_target ON observations(target)",
    "CREATE INDEX IF NOT EXISTS ix_rv_target ON rv_measurements(target)",
    "CREATE INDEX IF NOT EXISTS ix_occ_target ON occultation_timings(target)",
    "CREATE INDEX IF NOT EXISTS ix_post_target ON posterior_versions(target)",
)

#: Per data table: the columns that identify a row and the columns that carry its values.
_KEYS = {
    "rv_measurements": (("target", "bjd_tdb", "instrument"), ("rv_ms", "rv_err_ms")),
    "occultation_timings": (("target", "kind", "mid_bjd_tdb", "window_start_bjd_tdb",
                             "window_end_bjd_tdb", "instrument"),
                            ("mid_err_min", "depth_limit_ppm", "band_um")),
    "observations": (("target", "start_utc", "kind", "instrument"), ("end_utc", "outcome", "note")),
    "posterior_versions": (("target", "source_hash"),
                           ("created_utc", "n_samples", "ess", "summary_json")),
}
_ORDER = {
    "rv_measurements": "target, bjd_tdb, instrument",
    "occultation_timings": "target, kind, COALESCE(mid_bjd_tdb, window_start_bjd_tdb), instrument",
    "observations": "target, start_utc, kind, instrument",
    "posterior_versions": "target, created_utc, id",
}


def _row_key(table: str, row: dict) -> str:
    return json.dumps([row[c] for c in _KEYS[table][0]], separators=(",", ":"))


def _now_utc() -> str:
    return _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


# --------------------------------------------------------------------------------------------
# Parsing of ingest files (all validation before any transaction)

class _RowErrors:
    def __init__(self, source: str):
        self.source = source
        self.issues: list[RowIssue] = []

    def add(self, row: int, column: str, reason: str, name: str = ""):
        self.issues.append(RowIssue(self.source, row, column, reason, name=name))

    def raise_if_any(self):
        if self.issues:
            raise IngestError(self.source, self.issues)


def _read_csv(path: Path, required: tuple[str, ...], errs: _RowErrors) -> list[tuple[int, dict]]:
    """Rows of a CSV file as (data-row number, {column: stripped text}); '#' lines are comments."""
    try:
        raw = path.read_bytes()
    except OSError as exc:
        errs.add(0, "", f"cannot read the file ({exc.strerror or exc})")
        errs.raise_if_any()
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        errs.add(0, "", "not UTF-8 text")
        errs.raise_if_any()
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        errs.add(0, "", "no header line and no data")
        errs.raise_if_any()
    reader = csv.reader(lines)
    header = [csv_unquote(h.strip()) for h in next(reader)]
    missing = [c for c in required if c not in header]
    for c in missing:
        errs.add(0, c, "required column is missing")
    dup = sorted({h for h in header if header.count(h) > 1})
    for c in dup:
        errs.add(0, c, "column appears more than once")
    errs.raise_if_any()
    rows = []
    for i, cells in enumerate(reader, start=1):
        if len(cells) != len(header):
            errs.add(i, "", f"has {len(cells)} fields, the header has {len(header)}")
            continue
        rows.append((i, {h: csv_unquote(c.strip()) for h, c in zip(header, cells)}))
    if not rows and not errs.issues:
        errs.add(0, "", "header only, no data rows")
    return rows


def _num(errs, i, row, col, *, required=True, positive=False, name="") -> float | None:
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


class _Rows(list):
    """Parsed rows (dicts) with their data-row numbers in ``numbers``."""

    numbers: list[int]


def _check_within_file(table: str, rows: list[tuple[int, dict]], errs: _RowErrors) -> list[dict]:
    """Drop exact repeats inside one file; flag the same key with different values."""
    seen: dict[str, tuple[int, dict]] = {}
    out = _Rows()
    out.numbers = []
    vals = _KEYS[table][1]
    for i, r in rows:
        k = _row_key(table, r)
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


def _parse_rv(path: Path, target: str | None, errs: _RowErrors) -> list[dict]:
    rows = _read_csv(path, ("bjd_tdb", "rv_ms", "rv_err_ms", "instrument"), errs)
    has_target = bool(rows) and "target" in rows[0][1]
    if not has_target and not target:
        errs.add(0, "target", "the file has no 'target' column; name the target (--target)")
    errs.raise_if_any()
    out = []
    for i, r in rows:
        name = r.get("target", "") if has_target else target
        if has_target and target and name != target:
            errs.add(i, "target", f"'{name}' differs from the target given ({target})", name)
        if not name:
            errs.add(i, "target", "value is missing")
        inst = r.get("instrument", "")
        if not inst:
            errs.add(i, "instrument", "value is missing", name or "")
        rec = dict(target=name, bjd_tdb=_num(errs, i, r, "bjd_tdb", name=name or ""),
                   rv_ms=_num(errs, i, r, "rv_ms", name=name or ""),
                   rv_err_ms=_num(errs, i, r, "rv_err_ms", positive=True, name=name or ""),
                   instrument=inst)
        if rec["bjd_tdb"] is not None and not 2.0e6 < rec["bjd_tdb"] < 3.0e6:
            errs.add(i, "bjd_tdb", f"{r['bjd_tdb']} is not a full BJD_TDB (expected ~2.4e6 days)",
                     name or "")
        out.append((i, rec))
    errs.raise_if_any()
    return _check_within_file("rv_measurements", out, errs)


def _timing_record(errs, i, r, name) -> dict:
    kind = r.get("kind", "")
    if kind not in TIMING_KINDS:
        errs.add(i, "kind", f"'{kind}' is not one of {', '.join(TIMING_KINDS)}", name)
    rec = dict(target=name, kind=kind, mid_bjd_tdb=None, mid_err_min=None,
               window_start_bjd_tdb=None, window_end_bjd_tdb=None, depth_limit_ppm=None,
               band_um=_num(errs, i, r, "band_um", required=False, positive=True, name=name),
               instrument=r.get("instrument", ""))
    if kind == "detection":
        rec["mid_bjd_tdb"] = _num(errs, i, r, "mid_bjd_tdb", name=name)
        rec["mid_err_min"] = _num(errs, i, r, "mid_err_min", positive=True, name=name)
        for c in ("window_start_bjd_tdb", "window_end_bjd_tdb", "depth_limit_ppm"):
            if r.get(c, ""):
                errs.add(i, c, "only a non_detection has a window and a depth limit", name)
    elif kind == "non_detection":
        s = rec["window_start_bjd_tdb"] = _num(errs, i, r, "window_start_bjd_tdb", name=name)
        e = rec["window_end_bjd_tdb"] = _num(errs, i, r, "window_end_bjd_tdb", name=name)
        rec["depth_limit_ppm"] = _num(errs, i, r, "depth_limit_ppm", positive=True, name=name)
        if s is not None and e is not None and e <= s:
            errs.add(i, "window_end_bjd_tdb", "the window ends before it starts", name)
        for c in ("mid_bjd_tdb", "mid_err_min"):
            if r.get(c, ""):
                errs.add(i, c, "a non_detection has a window, not a mid-time", name)
    for c in ("mid_bjd_tdb", "window_start_bjd_tdb", "window_end_bjd_tdb"):
        v = rec[c]
        if v is not None and not 2.0e6 < v < 3.0e6:
            errs.add(i, c, f"{v!r} is not a full BJD_TDB (expected ~2.4e6 days)", name)
    b = rec["band_um"]
    if b is not None and not 0.3 <= b <= 30.0:
        errs.add(i, "band_um", f"{b!r} is outside 0.3-30 microns", name)
    return rec


def _parse_occultations(path: Path, errs: _RowErrors) -> list[dict]:
    rows = _read_csv(path, ("target", "kind"), errs)
    errs.raise_if_any()
    out = []
    for i, r in rows:
        name = r["target"]
        if not name:
            errs.add(i, "target", "value is missing")
        out.append((i, _timing_record(errs, i, r, name)))
    errs.raise_if_any()
    return _check_within_file("occultation_timings", out, errs)


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


def _parse_done(path: Path, errs: _RowErrors) -> list[dict]:
    rows = _read_csv(path, ("target", "start_utc", "kind"), errs)
    errs.raise_if_any()
    out = []
    for i, r in rows:
        name = r["target"]
        if not name:
            errs.add(i, "target", "value is missing")
        out.append((i, _observation_record(errs, i, r, name)))
    errs.raise_if_any()
    return _check_within_file("observations", out, errs)


def _target_json(t) -> str:
    """Canonical JSON of a catalogue row (a table_types.Target)."""
    def f(x):
        return x if math.isfinite(x) else None
    values = {k: [f(m.value), f(m.err_lo), f(m.err_hi)] for k, m in sorted(t.values.items())}
    return json.dumps({"row": t.row, "source": t.source, "values": values}, sort_keys=True,
                      separators=(",", ":"))


# --------------------------------------------------------------------------------------------
# The ledger

class Ledger:
    """A campaign ledger stored in one SQLite file (created on first use).

    Parameters
    ----------
    path : str or path-like
        The database file. Its parent folder must exist.
    timeout : float, seconds
        How long to wait for another process's write to finish before giving up.
    """

    def __init__(self, path: str | os.PathLike = DEFAULT_LEDGER, *, timeout: float = 60.0):
        self.path = Path(path)
        if not self.path.parent.exists():
            raise LedgerError(f"{self.path}: the folder {self.path.parent} does not exist")
        try:
            self._conn = sqlite3.connect(str(self.path), timeout=timeout, isolation_level=None)
            self._conn.execute("PRAGMA busy_timeout = %d" % int(timeout * 1000))
            mode = self._conn.execute("PRAGMA journal_mode = WAL").fetchone()[0]
            self._conn.execute("PRAGMA synchronous = FULL")
            self._conn.execute("PRAGMA foreign_keys = ON")
            self._migrate()
        except sqlite3.DatabaseError as exc:
            if is_no_space(exc):
                raise self._no_space() from exc
            raise LedgerError(f"{self.path}: not a usable ledger database ({exc})") from exc
        self.journal_mode = mode

    # -- life cycle
    def close(self):
        self._conn.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def _begin(self):
        try:
            self._conn.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as exc:
            if is_no_space(exc):
                raise self._no_space() from exc
            raise

    def _rollback(self):
        """Roll back if a transaction is open (SQLite ends it itself on some errors, a full disk
        among them, and a second ROLLBACK would hide the real error)."""
        if self._conn.in_transaction:
            self._conn.execute("ROLLBACK")

    def _no_space(self) -> LedgerError:
        return LedgerError(f"no space left on {self.path.parent.absolute()} (ledger {self.path}); "
                           "nothing was written")

    @property
    def schema_version(self) -> int:
        return int(self._conn.execute("SELECT version FROM schema_version").fetchone()[0])

    def _migrate(self):
        c = self._conn
        self._begin()
        try:
            has = c.execute("SELECT name FROM sqlite_master WHERE type='table' AND "
                            "name='schema_version'").fetchone()
            if has is None:
                others = c.execute("SELECT count(*) FROM sqlite_master WHERE type='table'"
                                   ).fetchone()[0]
                if others:
                    raise LedgerError(f"{self.path}: an SQLite file that is not a rhofollow ledger")
                c.execute("CREATE TABLE schema_version (version INTEGER NOT NULL)")
                for ddl in _SCHEMA_V2_TABLES.values():
                    c.execute(ddl)
                for ddl in _SCHEMA_V2_INDEXES:
                    c.execute(ddl)
                c.execute("INSERT INTO schema_version (version) VALUES (?)", (SCHEMA_VERSION,))
            else:
                v = int(c.execute("SELECT version FROM schema_version").fetchone()[0])
                if v > SCHEMA_VERSION:
                    raise LedgerError(f"{self.path}: ledger schema version {v} is newer than this "
                                      f"rhofollow understands ({SCHEMA_VERSION}); upgrade rhofollow")
                if v == 1:
                    self._migrate_v1_to_v2()
            c.execute("COMMIT")
        except BaseException as exc:
            self._rollback()
            if is_no_space(exc) and not isinstance(exc, LedgerError):
                raise self._no_space() from exc
            raise

    def _migrate_v1_to_v2(self):
        """Version 1 kept detections only (error in days), no ingest log and no row keys."""
        c = self._conn
        c.execute("PRAGMA defer_foreign_keys = ON")
        for t in ("targets", "observations", "rv_measurements", "occultation_timings",
                  "posterior_versions"):
            c.execute(f"ALTER TABLE {t} RENAME TO v1_{t}")
        for ddl in _SCHEMA_V2_TABLES.values():
            c.execute(ddl)
        c.execute("INSERT INTO targets (name, catalogue_json) "
                  "SELECT name, catalogue_json FROM v1_targets")
        # rows of data tables whose target is missing get a stub target
        for t in ("observations", "rv_measurements", "occultation_timings", "posterior_versions"):
            c.execute(f"INSERT OR IGNORE INTO targets (name) SELECT DISTINCT target FROM v1_{t}")
        for tgt, tu, inst, kind, outc in c.execute(
                "SELECT target, time_utc, instrument, kind, outcome FROM v1_observations").fetchall():
            self._insert("observations", dict(target=tgt, start_utc=tu, end_utc=None,
                                              instrument=inst, kind=kind, outcome=outc, note=""))
        for tgt, bjd, rv, err, inst in c.execute(
                "SELECT target, bjd_tdb, rv_ms, rv_err_ms, instrument FROM v1_rv_measurements"
        ).fetchall():
            self._insert("rv_measurements", dict(target=tgt, bjd_tdb=bjd, rv_ms=rv, rv_err_ms=err,
                                                 instrument=inst))
        for tgt, mid, err_d in c.execute(
                "SELECT target, mid_bjd_tdb, mid_err_d FROM v1_occultation_timings").fetchall():
            self._insert("occultation_timings", dict(
                target=tgt, kind="detection", mid_bjd_tdb=mid, mid_err_min=err_d * 1440.0,
                window_start_bjd_tdb=None, window_end_bjd_tdb=None, depth_limit_ppm=None,
                band_um=None, instrument=""))
        for pid, tgt, created, summ in c.execute(
                "SELECT id, target, created_utc, summary_json FROM v1_posterior_versions").fetchall():
            s = json.loads(summ)
            self._insert("posterior_versions", dict(
                target=tgt, created_utc=created, source_hash=f"v1-{pid}",
                n_samples=int(s.get("n_samples", 0)), ess=float(s.get("ess", 0.0)),
                summary_json=summ))
        for t in ("targets", "observations", "rv_measurements", "occultation_timings",
                  "posterior_versions"):
            c.execute(f"DROP TABLE v1_{t}")
        for ddl in _SCHEMA_V2_INDEXES:
            c.execute(ddl)
        c.execute("UPDATE schema_version SET version = 2")

    # -- low-level writes (inside a transaction)
    def _insert(self, table: str, row: dict, ingest_id: int | None = None) -> str:
        """Insert one row; returns 'added', 'duplicate' or 'conflict'."""
        row = dict(row, row_key=_row_key(table, row), ingest_id=ingest_id)
        vals = _KEYS[table][1]
        old = self._conn.execute(
            f"SELECT {', '.join(vals)} FROM {table} WHERE row_key = ?", (row["row_key"],)
        ).fetchone()
        if old is not None:
            same = all(_same(o, row[c]) for o, c in zip(old, vals))
            return "duplicate" if same else "conflict"
        cols = list(row)
        self._conn.execute(f"INSERT INTO {table} ({', '.join(cols)}) VALUES "
                           f"({', '.join('?' * len(cols))})", [row[c] for c in cols])
        return "added"

    def _ensure_target(self, name: str, ingest_id: int | None, report: IngestReport):
        cur = self._conn.execute("INSERT OR IGNORE INTO targets (name, ingest_id) VALUES (?, ?)",
                                 (name, ingest_id))
        if cur.rowcount:
            report.added.setdefault("targets", []).append({"name": name, "catalogue": None})

    def _same_measurements(self, table: str, rows: list[dict]) -> list[tuple[int, list[tuple]]]:
        """(index in ``rows``, stored rows [(id, row dict)]) of each new row that repeats a stored
        measurement under another key (an identical key is the idempotent re-ingest case)."""
        if table not in ("rv_measurements", "occultation_timings") or not rows:
            return []
        cols = ("id", "row_key") + _KEYS[table][0] + _KEYS[table][1]
        stored: dict[str, list[dict]] = {}
        for name in sorted({r["target"] for r in rows}):
            stored[name] = [dict(zip(cols, v)) for v in self._conn.execute(
                f"SELECT {', '.join(cols)} FROM {table} WHERE target = ?", (name,))]
        out = []
        if table == "rv_measurements":
            import numpy as np

            arrays = {}
            for name, old in stored.items():
                old.sort(key=lambda o: o["bjd_tdb"])
                arrays[name] = np.array([o["bjd_tdb"] for o in old], dtype=float)
            for n, r in enumerate(rows):
                t, old = arrays[r["target"]], stored[r["target"]]
                lo, hi = np.searchsorted(t, [r["bjd_tdb"] - RV_SAME_TIME_D, r["bjd_tdb"] + RV_SAME_TIME_D],
                                         side="left")
                key = _row_key(table, r)
                hits = [old[j] for j in range(lo, hi) if old[j]["row_key"] != key
                        and abs(old[j]["bjd_tdb"] - r["bjd_tdb"]) <= RV_SAME_TIME_D]
                if hits:
                    out.append((n, hits))
            return out
        for n, r in enumerate(rows):
            key = _row_key(table, r)
            hits = []
            for o in stored[r["target"]]:
                if o["row_key"] == key or o["kind"] != r["kind"]:
                    continue
                if r["kind"] == "detection":
                    tol = OCC_SAME_SIGMA * math.hypot(r["mid_err_min"], o["mid_err_min"]) / 1440.0
                    same = abs(o["mid_bjd_tdb"] - r["mid_bjd_tdb"]) <= tol
                else:
                    same = (o["window_start_bjd_tdb"] < r["window_end_bjd_tdb"]
                            and r["window_start_bjd_tdb"] < o["window_end_bjd_tdb"])
                if same:
                    hits.append(o)
            if hits:
                out.append((n, hits))
        return out

    def _ingest(self, kind: str, source: str, content_hash: str, table: str | None,
                rows: list[dict], target_rows: list[tuple[str, str | None, str]] = (),
                duplicates: str = "refuse") -> IngestReport:
        """Write parsed rows in one transaction; a content hash seen before adds nothing.

        ``duplicates`` (one of :data:`DUPLICATE_POLICIES`) says what to do with a row that
        repeats a stored measurement (see the module notes).
        """
        if duplicates not in DUPLICATE_POLICIES:
            raise ValueError(f"duplicates must be one of {DUPLICATE_POLICIES}, got {duplicates!r}")
        report = IngestReport(source=source, kind=kind, content_hash=content_hash)
        delay = float(os.environ.get(_DELAY_ENV, "0") or 0)
        marker = os.environ.get(_MARKER_ENV)
        c = self._conn
        self._begin()
        try:
            old = c.execute("SELECT id FROM ingests WHERE content_hash = ?",
                            (content_hash,)).fetchone()
            if old is not None:
                report.already_ingested = True
                report.ingest_id = int(old[0])
                c.execute("ROLLBACK")
                return report
            cur = c.execute("INSERT INTO ingests (kind, source, content_hash, ingested_utc, "
                            "counts_json) VALUES (?, ?, ?, ?, ?)",
                            (kind, source, content_hash, _now_utc(), "{}"))
            iid = report.ingest_id = int(cur.lastrowid)
            for name, cat_json, tsource in target_rows:
                prev = c.execute("SELECT catalogue_json FROM targets WHERE name = ?",
                                 (name,)).fetchone()
                rec = {"name": name, "catalogue": None if cat_json is None else json.loads(cat_json)}
                if prev is None:
                    c.execute("INSERT INTO targets (name, catalogue_json, source, ingest_id) "
                              "VALUES (?, ?, ?, ?)", (name, cat_json, tsource, iid))
                    report.added.setdefault("targets", []).append(rec)
                elif cat_json is not None and prev[0] != cat_json:
                    c.execute("UPDATE targets SET catalogue_json = ?, source = ?, ingest_id = ? "
                              "WHERE name = ?", (cat_json, tsource, iid, name))
                    report.updated.setdefault("targets", []).append(rec)
                else:
                    report.duplicates += 1
            if duplicates != "keep_both":
                same = self._same_measurements(table, rows) if table else []
                if same and duplicates == "refuse":
                    numbers = getattr(rows, "numbers", None)
                    issues = [RowIssue(source, numbers[n] if numbers else n + 1,
                                       "window_start_bjd_tdb" if rows[n].get("kind") == "non_detection"
                                       else _MEASURE_COL[table],
                                       f"the same measurement as the ledger's {_describe(table, old[0])}"
                                       + (f" (and {len(old) - 1} more)" if len(old) > 1 else ""),
                                       name=rows[n]["target"]) for n, old in same]
                    raise DuplicateMeasurementError(source, issues)
                gone = {o["id"]: o for _n, old in same for o in old}
                for oid, o in sorted(gone.items()):
                    c.execute(f"DELETE FROM {table} WHERE id = ?", (oid,))
                    report.replaced.setdefault(table, []).append(
                        {k: o[k] for k in _KEYS[table][0] + _KEYS[table][1]})
            conflicts = []
            for n, row in enumerate(rows):
                self._ensure_target(row["target"], iid, report)
                status = self._insert(table, row, iid)
                if status == "added":
                    report.added.setdefault(table, []).append(row)
                elif status == "duplicate":
                    report.duplicates += 1
                else:
                    conflicts.append(row)
                if n == 0 and marker:
                    Path(marker).write_text(str(os.getpid()))
                if delay:
                    time.sleep(delay)
            if conflicts:
                issues = [RowIssue(source, 0, ",".join(_KEYS[table][1]),
                                   f"already in the ledger with different values: "
                                   f"{_brief(table, r)}", name=r["target"]) for r in conflicts]
                raise IngestError(source, issues)
            c.execute("UPDATE ingests SET counts_json = ? WHERE id = ?",
                      (json.dumps(report.counts, sort_keys=True), iid))
            c.execute("COMMIT")
        except BaseException as exc:
            self._rollback()
            if is_no_space(exc) and not isinstance(exc, LedgerError):
                raise self._no_space() from exc
            raise
        return report

    # -- ingest API
    def ingest_rv_file(self, path: str | os.PathLike, target: str | None = None, *,
                       duplicates: str = "refuse") -> IngestReport:
        """Take in an RV CSV (bjd_tdb, rv_ms, rv_err_ms, instrument[, target]); ``duplicates``
        as in :data:`DUPLICATE_POLICIES`."""
        path = Path(path)
        errs = _RowErrors(str(path))
        rows = _parse_rv(path, target, errs)
        errs.raise_if_any()
        h = _sha256(b"rv\0" + (target or "").encode() + b"\0" + path.read_bytes())
        return self._ingest("rv", str(path), h, "rv_measurements", rows, duplicates=duplicates)

    def ingest_occultation_file(self, path: str | os.PathLike, *, duplicates: str = "refuse") -> IngestReport:
        """Take in a CSV of occultation timings and non-detections (see module docs)."""
        path = Path(path)
        errs = _RowErrors(str(path))
        rows = _parse_occultations(path, errs)
        errs.raise_if_any()
        h = _sha256(b"occultation\0" + path.read_bytes())
        return self._ingest("occultation", str(path), h, "occultation_timings", rows,
                            duplicates=duplicates)

    def add_occultation(self, target: str, *, kind: str = "detection",
                        mid_bjd_tdb: float | None = None, mid_err_min: float | None = None,
                        window_start_bjd_tdb: float | None = None,
                        window_end_bjd_tdb: float | None = None,
                        depth_limit_ppm: float | None = None, band_um: float | None = None,
                        instrument: str = "", duplicates: str = "refuse") -> IngestReport:
        """Record one occultation timing or non-detection (validated like a CSV row)."""
        r = {k: ("" if v is None else str(v) if isinstance(v, str) else repr(float(v)))
             for k, v in dict(kind=kind, mid_bjd_tdb=mid_bjd_tdb, mid_err_min=mid_err_min,
                              window_start_bjd_tdb=window_start_bjd_tdb,
                              window_end_bjd_tdb=window_end_bjd_tdb,
                              depth_limit_ppm=depth_limit_ppm, band_um=band_um,
                              instrument=instrument).items()}
        errs = _RowErrors("occultation entry")
        if not target:
            errs.add(1, "target", "value is missing")
        rec = _timing_record(errs, 1, r, target)
        errs.raise_if_any()
        h = _sha256(b"occultation-entry\0" + json.dumps(rec, sort_keys=True).encode())
        return self._ingest("occultation", f"occultation entry for {target}", h,
                            "occultation_timings", [rec], duplicates=duplicates)

    def ingest_done_file(self, path: str | os.PathLike) -> IngestReport:
        """Take in a CSV of observations done (target, start_utc, kind[, end_utc, instrument,
        outcome, note])."""
        path = Path(path)
        errs = _RowErrors(str(path))
        rows = _parse_done(path, errs)
        errs.raise_if_any()
        h = _sha256(b"done\0" + path.read_bytes())
        return self._ingest("done", str(path), h, "observations", rows)

    def add_done(self, target: str, start_utc: str, kind: str, *, end_utc: str | None = None,
                 instrument: str = "", outcome: str = "ok", note: str = "") -> IngestReport:
        """Record one observation done."""
        r = dict(target=target, start_utc=start_utc or "", end_utc=end_utc or "",
                 instrument=instrument or "", kind=kind or "", outcome=outcome or "",
                 note=note or "")
        errs = _RowErrors("observation entry")
        if not target:
            errs.add(1, "target", "value is missing")
        rec = _observation_record(errs, 1, r, target)
        errs.raise_if_any()
        h = _sha256(b"done-entry\0" + json.dumps(rec, sort_keys=True).encode())
        return self._ingest("done", f"observation entry for {target}", h, "observations", [rec])

    def add_targets(self, targets, source: str) -> IngestReport:
        """Record catalogue rows (``table_types.Target``); a changed row replaces the old one."""
        trows = [(t.name, _target_json(t), source) for t in targets]
        h = _sha256(b"targets\0" + json.dumps(trows, sort_keys=True).encode())
        return self._ingest("targets", source, h, None, [], trows)

    def add_posterior_version(self, target: str, *, source_hash: str, n_samples: int, ess: float,
                              summary: dict, created_utc: str | None = None) -> IngestReport:
        """Store a posterior summary; the same (target, source_hash) twice adds nothing."""
        rec = dict(target=target, created_utc=created_utc or _now_utc(), source_hash=source_hash,
                   n_samples=int(n_samples), ess=float(ess),
                   summary_json=json.dumps(summary, sort_keys=True, separators=(",", ":")))
        h = _sha256(b"posterior\0" + f"{target}\0{source_hash}".encode())
        return self._ingest("posterior", f"posterior of {target}", h, "posterior_versions", [rec])

    # -- read API
    def targets(self) -> list[str]:
        """All target names, sorted."""
        return [r[0] for r in self._conn.execute("SELECT name FROM targets ORDER BY name")]

    def catalogue_row(self, target: str) -> dict | None:
        """The stored catalogue row of a target (``{"row", "source", "values"}``) or None."""
        r = self._conn.execute("SELECT catalogue_json FROM targets WHERE name = ?",
                               (target,)).fetchone()
        return None if r is None or r[0] is None else json.loads(r[0])

    def rv_measurements(self, target: str) -> list[RVMeasurement]:
        """RVs of a target in time order."""
        q = ("SELECT target, bjd_tdb, rv_ms, rv_err_ms, instrument FROM rv_measurements "
             "WHERE target = ? ORDER BY bjd_tdb, instrument")
        return [RVMeasurement(*r) for r in self._conn.execute(q, (target,))]

    def occultation_timings(self, target: str) -> list[OccultationTiming]:
        """Detections and non-detections of a target's occultation."""
        q = ("SELECT target, kind, mid_bjd_tdb, mid_err_min, window_start_bjd_tdb, "
             "window_end_bjd_tdb, depth_limit_ppm, band_um, instrument FROM occultation_timings "
             f"WHERE target = ? ORDER BY {_ORDER['occultation_timings']}")
        return [OccultationTiming(*r) for r in self._conn.execute(q, (target,))]

    def done(self, target: str | None = None, kind: str | None = None) -> list[Observation]:
        """Observations done (of one target and/or one kind), in time order."""
        q = ("SELECT target, start_utc, end_utc, instrument, kind, outcome, note FROM observations "
             "WHERE (? IS NULL OR target = ?) AND (? IS NULL OR kind = ?) "
             "ORDER BY start_utc, target")
        return [Observation(*r) for r in self._conn.execute(q, (target, target, kind, kind))]

    def is_done(self, target: str, kind: str | None = None) -> bool:
        """True when an observation of that target (and kind) succeeded (outcome 'ok')."""
        return any(o.outcome == "ok" for o in self.done(target, kind))

    def posterior_versions(self, target: str) -> list[PosteriorVersion]:
        """Stored posterior summaries of a target, oldest first."""
        q = ("SELECT id, target, created_utc, source_hash, n_samples, ess, summary_json FROM "
             "posterior_versions WHERE target = ? ORDER BY created_utc, id")
        return [PosteriorVersion(*r[:6], json.loads(r[6]))
                for r in self._conn.execute(q, (target,))]

    def latest_posterior(self, target: str) -> PosteriorVersion | None:
        v = self.posterior_versions(target)
        return v[-1] if v else None

    def ingests(self) -> list[dict]:
        """The ingest log: id, kind, source, content hash, time, counts."""
        q = "SELECT id, kind, source, content_hash, ingested_utc, counts_json FROM ingests ORDER BY id"
        return [dict(id=r[0], kind=r[1], source=r[2], content_hash=r[3], ingested_utc=r[4],
                     counts=json.loads(r[5])) for r in self._conn.execute(q)]

    def summary(self) -> list[dict]:
        """Per target: counts of RVs, detections, non-detections, observations, posteriors."""
        out = []
        for name in self.targets():
            occ = self.occultation_timings(name)
            latest = self.latest_posterior(name)
            out.append(dict(
                name=name, has_catalogue_row=self.catalogue_row(name) is not None,
                n_rv=len(self.rv_measurements(name)),
                n_occ_detections=sum(o.kind == "detection" for o in occ),
                n_occ_non_detections=sum(o.kind == "non_detection" for o in occ),
                n_done=len(self.done(name)),
                n_posteriors=len(self.posterior_versions(name)),
                latest_posterior_utc=latest.created_utc if latest else None,
            ))
        return out

    def integrity_ok(self) -> bool:
        r = self._conn.execute("PRAGMA integrity_check").fetchone()[0]
        fk = self._conn.execute("PRAGMA foreign_key_check").fetchall()
        return r == "ok" and not fk

    def content(self) -> dict:
        """Everything the ledger knows, without ingest bookkeeping (for comparisons)."""
        out = {"targets": [[n, self.catalogue_row(n)] for n in self.targets()]}
        for table in _KEYS:
            cols = list(_KEYS[table][0]) + list(_KEYS[table][1])
            out[table] = [list(r) for r in self._conn.execute(
                f"SELECT {', '.join(cols)} FROM {table} ORDER BY {_ORDER[table]}")]
        return out

    # -- export / import
    def export(self, folder: str | os.PathLike) -> list[Path]:
        """Write the ledger as ingestable files in ``folder`` (created); returns the paths.

        ``targets.jsonl``, ``rv.csv``, ``occultations.csv``, ``done.csv``, ``posteriors.jsonl``;
        :meth:`import_folder` on a fresh ledger reproduces :meth:`content` exactly.
        """
        from rhofollow.io.atomic import atomic_write_text

        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        c = self._conn
        paths = []
        lines = []
        for name in self.targets():
            r = c.execute("SELECT catalogue_json, source FROM targets WHERE name = ?",
                          (name,)).fetchone()
            lines.append(json.dumps({"name": name, "catalogue": None if r[0] is None
                                     else json.loads(r[0]), "source": r[1]}, sort_keys=True))
        paths.append(atomic_write_text(folder / "targets.jsonl", "".join(x + "\n" for x in lines)))

        def table_csv(fname, table, cols):
            rows = ([repr(v) if isinstance(v, float) else v for v in r]
                    for r in c.execute(f"SELECT {', '.join(cols)} FROM {table} ORDER BY {_ORDER[table]}"))
            paths.append(atomic_write_text(folder / fname, csv_text(cols, rows)))

        table_csv("rv.csv", "rv_measurements",
                  ["target", "bjd_tdb", "rv_ms", "rv_err_ms", "instrument"])
        table_csv("occultations.csv", "occultation_timings",
                  ["target", "kind", "mid_bjd_tdb", "mid_err_min", "window_start_bjd_tdb",
                   "window_end_bjd_tdb", "depth_limit_ppm", "band_um", "instrument"])
        table_csv("done.csv", "observations",
                  ["target", "start_utc", "end_utc", "instrument", "kind", "outcome", "note"])
        lines = [json.dumps({"target": r[0], "created_utc": r[1], "source_hash": r[2],
                             "n_samples": r[3], "ess": r[4], "summary": json.loads(r[5])},
                            sort_keys=True)
                 for r in c.execute("SELECT target, created_utc, source_hash, n_samples, ess, "
                                    f"summary_json FROM posterior_versions "
                                    f"ORDER BY {_ORDER['posterior_versions']}")]
        paths.append(atomic_write_text(folder / "posteriors.jsonl",
                                       "".join(x + "\n" for x in lines)))
        return paths

    def import_folder(self, folder: str | os.PathLike) -> list[IngestReport]:
        """Take in a folder written by :meth:`export` (each file in its own transaction)."""
        folder = Path(folder)
        need = ["targets.jsonl", "rv.csv", "occultations.csv", "done.csv", "posteriors.jsonl"]
        missing = [n for n in need if not (folder / n).exists()]
        if missing:
            raise IngestError(str(folder), [RowIssue(str(folder / n), 0, "", "file is missing")
                                            for n in missing])
        reports = []
        tpath = folder / "targets.jsonl"
        errs = _RowErrors(str(tpath))
        trows = []
        for i, line in enumerate(tpath.read_text(encoding="utf-8").splitlines(), start=1):
            try:
                d = json.loads(line)
                cat = d["catalogue"]
                trows.append((str(d["name"]), None if cat is None else
                              json.dumps(cat, sort_keys=True, separators=(",", ":")), d["source"]))
            except (ValueError, KeyError, TypeError) as exc:
                errs.add(i, "", f"not a target record ({exc})")
        errs.raise_if_any()
        if trows:
            h = _sha256(b"targets\0" + tpath.read_bytes())
            reports.append(self._ingest("targets", str(tpath), h, None, [], trows))
        for fname, fn in (("rv.csv", self.ingest_rv_file),
                          ("occultations.csv", self.ingest_occultation_file),
                          ("done.csv", self.ingest_done_file)):
            p = folder / fname
            if len(p.read_text(encoding="utf-8").splitlines()) > 1:
                reports.append(fn(p))
        ppath = folder / "posteriors.jsonl"
        errs = _RowErrors(str(ppath))
        prows = []
        for i, line in enumerate(ppath.read_text(encoding="utf-8").splitlines(), start=1):
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
        if prows:
            h = _sha256(b"posteriors\0" + ppath.read_bytes())
            reports.append(self._ingest("posterior", str(ppath), h, "posterior_versions", prows))
        return reports


def _same(a, b) -> bool:
    if isinstance(a, float) and isinstance(b, float):
        return a == b or (math.isnan(a) and math.isnan(b))
    return a == b


_MEASURE_COL = {"rv_measurements": "bjd_tdb", "occultation_timings": "mid_bjd_tdb"}


def _describe(table: str, o: dict) -> str:
    """A stored measurement in words (for the duplicate message)."""
    inst = f" ({o['instrument']})" if o.get("instrument") else ""
    if table == "rv_measurements":
        return f"RV at BJD_TDB {o['bjd_tdb']:.5f}: {o['rv_ms']:g} +/- {o['rv_err_ms']:g} m/s{inst}"
    if o["kind"] == "detection":
        return f"occultation detection at BJD_TDB {o['mid_bjd_tdb']:.5f} +/- {o['mid_err_min']:g} min{inst}"
    return (f"occultation non-detection over BJD_TDB {o['window_start_bjd_tdb']:.5f}-"
            f"{o['window_end_bjd_tdb']:.5f}{inst}")


def _brief(table: str, row: dict) -> str:
    return ", ".join(f"{c}={row[c]}" for c in _KEYS[table][0] if row.get(c) not in (None, ""))
