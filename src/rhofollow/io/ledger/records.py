"""What the ledger hands out: its error types, its read-API records and the ingest report."""
from __future__ import annotations

from dataclasses import asdict, dataclass, field

from rhofollow.core.types import RowIssue
from rhofollow.errors import LedgerError

__all__ = ["DEFAULT_LEDGER", "LedgerError", "IngestError", "DuplicateMeasurementError",
           "IngestReport", "RVMeasurement", "OccultationTiming", "Observation", "PosteriorVersion",
           "OBSERVATION_KINDS", "OBSERVATION_OUTCOMES", "TIMING_KINDS", "DUPLICATE_POLICIES",
           "RV_SAME_TIME_D", "OCC_SAME_SIGMA"]

DEFAULT_LEDGER = "rhofollow-ledger.sqlite"

OBSERVATION_KINDS = ("rv", "occultation", "transit", "photometry", "imaging", "spectroscopy", "other")
OBSERVATION_OUTCOMES = ("ok", "partial", "lost")
TIMING_KINDS = ("detection", "non_detection")

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


@dataclass(frozen=True)
class RVMeasurement:
    """One stored radial velocity as the log shows it (BJD_TDB days, m/s).

    Computations take a target's RVs as one :class:`~rhofollow.core.types.RVSeries`
    (:meth:`Ledger.rv_series`), the type the RV file reader returns too.
    """

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
        """1-sigma error of a detection's mid-time, days (None for a non-detection)."""
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
        """Rows added, all tables together."""
        return sum(len(v) for v in self.added.values())

    @property
    def counts(self) -> dict[str, int]:
        """Rows added per table (tables with none left out)."""
        return {k: len(v) for k, v in self.added.items() if v}

    def to_dict(self) -> dict:
        """JSON-ready form (every field and ``n_added``)."""
        d = asdict(self)
        d["n_added"] = self.n_added
        return d

    def describe(self) -> str:
        """One sentence: what was added, updated and replaced, and how many rows were present."""
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
