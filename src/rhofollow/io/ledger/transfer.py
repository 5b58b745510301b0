"""Export a ledger to ingestable files and import them (a mixin of
:class:`~rhofollow.io.ledger.store.Ledger`).

The folder holds ``targets.jsonl``, ``rv.csv``, ``occultations.csv``, ``done.csv`` and
``posteriors.jsonl``. CSV text cells a spreadsheet would run as a formula are quoted
(:mod:`rhofollow.io.safety`) and unquoted again on import, so importing an export into a fresh
ledger reproduces its :meth:`~rhofollow.io.ledger.queries.LedgerQueries.content` exactly.
"""
from __future__ import annotations

import json
import os
from pathlib import Path

from rhofollow.core.types import RowIssue
from rhofollow.io.ledger.ingest import parse_posteriors_jsonl, parse_targets_jsonl, sha256
from rhofollow.io.ledger.records import IngestError, IngestReport
from rhofollow.io.ledger.schema import ORDER
from rhofollow.io.safety import csv_text

__all__ = ["LedgerTransfer", "EXPORT_FILES"]

#: The files of an export folder, in the order they are imported.
EXPORT_FILES = ("targets.jsonl", "rv.csv", "occultations.csv", "done.csv", "posteriors.jsonl")

_CSV_TABLES = (
    ("rv.csv", "rv_measurements", ["target", "bjd_tdb", "rv_ms", "rv_err_ms", "instrument"]),
    ("occultations.csv", "occultation_timings",
     ["target", "kind", "mid_bjd_tdb", "mid_err_min", "window_start_bjd_tdb",
      "window_end_bjd_tdb", "depth_limit_ppm", "band_um", "instrument"]),
    ("done.csv", "observations",
     ["target", "start_utc", "end_utc", "instrument", "kind", "outcome", "note"]),
)


class LedgerTransfer:
    """Export and import over ``self._conn`` and the store's ingest methods."""

    def export(self, folder: str | os.PathLike) -> list[Path]:
        """Write the ledger as ingestable files in ``folder`` (created).

        Parameters
        ----------
        folder : str or path-like

        Returns
        -------
        list of Path
            ``targets.jsonl``, ``rv.csv``, ``occultations.csv``, ``done.csv``,
            ``posteriors.jsonl``, each written atomically; :meth:`import_folder` on a fresh
            ledger reproduces :meth:`content` exactly.
        """
        from rhofollow.io.atomic import atomic_write_text

        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        c = self._conn
        lines = []
        for name in self.targets():
            r = c.execute("SELECT catalogue_json, source FROM targets WHERE name = ?",
                          (name,)).fetchone()
            lines.append(json.dumps({"name": name, "catalogue": None if r[0] is None
                                     else json.loads(r[0]), "source": r[1]}, sort_keys=True))
        paths = [atomic_write_text(folder / "targets.jsonl", "".join(x + "\n" for x in lines))]
        for fname, table, cols in _CSV_TABLES:
            rows = ([repr(v) if isinstance(v, float) else v for v in r]
                    for r in c.execute(f"SELECT {', '.join(cols)} FROM {table} ORDER BY {ORDER[table]}"))
            paths.append(atomic_write_text(folder / fname, csv_text(cols, rows)))
        lines = [json.dumps({"target": r[0], "created_utc": r[1], "source_hash": r[2],
                             "n_samples": r[3], "ess": r[4], "summary": json.loads(r[5])},
                            sort_keys=True)
                 for r in c.execute("SELECT target, created_utc, source_hash, n_samples, ess, "
                                    f"summary_json FROM posterior_versions "
                                    f"ORDER BY {ORDER['posterior_versions']}")]
        paths.append(atomic_write_text(folder / "posteriors.jsonl",
                                       "".join(x + "\n" for x in lines)))
        return paths

    def import_folder(self, folder: str | os.PathLike) -> list[IngestReport]:
        """Take in a folder written by :meth:`export`, each file in its own transaction.

        Parameters
        ----------
        folder : str or path-like

        Returns
        -------
        list of IngestReport
            One per file with data (a CSV with only its header is skipped).

        Raises
        ------
        IngestError
            A file is missing or malformed (naming file and line); that file writes nothing.
        """
        folder = Path(folder)
        missing = [n for n in EXPORT_FILES if not (folder / n).exists()]
        if missing:
            raise IngestError(str(folder), [RowIssue(str(folder / n), 0, "", "file is missing")
                                            for n in missing])
        reports = []
        tpath = folder / "targets.jsonl"
        trows = parse_targets_jsonl(tpath)
        if trows:
            h = sha256(b"targets\0" + tpath.read_bytes())
            reports.append(self._ingest("targets", str(tpath), h, None, [], trows))
        for fname, fn in (("rv.csv", self.ingest_rv_file),
                          ("occultations.csv", self.ingest_occultation_file),
                          ("done.csv", self.ingest_done_file)):
            p = folder / fname
            if len(p.read_text(encoding="utf-8").splitlines()) > 1:
                reports.append(fn(p))
        ppath = folder / "posteriors.jsonl"
        prows = parse_posteriors_jsonl(ppath)
        if prows:
            h = sha256(b"posteriors\0" + ppath.read_bytes())
            reports.append(self._ingest("posterior", str(ppath), h, "posterior_versions", prows))
        return reports
