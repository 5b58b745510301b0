"""The ledger's SQLite layout: tables, row keys, and the migration from version 1.

Only parameterised SQL is run on values; table and column names come from the constants here.
"""
from __future__ import annotations

import json
import sqlite3
from typing import Callable

__all__ = ["SCHEMA_VERSION", "DATA_TABLES", "KEYS", "ORDER", "row_key", "create_schema",
           "migrate_v1_to_v2"]

SCHEMA_VERSION = 2

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

#: The tables of version 1, renamed and copied by the migration.
_V1_TABLES = ("targets", "observations", "rv_measurements", "occultation_timings",
              "posterior_versions")

#: Per data table: the columns that identify a row and the columns that carry its values.
KEYS = {
    "rv_measurements": (("target", "bjd_tdb", "instrument"), ("rv_ms", "rv_err_ms")),
    "occultation_timings": (("target", "kind", "mid_bjd_tdb", "window_start_bjd_tdb",
                             "window_end_bjd_tdb", "instrument"),
                            ("mid_err_min", "depth_limit_ppm", "band_um")),
    "observations": (("target", "start_utc", "kind", "instrument"), ("end_utc", "outcome", "note")),
    "posterior_versions": (("target", "source_hash"),
                           ("created_utc", "n_samples", "ess", "summary_json")),
}
DATA_TABLES = tuple(KEYS)
#: Per data table: the ORDER BY of its read queries and exports.
ORDER = {
    "rv_measurements": "target, bjd_tdb, instrument",
    "occultation_timings": "target, kind, COALESCE(mid_bjd_tdb, window_start_bjd_tdb), instrument",
    "observations": "target, start_utc, kind, instrument",
    "posterior_versions": "target, created_utc, id",
}


def row_key(table: str, row: dict) -> str:
    """The unique key of a data row: JSON of its identifying columns (see :data:`KEYS`).

    Parameters
    ----------
    table : str
        The ledger table of the row.
    row : dict
        The row (column -> value).

    Returns
    -------
    str
        Compact JSON list of the identifying values.
    """
    return json.dumps([row[c] for c in KEYS[table][0]], separators=(",", ":"))


def create_schema(conn: sqlite3.Connection) -> None:
    """Create the current layout in an empty database (inside the caller's transaction).

    Parameters
    ----------
    conn : sqlite3.Connection
        An open connection to an empty database.
    """
    conn.execute("CREATE TABLE schema_version (version INTEGER NOT NULL)")
    for ddl in _SCHEMA_V2_TABLES.values():
        conn.execute(ddl)
    for ddl in _SCHEMA_V2_INDEXES:
        conn.execute(ddl)
    conn.execute("INSERT INTO schema_version (version) VALUES (?)", (SCHEMA_VERSION,))


def migrate_v1_to_v2(conn: sqlite3.Connection, insert: Callable[[str, dict], str]) -> None:
    """Bring a version-1 ledger to version 2 (inside the caller's transaction).

    Version 1 kept detections only (error in days), no ingest log and no row keys. Rows whose target
    is missing get a stub target; a detection's error is converted from days to minutes; a posterior
    version gets the source hash ``v1-<id>``.

    Parameters
    ----------
    conn : sqlite3.Connection
        An open connection to a version-1 ledger.
    insert : callable (str, dict) -> str
        Writes one row of a data table (the store's keyed insert) and returns its key.
    """
    c = conn
    c.execute("PRAGMA defer_foreign_keys = ON")
    for t in _V1_TABLES:
        c.execute(f"ALTER TABLE {t} RENAME TO v1_{t}")
    for ddl in _SCHEMA_V2_TABLES.values():
        c.execute(ddl)
    c.execute("INSERT INTO targets (name, catalogue_json) "
              "SELECT name, catalogue_json FROM v1_targets")
    for t in _V1_TABLES[1:]:
        c.execute(f"INSERT OR IGNORE INTO targets (name) SELECT DISTINCT target FROM v1_{t}")
    for tgt, tu, inst, kind, outc in c.execute(
            "SELECT target, time_utc, instrument, kind, outcome FROM v1_observations").fetchall():
        insert("observations", dict(target=tgt, start_utc=tu, end_utc=None, instrument=inst,
                                    kind=kind, outcome=outc, note=""))
    for tgt, bjd, rv, err, inst in c.execute(
            "SELECT target, bjd_tdb, rv_ms, rv_err_ms, instrument FROM v1_rv_measurements"
    ).fetchall():
        insert("rv_measurements", dict(target=tgt, bjd_tdb=bjd, rv_ms=rv, rv_err_ms=err,
                                       instrument=inst))
    for tgt, mid, err_d in c.execute(
            "SELECT target, mid_bjd_tdb, mid_err_d FROM v1_occultation_timings").fetchall():
        insert("occultation_timings", dict(
            target=tgt, kind="detection", mid_bjd_tdb=mid, mid_err_min=err_d * 1440.0,
            window_start_bjd_tdb=None, window_end_bjd_tdb=None, depth_limit_ppm=None,
            band_um=None, instrument=""))
    for pid, tgt, created, summ in c.execute(
            "SELECT id, target, created_utc, summary_json FROM v1_posterior_versions").fetchall():
        s = json.loads(summ)
        insert("posterior_versions", dict(
            target=tgt, created_utc=created, source_hash=f"v1-{pid}",
            n_samples=int(s.get("n_samples", 0)), ess=float(s.get("ess", 0.0)),
            summary_json=summ))
    for t in _V1_TABLES:
        c.execute(f"DROP TABLE v1_{t}")
    for ddl in _SCHEMA_V2_INDEXES:
        c.execute(ddl)
    c.execute("UPDATE schema_version SET version = 2")
