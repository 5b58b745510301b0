"""The ledger store: the SQLite connection, its transactions, and every write.

Each ingest runs in one ``BEGIN IMMEDIATE`` transaction (all rows of a file or none); a content
hash seen before adds nothing; a row whose key exists with other values is a conflict and rejects
the file; a full disk rolls back and says so. The read API comes from
:class:`~rhofollow.io.ledger.queries.LedgerQueries`, export and import from
:class:`~rhofollow.io.ledger.transfer.LedgerTransfer`.
"""
from __future__ import annotations

import json
import math
import os
import sqlite3
import time
from pathlib import Path

from rhofollow.core.types import RowIssue
from rhofollow.io.atomic import is_no_space
from rhofollow.io.ledger import ingest as _parse
from rhofollow.io.ledger.duplicates import brief, duplicate_issues, same_measurements
from rhofollow.io.ledger.ingest import sha256
from rhofollow.io.ledger.queries import LedgerQueries
from rhofollow.io.ledger.records import (DEFAULT_LEDGER, DUPLICATE_POLICIES, DuplicateMeasurementError,
                                         IngestError, IngestReport, LedgerError)
from rhofollow.io.ledger.schema import (KEYS, SCHEMA_VERSION, create_schema, migrate_v1_to_v2,
                                        row_key)
from rhofollow.io.ledger.transfer import LedgerTransfer

__all__ = ["Ledger"]

#: Environment variables read only by the test-suite hooks (slow ingest, marker once inside a
#: transaction). They never change what is written.
_DELAY_ENV = "RHOFOLLOW_TEST_INGEST_DELAY_S"
_MARKER_ENV = "RHOFOLLOW_TEST_INGEST_MARKER"


def _same(a, b) -> bool:
    if isinstance(a, float) and isinstance(b, float):
        return a == b or (math.isnan(a) and math.isnan(b))
    return a == b


class Ledger(LedgerQueries, LedgerTransfer):
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
        """Close the database connection."""
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

    def _fail(self, exc: BaseException):
        """Roll back after ``exc``; a full disk becomes the ledger's no-space error."""
        self._rollback()
        if is_no_space(exc) and not isinstance(exc, LedgerError):
            raise self._no_space() from exc
        raise exc

    @property
    def schema_version(self) -> int:
        """The layout version of the open file (:data:`SCHEMA_VERSION` after opening)."""
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
                create_schema(c)
            else:
                v = int(c.execute("SELECT version FROM schema_version").fetchone()[0])
                if v > SCHEMA_VERSION:
                    raise LedgerError(f"{self.path}: ledger schema version {v} is newer than this "
                                      f"rhofollow understands ({SCHEMA_VERSION}); upgrade rhofollow")
                if v == 1:
                    migrate_v1_to_v2(c, self._insert)
            c.execute("COMMIT")
        except BaseException as exc:
            self._fail(exc)

    # -- low-level writes (inside a transaction)
    def _insert(self, table: str, row: dict, ingest_id: int | None = None) -> str:
        """Insert one row; returns 'added', 'duplicate' or 'conflict'."""
        row = dict(row, row_key=row_key(table, row), ingest_id=ingest_id)
        vals = KEYS[table][1]
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

    def _write_targets(self, target_rows, iid: int, report: IngestReport):
        """Add new catalogue rows, replace changed ones, count unchanged ones."""
        c = self._conn
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

    def _apply_duplicate_policy(self, source: str, table: str | None, rows, duplicates: str,
                                report: IngestReport):
        """Refuse (raise) or delete the stored measurements that new rows repeat."""
        if duplicates == "keep_both":
            return
        same = same_measurements(self._conn, table, rows) if table else []
        if same and duplicates == "refuse":
            raise DuplicateMeasurementError(source, duplicate_issues(source, table, rows, same))
        gone = {o["id"]: o for _n, old in same for o in old}
        for oid, o in sorted(gone.items()):
            self._conn.execute(f"DELETE FROM {table} WHERE id = ?", (oid,))
            report.replaced.setdefault(table, []).append(
                {k: o[k] for k in KEYS[table][0] + KEYS[table][1]})

    def _write_rows(self, source: str, table: str | None, rows, iid: int, report: IngestReport):
        """Insert the data rows (with stub targets); a key stored with other values rejects all."""
        delay = float(os.environ.get(_DELAY_ENV, "0") or 0)
        marker = os.environ.get(_MARKER_ENV)
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
            issues = [RowIssue(source, 0, ",".join(KEYS[table][1]),
                               f"already in the ledger with different values: "
                               f"{brief(table, r)}", name=r["target"]) for r in conflicts]
            raise IngestError(source, issues)

    def _ingest(self, kind: str, source: str, content_hash: str, table: str | None,
                rows: list[dict], target_rows: list[tuple[str, str | None, str]] = (),
                duplicates: str = "refuse") -> IngestReport:
        """Write parsed rows in one transaction; a content hash seen before adds nothing.

        ``duplicates`` (one of :data:`DUPLICATE_POLICIES`) says what to do with a row that
        repeats a stored measurement (see the package notes).
        """
        if duplicates not in DUPLICATE_POLICIES:
            raise ValueError(f"duplicates must be one of {DUPLICATE_POLICIES}, got {duplicates!r}")
        report = IngestReport(source=source, kind=kind, content_hash=content_hash)
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
                            (kind, source, content_hash, _parse.now_utc(), "{}"))
            iid = report.ingest_id = int(cur.lastrowid)
            self._write_targets(target_rows, iid, report)
            self._apply_duplicate_policy(source, table, rows, duplicates, report)
            self._write_rows(source, table, rows, iid, report)
            c.execute("UPDATE ingests SET counts_json = ? WHERE id = ?",
                      (json.dumps(report.counts, sort_keys=True), iid))
            c.execute("COMMIT")
        except BaseException as exc:
            self._fail(exc)
        return report

    # -- ingest API
    def ingest_rv_file(self, path: str | os.PathLike, target: str | None = None, *,
                       duplicates: str = "refuse") -> IngestReport:
        """Take in an RV file (CSV or ECSV), read by :func:`rhofollow.io.rvdata.read_rv_file`.

        Parameters
        ----------
        path : str or path-like
            Columns ``bjd_tdb`` (BJD_TDB, days), ``rv_ms``, ``rv_err_ms`` (m/s), ``instrument``
            and, for several targets, ``target``.
        target : str, optional
            The target of a file without a ``target`` column (required then; the file name is
            not used as a target name).
        duplicates : str
            One of :data:`DUPLICATE_POLICIES`.

        Returns
        -------
        IngestReport
        """
        path = Path(path)
        rows = _parse.parse_rv(path, target)
        h = sha256(b"rv\0" + (target or "").encode() + b"\0" + path.read_bytes())
        return self._ingest("rv", str(path), h, "rv_measurements", rows, duplicates=duplicates)

    def ingest_occultation_file(self, path: str | os.PathLike, *, duplicates: str = "refuse") -> IngestReport:
        """Take in a CSV of occultation timings and non-detections.

        Parameters
        ----------
        path : str or path-like
            The CSV, read by :func:`~rhofollow.io.ledger.ingest.parse_occultations` (times BJD_TDB days,
            mid-time errors minutes, depth limits ppm, bands microns).
        duplicates : str
            One of :data:`DUPLICATE_POLICIES`.

        Returns
        -------
        IngestReport
            The rows added; an input with any problem raises :class:`IngestError` and writes nothing.
        """
        path = Path(path)
        rows = _parse.parse_occultations(path)
        h = sha256(b"occultation\0" + path.read_bytes())
        return self._ingest("occultation", str(path), h, "occultation_timings", rows,
                            duplicates=duplicates)

    def add_occultation(self, target: str, *, kind: str = "detection",
                        mid_bjd_tdb: float | None = None, mid_err_min: float | None = None,
                        window_start_bjd_tdb: float | None = None,
                        window_end_bjd_tdb: float | None = None,
                        depth_limit_ppm: float | None = None, band_um: float | None = None,
                        instrument: str = "", duplicates: str = "refuse") -> IngestReport:
        """Record one occultation timing or non-detection (validated like a CSV row).

        Parameters
        ----------
        target : str
            The target's name.
        kind : str
            ``detection`` or ``non_detection``.
        mid_bjd_tdb : float or None
            Measured mid-occultation time of a detection, BJD_TDB (days).
        mid_err_min : float or None
            1-sigma error of ``mid_bjd_tdb``, minutes.
        window_start_bjd_tdb, window_end_bjd_tdb : float or None
            Window observed without a detection, BJD_TDB (days).
        depth_limit_ppm : float or None
            Smallest depth the non-detection could have seen, ppm.
        band_um : float or None
            The band's central wavelength, microns.
        instrument : str
            The instrument's name ("" when not given).
        duplicates : str
            One of :data:`DUPLICATE_POLICIES`.

        Returns
        -------
        IngestReport
            The rows added; an input with any problem raises :class:`IngestError` and writes nothing.
        """
        rec = _parse.occultation_entry(target, dict(
            kind=kind, mid_bjd_tdb=mid_bjd_tdb, mid_err_min=mid_err_min,
            window_start_bjd_tdb=window_start_bjd_tdb, window_end_bjd_tdb=window_end_bjd_tdb,
            depth_limit_ppm=depth_limit_ppm, band_um=band_um, instrument=instrument))
        h = sha256(b"occultation-entry\0" + json.dumps(rec, sort_keys=True).encode())
        return self._ingest("occultation", f"occultation entry for {target}", h,
                            "occultation_timings", [rec], duplicates=duplicates)

    def ingest_done_file(self, path: str | os.PathLike) -> IngestReport:
        """Take in a CSV of observations done.

        Parameters
        ----------
        path : str or path-like
            Columns target, start_utc, kind[, end_utc, instrument, outcome, note]; times are ISO UTC.

        Returns
        -------
        IngestReport
            The rows added; an input with any problem raises :class:`IngestError` and writes nothing.
        """
        path = Path(path)
        rows = _parse.parse_done(path)
        h = sha256(b"done\0" + path.read_bytes())
        return self._ingest("done", str(path), h, "observations", rows)

    def add_done(self, target: str, start_utc: str, kind: str, *, end_utc: str | None = None,
                 instrument: str = "", outcome: str = "ok", note: str = "") -> IngestReport:
        """Record one observation done.

        Parameters
        ----------
        target : str
            The target's name.
        start_utc : str
            ISO start time (UTC unless an offset is given).
        kind : str
            One of :data:`OBSERVATION_KINDS`.
        end_utc : str or None
            ISO end time.
        instrument : str
            The instrument's name.
        outcome : str
            One of :data:`OBSERVATION_OUTCOMES` (only 'ok' counts as done).
        note : str
            Free text.

        Returns
        -------
        IngestReport
            The rows added; an input with any problem raises :class:`IngestError` and writes nothing.
        """
        rec = _parse.done_entry(target, dict(
            start_utc=start_utc or "", end_utc=end_utc or "", instrument=instrument or "",
            kind=kind or "", outcome=outcome or "", note=note or ""))
        h = sha256(b"done-entry\0" + json.dumps(rec, sort_keys=True).encode())
        return self._ingest("done", f"observation entry for {target}", h, "observations", [rec])

    def add_targets(self, targets, source: str) -> IngestReport:
        """Record catalogue rows; a changed row replaces the old one.

        Parameters
        ----------
        targets : iterable of rhofollow.core.types.Target
            Validated catalogue rows (values in the catalogue's canonical units).
        source : str
            The catalogue they come from.

        Returns
        -------
        IngestReport
            The target rows added and updated.
        """
        trows = [(t.name, _parse.target_json(t), source) for t in targets]
        h = sha256(b"targets\0" + json.dumps(trows, sort_keys=True).encode())
        return self._ingest("targets", source, h, None, [], trows)

    def add_posterior_version(self, target: str, *, source_hash: str, n_samples: int, ess: float,
                              summary: dict, created_utc: str | None = None) -> IngestReport:
        """Store a posterior summary; the same (target, source_hash) twice adds nothing.

        Parameters
        ----------
        target : str
            The target's name.
        source_hash : str
            Hash of the inputs the posterior was computed from.
        n_samples : int
            Number of posterior samples.
        ess : float
            Their effective sample size.
        summary : dict
            JSON-ready summary (quantiles in the units of each quantity).
        created_utc : str or None
            ISO UTC creation time (None: now).

        Returns
        -------
        IngestReport
            The version added (or that it was already stored).
        """
        rec = dict(target=target, created_utc=created_utc or _parse.now_utc(),
                   source_hash=source_hash, n_samples=int(n_samples), ess=float(ess),
                   summary_json=json.dumps(summary, sort_keys=True, separators=(",", ":")))
        h = sha256(b"posterior\0" + f"{target}\0{source_hash}".encode())
        return self._ingest("posterior", f"posterior of {target}", h, "posterior_versions", [rec])
