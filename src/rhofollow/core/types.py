"""Plain data records shared by the readers, the ledger and the stages (no I/O here).

A catalogue row becomes a :class:`Target`: canonical column names (as in DESIGN.md, with their
unit suffixes, e.g. ``period_d``, ``t14_h``, ``rho_star_cgs``) mapped to :class:`Measurement`.
Values are already converted to the unit the suffix names. Measured radial velocities of one
target travel as one :class:`RVSeries`, whether they come from an RV file
(:mod:`rhofollow.io.rvdata`) or from the ledger. A stage's warning is a :class:`Notice`.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

__all__ = ["Measurement", "Target", "RowIssue", "IssueCollector", "CatalogueResult", "RVSeries", "Notice",
           "NOTICE_KINDS"]

#: What a :class:`Notice` is about.
NOTICE_KINDS = {
    "assumed": "a value or error the input did not give was assumed",
    "input": "the input is incomplete or inconsistent (a route skipped, routes that disagree)",
    "sampling": "the posterior samples are few or noisy",
    "finding": "the assessment's finding calls for a check",
    "occultation": "the occultation prediction is partial (missed, grazing, no depth)",
    "offline_tables": "times lie past the installed Earth-orientation or leap-second tables",
}


class Notice(str):
    """A stage's warning: its text, with what it is about and the target it concerns.

    A ``str`` subclass, so that every consumer of the warning lists (JSON, CSV cells, the terminal,
    ``in`` tests on the text) sees exactly today's text; the kind and the target travel with it.
    Immutable, and pickled with both (process pools, dask).

    Parameters
    ----------
    text : str
        The message, as printed and written.
    kind : str
        One of :data:`NOTICE_KINDS`.
    target : str
        The target's name ("" for a run-level notice).

    Raises
    ------
    ValueError
        An unknown ``kind``.
    """

    def __new__(cls, text: str, kind: str, target: str = ""):
        if kind not in NOTICE_KINDS:
            raise ValueError(f"unknown notice kind {kind!r}; known: {', '.join(NOTICE_KINDS)}")
        self = super().__new__(cls, text)
        object.__setattr__(self, "kind", kind)
        object.__setattr__(self, "target", str(target))
        return self

    def __setattr__(self, name, value):
        raise AttributeError("a Notice is immutable")

    def __reduce__(self):
        return (Notice, (str(self), self.kind, self.target))

    @property
    def text(self) -> str:
        """The message.

        Returns
        -------
        str
            The plain text (what ``str()`` gives).
        """
        return str(self)


@dataclass(frozen=True)
class Measurement:
    """A value with an optional asymmetric 1-sigma error (err_lo, err_hi >= 0; 0 = exact)."""

    value: float
    err_lo: float = 0.0
    err_hi: float = 0.0

    @property
    def has_error(self) -> bool:
        """Whether the measurement has an error.

        Returns
        -------
        bool
            True when either side of the error is non-zero.
        """
        return self.err_lo > 0 or self.err_hi > 0

    @property
    def err(self) -> float:
        """Symmetrised 1-sigma error.

        Returns
        -------
        float
            Mean of the two sides, in the value's unit.
        """
        return 0.5 * (self.err_lo + self.err_hi)


@dataclass
class Target:
    """One validated catalogue row.

    ``row`` is the 1-based data-row number in ``source`` (the header is not counted).
    ``values`` maps canonical column names to measurements; text columns (``name``) are attributes.
    """

    name: str
    row: int
    source: str
    values: dict[str, Measurement] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)

    def has(self, *keys: str) -> bool:
        """Whether the row has every named column.

        Parameters
        ----------
        *keys : str
            Canonical column names.

        Returns
        -------
        bool
            True when every named column has a finite value.
        """
        return all(k in self.values and math.isfinite(self.values[k].value) for k in keys)

    def get(self, key: str) -> Measurement | None:
        """The measurement of a column.

        Parameters
        ----------
        key : str
            Canonical column name.

        Returns
        -------
        Measurement or None
            In the unit the column's suffix names; None when the row lacks the column.
        """
        return self.values.get(key)

    def value(self, key: str, default: float = math.nan) -> float:
        """The value of a column in the unit its suffix names.

        Parameters
        ----------
        key : str
            Canonical column name.
        default : float
            Returned when the row lacks the column.

        Returns
        -------
        float
            The value (possibly NaN for an empty cell).
        """
        m = self.values.get(key)
        return m.value if m is not None else default


@dataclass(frozen=True)
class RowIssue:
    """A validation problem: file, 1-based data row (0 = header/file level), column, reason."""

    source: str
    row: int
    column: str
    reason: str
    name: str = ""
    severity: str = "error"  # "error" (row skipped) or "warning" (row kept)

    def __str__(self) -> str:
        where = f"{self.source}" + (f", row {self.row}" if self.row else "")
        col = f", column '{self.column}'" if self.column else ""
        who = f" ({self.name})" if self.name else ""
        return f"{where}{col}{who}: {self.reason}"


class IssueCollector:
    """Collects the problems of one source; :meth:`raise_if_any` rejects it with all of them.

    A reader subclasses it with its own ``error`` class (called as ``error(source, issues)``), so
    every reader collects and reports row problems the same way.

    Parameters
    ----------
    source : str
        The file (or entry) the problems belong to.
    """

    error: type = ValueError

    def __init__(self, source: str):
        self.source = source
        self.issues: list[RowIssue] = []

    def add(self, row: int, column: str, reason: str, name: str = "") -> None:
        """Record a problem at a 1-based data row (0: the file or its header) and column.

        Parameters
        ----------
        row : int
            Data row, from 1 (0: the file or its header).
        column : str
            The column's name ("" for the whole row or file).
        reason : str
            What is wrong, one sentence.
        name : str
            The target the row names ("" when none).
        """
        self.issues.append(RowIssue(self.source, row, column, reason, name=name))

    def raise_if_any(self) -> None:
        """Raise ``error(source, issues)`` with every problem recorded so far (nothing when none)."""
        if self.issues:
            raise self.error(self.source, self.issues)


@dataclass
class CatalogueResult:
    """Everything the reader learned: good targets, and the issues of every row."""

    source: str
    n_rows: int
    targets: list[Target]
    issues: list[RowIssue]

    @property
    def errors(self) -> list[RowIssue]:
        """Issues that skipped a row (or rejected the file).

        Returns
        -------
        list of RowIssue
            Those of severity "error".
        """
        return [i for i in self.issues if i.severity == "error"]

    @property
    def n_failed(self) -> int:
        """Number of data rows skipped.

        Returns
        -------
        int
            Distinct data rows among the errors (file- and column-level errors not counted).
        """
        return len({i.row for i in self.errors if i.row > 0})  # row 0 = file/column level

    @property
    def warnings(self) -> list[RowIssue]:
        """Issues of rows that were kept.

        Returns
        -------
        list of RowIssue
            Those of severity "warning".
        """
        return [i for i in self.issues if i.severity == "warning"]

    @property
    def ok(self) -> bool:
        """Whether the catalogue read without error.

        Returns
        -------
        bool
            True when no issue is an error.
        """
        return not self.errors


@dataclass
class RVSeries:
    """Measured radial velocities of one target, in time order (arrays of equal length N).

    Attributes
    ----------
    target : str
        The target's name.
    bjd_tdb : ndarray (N,)
        Mid-exposure times, BJD_TDB (days).
    rv_ms, rv_err_ms : ndarray (N,)
        Radial velocity and its 1-sigma error (m/s, error > 0, without jitter).
    instrument : ndarray (N,) of str
        Instrument of each RV (one fitted offset per instrument).
    source : str
        The file (or ledger) the RVs come from.
    rows : ndarray (N,) of int, optional
        1-based data-row number of each RV in ``source`` (None when not read from a file).
    """

    target: str
    bjd_tdb: np.ndarray
    rv_ms: np.ndarray
    rv_err_ms: np.ndarray
    instrument: np.ndarray
    source: str = ""
    rows: np.ndarray | None = None

    @property
    def n(self) -> int:
        """Number of RVs.

        Returns
        -------
        int
            N.
        """
        return len(self.bjd_tdb)

    @property
    def instruments(self) -> list[str]:
        """Instrument names in order of first appearance.

        Returns
        -------
        list of str
            Each name once.
        """
        return list(dict.fromkeys(self.instrument.tolist()))

    def groups(self) -> np.ndarray:
        """Integer instrument index per RV, in order of first appearance (for per-instrument offsets).

        Returns
        -------
        ndarray (N,) of int
            Index into :attr:`instruments`.
        """
        names = self.instruments
        return np.array([names.index(i) for i in self.instrument], dtype=int)
