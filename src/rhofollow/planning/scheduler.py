"""Exact single-telescope scheduling of fixed and flexible observing tasks (pure numerics, no I/O).

Time axis
---------
All times are plain floats in one consistent unit chosen by the caller; the planning layer uses
**hours since the start of the planning grid** (for a night: hours since the end of evening
twilight). Durations, overheads and the candidate grid step are in the same unit.

Task model
----------
* :class:`FixedTask` — a block that can only be observed at one time, ``[start, end)``
  (an occultation window with its baselines). Value is a float.
* :class:`FlexibleTask` — a block of length ``duration`` whose start may lie anywhere in one of
  the ``windows`` ``[(earliest, latest), ...]`` (an RV visit while the target is up). The start is
  discretised on the common grid ``k * step`` (k integer; the planning layer puts 0 at the start
  of the night). ``value`` is a float or a vectorised function ``value(starts) -> values``
  (the planning layer makes it depend on orbital phase).

Consecutive blocks are separated by at least ``overhead`` (setup / slew). Folding the overhead into
the end of every block (``[start, end + overhead)``) turns "no overlap including overhead" into
plain interval disjointness; a block may end at the very end of the night because the overhead
after the last block costs nothing.

Solvers
-------
* :func:`solve_fixed` — weighted interval scheduling by dynamic programming
  (Kleinberg & Tardos, *Algorithm Design*, 2005, section 6.1), exact, O(n log n).
* :func:`solve_milp` — the mixed problem as a 0/1 integer programme solved with
  :func:`scipy.optimize.milp` (HiGHS): one binary per (task, start) candidate, at most one start per
  task, and one clique constraint per distinct candidate start time (the intervals that contain a
  given time form a clique; for intervals, checking every left end point is enough, because two
  half-open intervals intersect exactly when one contains the other's start). The LP relaxation
  is solved first; when its optimum is integral it is returned (it is then the integer optimum),
  otherwise HiGHS branch and cut runs.
* :func:`solve_greedy` — baseline for tests and the benchmark only (highest value first).
* :func:`solve_brute_force` — exhaustive search for tiny instances (tests only).

:func:`schedule` dispatches ("auto" picks the DP when every task is fixed, else the MILP), and every
result goes through :func:`validate_schedule`.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Sequence, Union

import numpy as np

from rhofollow.errors import RhofollowError

__all__ = ["FixedTask", "FlexibleTask", "Candidate", "Block", "Schedule", "ScheduleError",
           "candidates", "solve_fixed", "solve_milp", "solve_greedy", "solve_brute_force",
           "schedule", "validate_schedule", "METHODS"]

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
        """Value of the block for each start time (array)."""
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
    """Result of a solver: blocks sorted by start, their total value, the method and solver notes."""

    blocks: list
    value: float
    method: str
    overhead: float
    status: str = "optimal"
    note: str = ""

    @property
    def names(self) -> list:
        return [b.name for b in self.blocks]


def candidates(tasks: Sequence[Task], horizon: tuple | None = None) -> list[Candidate]:
    """All (task, start) candidates with positive value.

    Parameters
    ----------
    tasks : sequence of FixedTask / FlexibleTask
    horizon : (t_min, t_max) or None
        If given, only blocks lying entirely inside it are kept.
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


def _check_names(tasks: Sequence[Task]) -> None:
    names = [t.name for t in tasks]
    if len(set(names)) != len(names):
        dup = sorted({n for n in names if names.count(n) > 1})
        raise ScheduleError(f"task names must be unique; repeated: {', '.join(dup)}")


def _to_schedule(tasks, chosen: list[Candidate], method: str, overhead: float,
                 status: str = "optimal") -> Schedule:
    chosen = sorted(chosen, key=lambda c: (c.start, c.end))
    blocks = [Block(tasks[c.task].name, tasks[c.task].kind, c.start, c.end, c.value, c.task,
                    dict(tasks[c.task].meta)) for c in chosen]
    return Schedule(blocks, float(sum(c.value for c in chosen)), method, overhead, status)


def validate_schedule(schedule: Schedule, tasks: Sequence[Task], horizon: tuple | None = None) -> None:
    """Raise :class:`ScheduleError` unless the schedule is feasible.

    Checks: each task used at most once; fixed blocks at their fixed time; flexible blocks of the
    right length starting inside an allowed window; consecutive blocks separated by at least
    ``schedule.overhead``; every block inside ``horizon`` when given.
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


def solve_fixed(tasks: Sequence[FixedTask], overhead: float = 0.0,
                horizon: tuple | None = None) -> Schedule:
    """Weighted interval scheduling by dynamic programming (exact).

    Every block occupies ``[start, end + overhead)``; ``OPT(j) = max(OPT(j-1), v_j + OPT(p(j)))``
    with ``p(j)`` the last block (in order of occupied end) compatible with ``j``
    (Kleinberg & Tardos, Algorithm Design, section 6.1).

    Parameters
    ----------
    tasks : sequence of FixedTask
    overhead : float
        Minimum gap between consecutive blocks (grid time unit), >= 0.
    horizon : (t_min, t_max) or None
        Blocks not entirely inside are ignored.
    """
    if any(not isinstance(t, FixedTask) for t in tasks):
        raise ScheduleError("solve_fixed takes fixed tasks only; use solve_milp for flexible tasks")
    _check_names(tasks)
    cands = candidates(tasks, horizon)
    if not cands:
        return _to_schedule(tasks, [], "dp", overhead)
    ends = np.array([c.end + overhead for c in cands])
    order = np.argsort(ends, kind="stable")
    cs = [cands[k] for k in order]
    occ_end = ends[order]
    starts = np.array([c.start for c in cs])
    # p[j]: number of blocks (prefix length) whose occupied end <= start_j
    p = np.searchsorted(occ_end, starts + EPS, side="right")
    n = len(cs)
    opt = np.zeros(n + 1)
    take = np.zeros(n + 1, dtype=bool)
    for j in range(1, n + 1):
        with_j = cs[j - 1].value + opt[p[j - 1]]
        if with_j > opt[j - 1]:
            opt[j], take[j] = with_j, True
        else:
            opt[j] = opt[j - 1]
    chosen, j = [], n
    while j > 0:
        if take[j]:
            chosen.append(cs[j - 1])
            j = p[j - 1]
        else:
            j -= 1
    sched = _to_schedule(tasks, chosen, "dp", overhead)
    validate_schedule(sched, tasks, horizon)
    return sched


def solve_milp(tasks: Sequence[Task], overhead: float = 0.0, horizon: tuple | None = None,
               time_limit: float | None = 60.0, mip_rel_gap: float = 0.0) -> Schedule:
    """Mixed fixed/flexible problem as a 0/1 integer programme with :func:`scipy.optimize.milp`.

    Variables: ``x_c`` in {0, 1} for every (task, start) candidate ``c``. Maximise ``sum v_c x_c``
    subject to ``sum_{c in task k} x_c <= 1`` for every task and, for every distinct candidate start
    ``s``, ``sum_{c : start_c <= s < end_c + overhead} x_c <= 1`` (clique constraints: the blocks
    that cover time ``s`` pairwise overlap). See the scipy documentation of
    ``scipy.optimize.milp`` (HiGHS branch and cut).

    Parameters
    ----------
    tasks : sequence of FixedTask / FlexibleTask
    overhead : float
        Minimum gap between consecutive blocks (grid time unit).
    horizon : (t_min, t_max) or None
    time_limit : float or None
        Solver time limit in seconds; if hit, the best feasible schedule is returned with
        ``status`` "time limit" (still validated).
    mip_rel_gap : float
        Relative optimality gap accepted (0 = proven optimal).
    """
    from scipy.optimize import LinearConstraint, milp
    from scipy.sparse import csr_array

    _check_names(tasks)
    cands = candidates(tasks, horizon)
    if not cands:
        return _to_schedule(tasks, [], "milp", overhead)
    n = len(cands)
    st = np.array([c.start for c in cands])
    oe = np.array([c.end for c in cands]) + overhead
    va = np.array([c.value for c in cands])
    tk = np.array([c.task for c in cands])

    # rows 1: one start per task (only tasks with more than one candidate need a row)
    utask, tinv, tcount = np.unique(tk, return_inverse=True, return_counts=True)
    multi = tcount[tinv] > 1
    _, rows_task = np.unique(tinv[multi], return_inverse=True)
    r1 = rows_task
    c1 = np.nonzero(multi)[0]
    n1 = int(r1.max()) + 1 if r1.size else 0

    # rows 2: cliques at every distinct start time s: candidates with st <= s < oe
    pts = np.unique(st)
    order = np.argsort(st, kind="stable")
    st_sorted = st[order]
    # the clique at pts[i] is contained in the one at pts[i+1] unless a block ends in between,
    # so only those "maximal" points need a row
    oe_sorted = np.sort(oe)
    nxt = np.append(pts[1:], np.inf)
    n_end_between = (np.searchsorted(oe_sorted, nxt + EPS, side="right")
                     - np.searchsorted(oe_sorted, pts + EPS, side="right"))
    keep_pt = n_end_between > 0
    rows, cols = [], []
    for i, s in enumerate(pts):
        if not keep_pt[i]:
            continue
        hi = np.searchsorted(st_sorted, s + EPS, side="right")
        idx = order[:hi]
        idx = idx[oe[idx] > s + EPS]
        if idx.size > 1:
            rows.append(np.full(idx.size, i))
            cols.append(idx)
    if rows:
        r2 = np.concatenate(rows)
        c2 = np.concatenate(cols)
        # renumber the rows that survived
        _, r2 = np.unique(r2, return_inverse=True)
        n2 = int(r2.max()) + 1
    else:
        r2 = c2 = np.empty(0, dtype=int)
        n2 = 0
    constraints = []
    m = n1 + n2
    if m:
        A = csr_array((np.ones(r1.size + r2.size), (np.concatenate([r1, r2 + n1]),
                                                    np.concatenate([c1, c2]))), shape=(m, n))
        constraints.append(LinearConstraint(A, -np.inf, 1.0))
    opts = {"mip_rel_gap": mip_rel_gap, "disp": False}
    if time_limit is not None:
        opts["time_limit"] = float(time_limit)
    # LP relaxation first: when its optimum is already integral it is the MILP optimum (the
    # clique rows of an interval graph make this common), and the LP is much faster to solve.
    lp_opts = {k: v for k, v in opts.items() if k != "mip_rel_gap"}
    res = milp(c=-va, constraints=constraints, integrality=np.zeros(n), bounds=(0, 1), options=lp_opts)
    note = "LP relaxation integral"
    if not (res.x is not None and res.status == 0 and np.all(np.minimum(res.x, 1 - res.x) < 1e-7)):
        note = "branch and cut"
        res = milp(c=-va, constraints=constraints, integrality=np.ones(n), bounds=(0, 1), options=opts)
    if res.x is None:
        raise ScheduleError(f"MILP solver found no schedule: {res.message}")
    status = "optimal" if res.status == 0 else ("time limit" if res.status == 1 else str(res.message))
    chosen = [cands[k] for k in np.nonzero(res.x > 0.5)[0]]
    sched = _to_schedule(tasks, chosen, "milp", overhead, status)
    sched.note = note
    validate_schedule(sched, tasks, horizon)
    return sched


def solve_greedy(tasks: Sequence[Task], overhead: float = 0.0, horizon: tuple | None = None,
                 order: str = "value") -> Schedule:
    """Baseline for tests and benchmarks: take candidates in ``order`` if they fit.

    ``order`` is "value" (highest value first) or "density" (highest value per unit time first).
    Not exact; never used for plans.
    """
    _check_names(tasks)
    if order not in ("value", "density"):
        raise ScheduleError(f"unknown greedy order {order!r}; choose 'value' or 'density'")
    if order == "value":
        key = (lambda c: (-c.value, c.start))
    else:
        key = (lambda c: (-c.value / (c.end - c.start + overhead), c.start))
    cands = sorted(candidates(tasks, horizon), key=key)
    chosen, used = [], set()
    for c in cands:
        if c.task in used:
            continue
        if all(c.end + overhead <= o.start + EPS or o.end + overhead <= c.start + EPS for o in chosen):
            chosen.append(c)
            used.add(c.task)
    sched = _to_schedule(tasks, chosen, "greedy", overhead)
    validate_schedule(sched, tasks, horizon)
    return sched


def solve_brute_force(tasks: Sequence[Task], overhead: float = 0.0, horizon: tuple | None = None,
                      max_candidates: int = 40) -> Schedule:
    """Exhaustive search over all feasible candidate subsets (tests only; tiny instances).

    Uses the same candidate starts as :func:`solve_milp`, so the two optima agree exactly.
    """
    _check_names(tasks)
    cands = candidates(tasks, horizon)
    if len(cands) > max_candidates:
        raise ScheduleError(f"brute force limited to {max_candidates} candidates, got {len(cands)}")
    by_task: dict[int, list[Candidate]] = {}
    for c in cands:
        by_task.setdefault(c.task, []).append(c)
    keys = sorted(by_task)
    best = [0.0, []]

    def fits(c, chosen):
        return all(c.end + overhead <= o.start + EPS or o.end + overhead <= c.start + EPS for o in chosen)

    def rec(i, chosen, val):
        if i == len(keys):
            if val > best[0] + 1e-12:
                best[0], best[1] = val, list(chosen)
            return
        rec(i + 1, chosen, val)
        for c in by_task[keys[i]]:
            if fits(c, chosen):
                chosen.append(c)
                rec(i + 1, chosen, val + c.value)
                chosen.pop()

    rec(0, [], 0.0)
    sched = _to_schedule(tasks, best[1], "brute", overhead)
    validate_schedule(sched, tasks, horizon)
    return sched


METHODS = {"dp": solve_fixed, "milp": solve_milp, "greedy": solve_greedy, "brute": solve_brute_force}


def schedule(tasks: Sequence[Task], overhead: float = 0.0, horizon: tuple | None = None,
             method: str = "auto", **kw) -> Schedule:
    """Choose blocks without overlap (overhead included) maximising the total value.

    Parameters
    ----------
    method : {"auto", "dp", "milp", "greedy", "brute"}
        "auto" uses the exact DP when all tasks are fixed, else the exact MILP.
    """
    if method == "auto":
        method = "dp" if all(isinstance(t, FixedTask) for t in tasks) else "milp"
    if method not in METHODS:
        raise ScheduleError(f"unknown method {method!r}; choose one of auto, {', '.join(METHODS)}")
    if not np.isfinite(overhead) or overhead < 0:
        raise ScheduleError(f"overhead must be >= 0, got {overhead}")
    return METHODS[method](tasks, overhead=overhead, horizon=horizon, **kw)
