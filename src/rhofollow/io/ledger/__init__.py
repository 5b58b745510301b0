"""The campaign ledger: one SQLite file per campaign that remembers what was observed and measured.

Modules
-------
``schema``      tables, row keys, creation and the migration from version 1
``records``     error types, read-API records, the ingest report, policy constants
``ingest``      parsing and validation of the files and entries taken in (RV files through
                :func:`rhofollow.io.rvdata.read_rv_file`, the only RV reader)
``duplicates``  whether a new measurement repeats a stored one
``store``       :class:`Ledger`: connection, transactions and every write
``queries``     the read API (a mixin of :class:`Ledger`)
``transfer``    export to ingestable files and import (a mixin of :class:`Ledger`)

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
* Only parameterised SQL; table and column names come from constants in :mod:`.schema`.
* CSV files written by :meth:`Ledger.export` quote text cells a spreadsheet would run as a
  formula (:mod:`rhofollow.io.safety`); the reader undoes that quoting.
"""
from rhofollow.io.ledger.records import (DEFAULT_LEDGER, DUPLICATE_POLICIES, OBSERVATION_KINDS,
                                         OBSERVATION_OUTCOMES, OCC_SAME_SIGMA, RV_SAME_TIME_D,
                                         TIMING_KINDS, DuplicateMeasurementError, IngestError,
                                         IngestReport, LedgerError, Observation, OccultationTiming,
                                         PosteriorVersion, RVMeasurement)
from rhofollow.io.ledger.schema import SCHEMA_VERSION
from rhofollow.io.ledger.store import Ledger

__all__ = [
    "SCHEMA_VERSION", "DEFAULT_LEDGER", "LedgerError", "IngestError", "IngestReport", "Ledger",
    "RVMeasurement", "OccultationTiming", "Observation", "PosteriorVersion",
    "OBSERVATION_KINDS", "OBSERVATION_OUTCOMES", "TIMING_KINDS", "DuplicateMeasurementError",
    "DUPLICATE_POLICIES", "RV_SAME_TIME_D", "OCC_SAME_SIGMA",
]
