"""The scheduling problem: tasks, their candidate starts, the schedule returned and its rules.

Pure numerics, no I/O. Times are plain floats in one unit chosen by the caller (the planning
layer uses hours since the start of its grid); see :mod:`rhofollow.planning.scheduler` for the
task model and the solvers that use these pieces.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Sequence, Union

import numpy as np

from rhofollow.errors import RhofollowError

__all__ = ["FixedTask", "FlexibleTask", "Task", "Candidate", "Block", "Schedule", "ScheduleError", "EPS",
           "candidates", "check_unique_names", "make_schedule", "validate_schedule"]

#: Tolerance for comparing times (same unit as the times; 1e-9 h is 3.6 microseconds).
EPS = 1e-9

ValueSpec = Union[float, Callable[[np.ndarray], np.ndarray]]


class ScheduleError(RhofollowError, ValueError):
    """A schedule breaks a rule (overlap, start outside its window, task used twice) or input is bad."""


@dataclass(frozen=True)
class FixedTask:
    """A block fixed in time.

    Parameters
    ----------
    name : str
        Unique task identifier.
    start, end : float
        Block limits (grid time unit, e.g. hours); ``end > start``.
    value : float
        Science value (dimensionless, >= 0 to be worth scheduling).
    kind : str
        Label carried into the blocks (e.g. "occultation").
    meta : dict
        Free data carried into the blocks (not used by the solvers).
    """

    name: str
    start: float
    end: float
    value: float
    kind: str = "fixed"
    meta: dict = field(default_factory=dict, compare=False, hash=False)

    def __post_init__(self):
        if not (np.isfinite(self.start) and np.isfinite(self.end)) or self.end <= self.start:
            raise ScheduleError(f"task {self.name!r}: end ({self.end}) must be after start ({self.start})")


@dataclass(frozen=True)
class FlexibleTask:
    """A block of fixed length whose start may move inside allowed windows.

    Parameters
    ----------
    name : str
        Unique task identifier.
    duration : float
        Block length (grid time unit), > 0.
    windows : sequence of (earliest, latest)
        Allowed start intervals (grid time unit); the block is ``[s, s + duration)``.
    value : float or callable
        Value of the block, or a vectorised function of the start times (array -> array).
    step : float
        Spacing of candidate starts inside each window (grid time unit), > 0.
    kind : str
        Label carried into the blocks (e.g. "rv").
    meta : dict
        Free data carried into the blocks.
    """

    name: str
    duration: float
    windows: tuple
    value: ValueSpec
    step: float = 1.0 / 6.0
    kind: str = "flexible"
    meta: dict = field(default_factory=dict, compare=False, hash=False)

    def __post_init__(self):
        if not (np.isfinite(self.duration) and self.duration > 0):
            raise ScheduleError(f"task {self.name!r}: duration must be > 0, got {self.duration}")
        if not (np.isfinite(self.step) and self.step > 0):
            raise ScheduleError(f"task {self.name!r}: step must be > 0, got {self.step}")
        wins = tuple((float(a), float(b)) for a, b in self.windows)
        for a, b in wins:
            if not (np.isfinite(a) and np.isfinite(b)) or b < a:
                raise ScheduleError(f"task {self.name!r}: window ({a}, {b}) has latest < earliest")
        object.__setattr__(self, "windows", wins)

    def starts(self) -> np.ndarray:
        """Candidate start times: the points ``k * step`` (k integer) inside each window.

        All flexible tasks share this grid (origin 0), which keeps the number of distinct start
        times, hence of clique constraints, small. A window holding no grid point contributes
        its ``earliest``.

        Returns
        -------
        ndarray
            Sorted distinct start times (grid time unit).
        """
        out = []
        for a, b in self.windows:
            k0 = int(np.ceil(a / self.step - EPS))
            k1 = int(np.floor(b / self.step + EPS))
            s = self.step * np.arange(k0, k1 + 1) if k1 >= k0 else np.array([a])
            out.append(np.clip(s, a, b))
        if not out:
            return np.empty(0)
        return np.unique(np.concatenate(out))

    def values_at(self, starts: np.ndarray) -> np.ndarray:
        """Value of the block for each start time.

        Parameters
        ----------
        starts : array
            Start times (grid time unit).

        Returns
        -------
        ndarray
            Value per start (dimensionless), shaped like ``starts``.
        """
        starts = np.asarray(starts, dtype=float)
        if callable(self.value):
            v = np.asarray(self.value(starts), dtype=float)
            return np.broadcast_to(v, starts.shape).astype(float)
        return np.full(starts.shape, float(self.value))


Task = Union[FixedTask, FlexibleTask]


@dataclass(frozen=True)
class Candidate:
    """One (task, start) choice: block ``[start, end)`` worth ``value``; ``task`` indexes the task list."""

    task: int
    start: float
    end: float
    value: float


@dataclass(frozen=True)
class Block:
    """A chosen block of a schedule (grid time unit)."""

    name: str
    kind: str
    start: float
    end: float
    value: float
    task: int
    meta: dict = field(default_factory=dict, compare=False, hash=False)


@dataclass
class Schedule:
    """Result of a solver: blocks sorted by start, their total value, the method and solver notes.

    Attributes
    ----------
    blocks : list of Block
        Chosen blocks, sorted by start (grid time unit).
    value : float
        Total value of the blocks (dimensionless).
    method : str
        Solver used ("dp", "milp", "greedy", "brute").
    overhead : float
        Minimum gap between consecutive blocks (grid time unit).
    status : str
        "optimal", "time limit" or the solver's message.
    note : str
        How the solver got there (the MILP: "LP relaxation integral" or "branch and cut").
    gap : float
        Relative optimality gap reached, ``(bound - value) / |value|`` (dimensionless): 0 for a
        proven optimum (the DP, an integral LP relaxation, a finished branch and cut); larger when
        the MILP stopped at its time limit or at an accepted ``mip_rel_gap``; NaN when unknown.
    """

    blocks: list
    value: float
    method: str
    overhead: float
    status: str = "optimal"
    note: str = ""
    gap: float = 0.0

    @property
    def names(self) -> list:
        """Names of the chosen blocks, in start order.

        Returns
        -------
        list of str
            Task names.
        """
        return [b.name for b in self.blocks]


def candidates(tasks: Sequence[Task], horizon: tuple | None = None) -> list[Candidate]:
    """All (task, start) candidates with positive value.

    Parameters
    ----------
    tasks : sequence of FixedTask / FlexibleTask
        The tasks; a candidate's ``task`` is its index in this sequence.
    horizon : (t_min, t_max) or None
        If given (grid time unit), only blocks lying entirely inside it are kept.

    Returns
    -------
    list of Candidate
        Blocks ``[start, end)`` (grid time unit) with their value (dimensionless), in task order.
    """
    out = []
    for i, t in enumerate(tasks):
        if isinstance(t, FixedTask):
            st, en, va = np.array([t.start]), np.array([t.end]), np.array([float(t.value)])
        else:
            st = t.starts()
            en = st + t.duration
            va = t.values_at(st)
        keep = np.isfinite(va) & (va > 0)
        if horizon is not None:
            keep &= (st >= horizon[0] - EPS) & (en <= horizon[1] + EPS)
        for s, e, v in zip(st[keep], en[keep], va[keep]):
            out.append(Candidate(i, float(s), float(e), float(v)))
    return out


def check_unique_names(tasks: Sequence[Task]) -> None:
    """Raise :class:`ScheduleError` when two tasks share a name.

    Parameters
    ----------
    tasks : sequence of FixedTask / FlexibleTask
        The tasks of one problem.

    Returns
    -------
    None
        Returns only when every name is unique.
    """
    names = [t.name for t in tasks]
    if len(set(names)) != len(names):
        dup = sorted({n for n in names if names.count(n) > 1})
        raise ScheduleError(f"task names must be unique; repeated: {', '.join(dup)}")


def make_schedule(tasks: Sequence[Task], chosen: list[Candidate], method: str, overhead: float,
                  status: str = "optimal") -> Schedule:
    """The :class:`Schedule` of the chosen candidates, blocks sorted by start.

    Parameters
    ----------
    tasks : sequence of FixedTask / FlexibleTask
        The tasks the candidates index.
    chosen : list of Candidate
        The chosen (task, start) choices (grid time unit).
    method : str
        Name of the solver that chose them.
    overhead : float
        Minimum gap between consecutive blocks (grid time unit).
    status : str
        Solver status ("optimal", "time limit", ...).

    Returns
    -------
    Schedule
        Blocks (grid time unit) and their total value (dimensionless).
    """
    chosen = sorted(chosen, key=lambda c: (c.start, c.end))
    blocks = [Block(tasks[c.task].name, tasks[c.task].kind, c.start, c.end, c.value, c.task,
                    dict(tasks[c.task].meta)) for c in chosen]
    return Schedule(blocks, float(sum(c.value for c in chosen)), method, overhead, status)


def validate_schedule(schedule: Schedule, tasks: Sequence[Task], horizon: tuple | None = None) -> None:
    """Raise :class:`ScheduleError` unless the schedule is feasible.

    Checks: each task used at most once; fixed blocks at their fixed time; flexible blocks of the
    right length starting inside an allowed window; consecutive blocks separated by at least
    ``schedule.overhead``; every block inside ``horizon`` when given; the value is the sum of the
    block values.

    Parameters
    ----------
    schedule : Schedule
        The schedule to check.
    tasks : sequence of FixedTask / FlexibleTask
        The tasks its blocks index.
    horizon : (t_min, t_max) or None
        Planning limits (grid time unit).

    Returns
    -------
    None
        Returns only when the schedule is feasible.
    """
    seen = set()
    prev = None
    for b in sorted(schedule.blocks, key=lambda x: x.start):
        if b.task in seen:
            raise ScheduleError(f"task {b.name!r} scheduled twice")
        seen.add(b.task)
        t = tasks[b.task]
        if t.name != b.name:
            raise ScheduleError(f"block {b.name!r} does not match task {t.name!r}")
        if isinstance(t, FixedTask):
            if abs(b.start - t.start) > EPS or abs(b.end - t.end) > EPS:
                raise ScheduleError(f"fixed task {b.name!r} moved from its time")
        else:
            if abs((b.end - b.start) - t.duration) > EPS:
                raise ScheduleError(f"flexible task {b.name!r} has the wrong length")
            if not any(a - EPS <= b.start <= z + EPS for a, z in t.windows):
                raise ScheduleError(f"flexible task {b.name!r} starts outside its allowed windows")
        if horizon is not None and (b.start < horizon[0] - EPS or b.end > horizon[1] + EPS):
            raise ScheduleError(f"block {b.name!r} lies outside the planning horizon")
        if prev is not None and b.start < prev.end + schedule.overhead - EPS:
            raise ScheduleError(
                f"blocks {prev.name!r} and {b.name!r} overlap (overhead {schedule.overhead} included)")
        prev = b
    total = sum(b.value for b in schedule.blocks)
    if abs(total - schedule.value) > 1e-6 * max(1.0, abs(total)):
        raise ScheduleError("schedule value is not the sum of its block values")
