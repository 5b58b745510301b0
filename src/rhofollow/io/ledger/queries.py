"""The ledger's read API (a mixin of :class:`~rhofollow.io.ledger.store.Ledger`).

Every query is read-only and ordered (see :data:`~rhofollow.io.ledger.schema.ORDER`), so the same
ledger always answers the same way.
"""
from __future__ import annotations

import json

import numpy as np

from rhofollow.core.types import RVSeries
from rhofollow.io.ledger.records import Observation, OccultationTiming, PosteriorVersion, RVMeasurement
from rhofollow.io.ledger.schema import DATA_TABLES, KEYS, ORDER

__all__ = ["LedgerQueries"]


class LedgerQueries:
    """Read methods over ``self._conn`` (an open SQLite connection of a ledger)."""

    def targets(self) -> list[str]:
        """All target names, sorted.

        Returns
        -------
        list of str
            The names.
        """
        return [r[0] for r in self._conn.execute("SELECT name FROM targets ORDER BY name")]

    def catalogue_row(self, target: str) -> dict | None:
        """The stored catalogue row of a target.

        Parameters
        ----------
        target : str
            The target's name.

        Returns
        -------
        dict or None
            ``{"row", "source", "values"}`` (values: column -> [value, lower error, upper error] in the
            catalogue's canonical units), or None when none is stored.
        """
        r = self._conn.execute("SELECT catalogue_json FROM targets WHERE name = ?",
                               (target,)).fetchone()
        return None if r is None or r[0] is None else json.loads(r[0])

    def rv_measurements(self, target: str) -> list[RVMeasurement]:
        """RVs of a target in time order.

        Parameters
        ----------
        target : str
            The target's name.

        Returns
        -------
        list of RVMeasurement
            Ordered by BJD_TDB (days), then instrument; RVs and errors in m/s.
        """
        q = ("SELECT target, bjd_tdb, rv_ms, rv_err_ms, instrument FROM rv_measurements "
             "WHERE target = ? ORDER BY bjd_tdb, instrument")
        return [RVMeasurement(*r) for r in self._conn.execute(q, (target,))]

    def rv_series(self, target: str) -> RVSeries:
        """The RVs of a target as one series (the type the RV file reader returns).

        Parameters
        ----------
        target : str

        Returns
        -------
        RVSeries
            BJD_TDB (days), RV and 1-sigma error (m/s) and instrument, ordered by time and then
            instrument (as :meth:`rv_measurements`); empty arrays for a target without RVs.
            ``source`` is the ledger file; ``rows`` is None.
        """
        q = ("SELECT bjd_tdb, rv_ms, rv_err_ms, instrument FROM rv_measurements "
             "WHERE target = ? ORDER BY bjd_tdb, instrument")
        rows = self._conn.execute(q, (target,)).fetchall()
        return RVSeries(target=target, bjd_tdb=np.array([r[0] for r in rows], dtype=float),
                        rv_ms=np.array([r[1] for r in rows], dtype=float),
                        rv_err_ms=np.array([r[2] for r in rows], dtype=float),
                        instrument=np.array([r[3] for r in rows], dtype=object).astype(str),
                        source=str(self.path))

    def occultation_timings(self, target: str) -> list[OccultationTiming]:
        """Detections and non-detections of a target's occultation.

        Parameters
        ----------
        target : str
            The target's name.

        Returns
        -------
        list of OccultationTiming
            In time order (times BJD_TDB days, mid-time errors minutes, depth limits ppm).
        """
        q = ("SELECT target, kind, mid_bjd_tdb, mid_err_min, window_start_bjd_tdb, "
             "window_end_bjd_tdb, depth_limit_ppm, band_um, instrument FROM occultation_timings "
             f"WHERE target = ? ORDER BY {ORDER['occultation_timings']}")
        return [OccultationTiming(*r) for r in self._conn.execute(q, (target,))]

    def done(self, target: str | None = None, kind: str | None = None) -> list[Observation]:
        """Observations done (of one target and/or one kind), in time order.

        Parameters
        ----------
        target : str or None
            Only this target (None: every target).
        kind : str or None
            Only this kind of observation (None: every kind).

        Returns
        -------
        list of Observation
            Ordered by start time (ISO UTC), then target.
        """
        q = ("SELECT target, start_utc, end_utc, instrument, kind, outcome, note FROM observations "
             "WHERE (? IS NULL OR target = ?) AND (? IS NULL OR kind = ?) "
             "ORDER BY start_utc, target")
        return [Observation(*r) for r in self._conn.execute(q, (target, target, kind, kind))]

    def is_done(self, target: str, kind: str | None = None) -> bool:
        """True when an observation of that target (and kind) succeeded (outcome 'ok').

        Parameters
        ----------
        target : str
            The target's name.
        kind : str or None
            Only this kind of observation (None: any kind).

        Returns
        -------
        bool
            Whether one such observation has outcome 'ok'.
        """
        return any(o.outcome == "ok" for o in self.done(target, kind))

    def posterior_versions(self, target: str) -> list[PosteriorVersion]:
        """Stored posterior summaries of a target, oldest first.

        Parameters
        ----------
        target : str
            The target's name.

        Returns
        -------
        list of PosteriorVersion
            Ordered by creation time (ISO UTC), then id.
        """
        q = ("SELECT id, target, created_utc, source_hash, n_samples, ess, summary_json FROM "
             "posterior_versions WHERE target = ? ORDER BY created_utc, id")
        return [PosteriorVersion(*r[:6], json.loads(r[6]))
                for r in self._conn.execute(q, (target,))]

    def latest_posterior(self, target: str) -> PosteriorVersion | None:
        """The newest stored posterior summary of a target.

        Parameters
        ----------
        target : str
            The target's name.

        Returns
        -------
        PosteriorVersion or None
            The newest version, or None when none is stored.
        """
        v = self.posterior_versions(target)
        return v[-1] if v else None

    def ingests(self) -> list[dict]:
        """The ingest log: id, kind, source, content hash, time, counts.

        Returns
        -------
        list of dict
            One dict per ingest, oldest first (time ISO UTC; counts: table -> rows added).
        """
        q = "SELECT id, kind, source, content_hash, ingested_utc, counts_json FROM ingests ORDER BY id"
        return [dict(id=r[0], kind=r[1], source=r[2], content_hash=r[3], ingested_utc=r[4],
                     counts=json.loads(r[5])) for r in self._conn.execute(q)]

    def summary(self) -> list[dict]:
        """Per target: counts of RVs, detections, non-detections, observations, posteriors.

        Returns
        -------
        list of dict
            One dict per target, sorted by name (counts as int; latest posterior time ISO UTC or None).
        """
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
        """True when SQLite's integrity and foreign-key checks pass.

        Returns
        -------
        bool
            Whether both checks pass.
        """
        r = self._conn.execute("PRAGMA integrity_check").fetchone()[0]
        fk = self._conn.execute("PRAGMA foreign_key_check").fetchall()
        return r == "ok" and not fk

    def content(self) -> dict:
        """Everything the ledger knows, without ingest bookkeeping (for comparisons).

        Returns
        -------
        dict
            ``targets`` ([name, catalogue row]) and, per data table, its rows as lists in a fixed order.
        """
        out = {"targets": [[n, self.catalogue_row(n)] for n in self.targets()]}
        for table in DATA_TABLES:
            cols = list(KEYS[table][0]) + list(KEYS[table][1])
            out[table] = [list(r) for r in self._conn.execute(
                f"SELECT {', '.join(cols)} FROM {table} ORDER BY {ORDER[table]}")]
        return out
