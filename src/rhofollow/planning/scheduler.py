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
* :func:`solve_milp` (:mod:`.milp`) — the mixed problem as a 0/1 integer programme solved with
  :func:`scipy.optimize.milp` (HiGHS): one binary per (task, start) candidate, at most one start per
  task, and one clique constraint per distinct candidate start time (the intervals that contain a
  given time form a clique; for intervals, checking every left end point is enough, because two
  half-open intervals intersect exactly when one contains the other's start). The LP relaxation
  is solved first; when its optimum is integral it is returned (it is then the integer optimum),
  otherwise HiGHS branch and cut runs, within a time limit (60 s by default) and an accepted
  relative gap (0 by default); the schedule reports the gap reached (``Schedule.gap``).
* :func:`solve_greedy` — baseline for tests and the benchmark only (highest value first).
* :func:`solve_brute_force` — exhaustive search for tiny instances (tests only).

:func:`schedule` dispatches ("auto" picks the DP when every task is fixed, else the MILP), and every
result goes through :func:`validate_schedule`. The task, candidate and schedule types and the
feasibility rules live in :mod:`.blocks` and are importable from here.
"""
from __future__ import annotations

from typing import Sequence

import numpy as np

from rhofollow.planning.blocks import (EPS, Block, Candidate, FixedTask, FlexibleTask, Schedule, ScheduleError,
                                       Task, candidates, check_unique_names, make_schedule, validate_schedule)
from rhofollow.planning.milp import solve_milp

__all__ = ["FixedTask", "FlexibleTask", "Candidate", "Block", "Schedule", "ScheduleError",
           "candidates", "solve_fixed", "solve_milp", "solve_greedy", "solve_brute_force",
           "schedule", "validate_schedule", "METHODS"]


def solve_fixed(tasks: Sequence[FixedTask], overhead: float = 0.0,
                horizon: tuple | None = None) -> Schedule:
    """Weighted interval scheduling by dynamic programming (exact).

    Every block occupies ``[start, end + overhead)``; ``OPT(j) = max(OPT(j-1), v_j + OPT(p(j)))``
    with ``p(j)`` the last block (in order of occupied end) compatible with ``j``
    (Kleinberg & Tardos, Algorithm Design, section 6.1).

    Parameters
    ----------
    tasks : sequence of FixedTask
        The tasks (times in the grid time unit, e.g. hours).
    overhead : float
        Minimum gap between consecutive blocks (grid time unit), >= 0.
    horizon : (t_min, t_max) or None
        Planning limits (grid time unit); blocks not entirely inside are ignored.

    Returns
    -------
    Schedule
        The optimal blocks (grid time unit) and total value (dimensionless); method "dp", gap 0.
    """
    if any(not isinstance(t, FixedTask) for t in tasks):
        raise ScheduleError("solve_fixed takes fixed tasks only; use solve_milp for flexible tasks")
    check_unique_names(tasks)
    cands = candidates(tasks, horizon)
    if not cands:
        return make_schedule(tasks, [], "dp", overhead)
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
    sched = make_schedule(tasks, chosen, "dp", overhead)
    validate_schedule(sched, tasks, horizon)
    return sched


def solve_greedy(tasks: Sequence[Task], overhead: float = 0.0, horizon: tuple | None = None,
                 order: str = "value") -> Schedule:
    """Baseline for tests and benchmarks: take candidates in ``order`` if they fit.

    Not exact; never used for plans.

    Parameters
    ----------
    tasks : sequence of FixedTask / FlexibleTask
        The tasks (times in the grid time unit, e.g. hours).
    overhead : float
        Minimum gap between consecutive blocks (grid time unit), >= 0.
    horizon : (t_min, t_max) or None
        Planning limits (grid time unit); blocks not entirely inside are ignored.
    order : {"value", "density"}
        Highest value first, or highest value per unit time (overhead included) first.

    Returns
    -------
    Schedule
        The blocks taken (grid time unit) and their total value (dimensionless); method "greedy".
    """
    check_unique_names(tasks)
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
    sched = make_schedule(tasks, chosen, "greedy", overhead)
    validate_schedule(sched, tasks, horizon)
    return sched


def solve_brute_force(tasks: Sequence[Task], overhead: float = 0.0, horizon: tuple | None = None,
                      max_candidates: int = 40) -> Schedule:
    """Exhaustive search over all feasible candidate subsets (tests only; tiny instances).

    Uses the same candidate starts as :func:`solve_milp`, so the two optima agree exactly.

    Parameters
    ----------
    tasks : sequence of FixedTask / FlexibleTask
        The tasks (times in the grid time unit, e.g. hours).
    overhead : float
        Minimum gap between consecutive blocks (grid time unit), >= 0.
    horizon : (t_min, t_max) or None
        Planning limits (grid time unit); blocks not entirely inside are ignored.
    max_candidates : int
        Largest number of candidates searched (ScheduleError above it).

    Returns
    -------
    Schedule
        An optimal set of blocks (grid time unit) and its total value (dimensionless); method "brute".
    """
    check_unique_names(tasks)
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
    sched = make_schedule(tasks, best[1], "brute", overhead)
    validate_schedule(sched, tasks, horizon)
    return sched


METHODS = {"dp": solve_fixed, "milp": solve_milp, "greedy": solve_greedy, "brute": solve_brute_force}


def schedule(tasks: Sequence[Task], overhead: float = 0.0, horizon: tuple | None = None,
             method: str = "auto", **kw) -> Schedule:
    """Choose blocks without overlap (overhead included) maximising the total value.

    Parameters
    ----------
    tasks : sequence of FixedTask / FlexibleTask
        The tasks (times in the grid time unit, e.g. hours).
    overhead : float
        Minimum gap between consecutive blocks (grid time unit), >= 0.
    horizon : (t_min, t_max) or None
        Planning limits (grid time unit); blocks not entirely inside are ignored.
    method : {"auto", "dp", "milp", "greedy", "brute"}
        "auto" uses the exact DP when all tasks are fixed, else the exact MILP.
    **kw
        Passed to the solver (the MILP's ``time_limit`` in seconds and ``mip_rel_gap``).

    Returns
    -------
    Schedule
        Blocks (grid time unit), total value (dimensionless), solver status and gap reached.
    """
    if method == "auto":
        method = "dp" if all(isinstance(t, FixedTask) for t in tasks) else "milp"
    if method not in METHODS:
        raise ScheduleError(f"unknown method {method!r}; choose one of auto, {', '.join(METHODS)}")
    if not np.isfinite(overhead) or overhead < 0:
        raise ScheduleError(f"overhead must be >= 0, got {overhead}")
    return METHODS[method](tasks, overhead=overhead, horizon=horizon, **kw)
