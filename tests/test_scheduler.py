"""Exact scheduling: DP and MILP against brute force and the greedy baseline, feasibility always."""
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rhofollow.planning.scheduler import (
    FixedTask, FlexibleTask, Schedule, Block, ScheduleError, candidates, schedule, solve_brute_force,
    solve_fixed, solve_greedy, solve_milp, validate_schedule)

# ---------------------------------------------------------------- strategies

times = st.floats(0.0, 10.0, allow_nan=False)
lengths = st.floats(0.2, 4.0, allow_nan=False)
values = st.floats(0.01, 10.0, allow_nan=False)
overheads = st.sampled_from([0.0, 0.1, 0.25])


@st.composite
def fixed_tasks(draw, max_n=7):
    n = draw(st.integers(0, max_n))
    out = []
    for i in range(n):
        s, d, v = draw(times), draw(lengths), draw(values)
        out.append(FixedTask(f"F{i}", s, s + d, v, kind="occultation"))
    return out


@st.composite
def mixed_tasks(draw, max_fixed=3, max_flex=3):
    tasks = draw(fixed_tasks(max_fixed))
    for i in range(draw(st.integers(0, max_flex))):
        a = draw(st.floats(0.0, 8.0, allow_nan=False))
        w = draw(st.floats(0.0, 1.5, allow_nan=False))
        d = draw(st.floats(0.3, 2.0, allow_nan=False))
        base = draw(values)
        slope = draw(st.floats(-1.0, 1.0, allow_nan=False))
        # value depends on the start time (as the phase-dependent RV value does), stays > 0
        tasks.append(FlexibleTask(f"R{i}", d, ((a, a + w),),
                                  value=lambda s, b=base, k=slope: b * (1.0 + 0.5 * k * np.sin(s)),
                                  step=0.5, kind="rv"))
    return tasks


def _no_overlap(sched: Schedule, overhead: float):
    b = sorted(sched.blocks, key=lambda x: x.start)
    for x, y in zip(b, b[1:]):
        assert y.start >= x.end + overhead - 1e-9


# ---------------------------------------------------------------- fixed tasks: DP

def test_dp_hand_example():
    # common practice, no source: three overlapping windows, the two compatible ones win
    tasks = [FixedTask("a", 0, 3, 5.0), FixedTask("b", 2, 5, 6.0), FixedTask("c", 3.2, 6, 4.0)]
    s = solve_fixed(tasks, overhead=0.0)
    assert s.names == ["a", "c"] and s.value == pytest.approx(9.0)
    # an overhead of 0.5 makes a and c incompatible: b alone (6) vs a (5) vs c (4)
    s = solve_fixed(tasks, overhead=0.5)
    assert s.names == ["b"] and s.value == pytest.approx(6.0)


def test_dp_touching_blocks_allowed_only_without_overhead():
    tasks = [FixedTask("a", 0, 1, 1.0), FixedTask("b", 1, 2, 1.0)]
    assert solve_fixed(tasks, 0.0).value == pytest.approx(2.0)
    assert solve_fixed(tasks, 0.1).value == pytest.approx(1.0)


def test_horizon_drops_blocks_outside():
    tasks = [FixedTask("a", -1, 1, 10.0), FixedTask("b", 2, 3, 1.0)]
    s = solve_fixed(tasks, 0.0, horizon=(0.0, 8.0))
    assert s.names == ["b"]


@settings(max_examples=60, deadline=None)
@given(fixed_tasks(), overheads)
def test_dp_equals_brute_force(tasks, overhead):
    dp = solve_fixed(tasks, overhead)
    bf = solve_brute_force(tasks, overhead)
    assert dp.value == pytest.approx(bf.value, rel=1e-9, abs=1e-12)
    _no_overlap(dp, overhead)


@settings(max_examples=40, deadline=None)
@given(fixed_tasks(12), overheads)
def test_dp_at_least_greedy_and_equals_milp(tasks, overhead):
    dp = solve_fixed(tasks, overhead)
    gr = solve_greedy(tasks, overhead)
    gd = solve_greedy(tasks, overhead, order="density")
    mi = solve_milp(tasks, overhead)
    assert dp.value >= max(gr.value, gd.value) - 1e-9
    assert mi.value == pytest.approx(dp.value, rel=1e-7, abs=1e-9)
    _no_overlap(mi, overhead)


# ---------------------------------------------------------------- mixed tasks: MILP

@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(mixed_tasks(), overheads)
def test_milp_equals_brute_force_and_beats_greedy(tasks, overhead):
    if len(candidates(tasks)) > 22:
        return
    mi = solve_milp(tasks, overhead)
    bf = solve_brute_force(tasks, overhead)
    gr = solve_greedy(tasks, overhead)
    assert mi.status == "optimal"
    assert mi.value == pytest.approx(bf.value, rel=1e-7, abs=1e-9)
    assert mi.value >= gr.value * (1 - 1e-7) - 1e-9  # HiGHS optimality tolerance on near-ties
    _no_overlap(mi, overhead)
    validate_schedule(mi, tasks)


def test_milp_strictly_beats_greedy_on_known_trap():
    # common practice, no source: greedy takes the single most valuable long block,
    # the optimum takes two shorter ones that together are worth more
    tasks = [FixedTask("long", 0, 4, 10.0),
             FlexibleTask("r1", 1.0, ((0.0, 1.0),), 6.0, step=0.5),
             FlexibleTask("r2", 1.0, ((2.0, 3.0),), 6.0, step=0.5)]
    mi = solve_milp(tasks, 0.1)
    gr = solve_greedy(tasks, 0.1)
    assert mi.value == pytest.approx(12.0) and gr.value == pytest.approx(10.0)


def test_flexible_start_follows_value():
    # value peaks at start = 3 (like an informative orbital phase): the solver starts there
    t = FlexibleTask("r", 0.5, ((0.0, 6.0),), value=lambda s: np.exp(-(s - 3.0) ** 2), step=0.25)
    s = schedule([t], 0.0)
    assert s.method == "milp" and s.blocks[0].start == pytest.approx(3.0)


def test_flexible_starts_on_common_grid():
    t = FlexibleTask("r", 1.0, ((0.2, 1.6), (3.0, 3.1)), 1.0, step=0.5)
    assert np.allclose(t.starts(), [0.5, 1.0, 1.5, 3.0])
    # a window between two grid points still offers its earliest start
    assert np.allclose(FlexibleTask("r", 1.0, ((0.6, 0.8),), 1.0, step=0.5).starts(), [0.6])


def test_auto_dispatch_and_bad_inputs():
    assert schedule([FixedTask("a", 0, 1, 1.0)]).method == "dp"
    with pytest.raises(ScheduleError, match="unknown method"):
        schedule([], method="fastest")
    with pytest.raises(ScheduleError, match="unique"):
        schedule([FixedTask("a", 0, 1, 1.0), FixedTask("a", 2, 3, 1.0)])
    with pytest.raises(ScheduleError, match="end"):
        FixedTask("a", 2, 1, 1.0)
    with pytest.raises(ScheduleError, match="overhead"):
        schedule([], overhead=-1)
    with pytest.raises(ScheduleError, match="fixed tasks only"):
        solve_fixed([FlexibleTask("r", 1.0, ((0, 1),), 1.0)])


def test_validate_rejects_overlap_including_overhead():
    tasks = [FixedTask("a", 0, 1, 1.0), FixedTask("b", 1.05, 2, 1.0)]
    bad = Schedule([Block("a", "fixed", 0, 1, 1.0, 0), Block("b", "fixed", 1.05, 2, 1.0, 1)],
                   2.0, "hand", overhead=0.1)
    with pytest.raises(ScheduleError, match="overlap"):
        validate_schedule(bad, tasks)
    bad_rv = Schedule([Block("r", "rv", 5.0, 6.0, 1.0, 0)], 1.0, "hand", 0.0)
    with pytest.raises(ScheduleError, match="outside its allowed windows"):
        validate_schedule(bad_rv, [FlexibleTask("r", 1.0, ((0, 1),), 1.0)])


def test_zero_and_negative_values_never_scheduled():
    tasks = [FixedTask("z", 0, 1, 0.0), FixedTask("n", 2, 3, -1.0)]
    assert schedule(tasks).blocks == []
    assert solve_milp(tasks).blocks == []


def test_milp_fractional_lp_goes_to_branch_and_cut():
    # found by random search (common practice, no source): the LP relaxation of this instance is
    # fractional, so the solver must branch; the optimum still equals brute force
    tasks = [FlexibleTask("t0", 1.0, ((3.0, 5.0),), 2.0, step=1.0),
             FlexibleTask("t1", 2.0, ((2.0, 4.0),), 1.0, step=1.0),
             FlexibleTask("t2", 1.0, ((2.0, 3.0),), 3.0, step=1.0)]
    mi = solve_milp(tasks, 0.0)
    assert mi.note == "branch and cut"
    assert mi.value == pytest.approx(solve_brute_force(tasks, 0.0).value) == pytest.approx(6.0)
    easy = solve_milp([FixedTask("a", 0, 1, 1.0), FlexibleTask("r", 1.0, ((0.0, 3.0),), 1.0)], 0.0)
    assert easy.note == "LP relaxation integral" and easy.value == pytest.approx(2.0)
    # the gap reached (relative distance between HiGHS's bound and the value) is reported: 0 for a
    # proven optimum, both after branch and cut and for an integral LP relaxation
    assert mi.gap == 0.0 and easy.gap == 0.0
    assert solve_fixed([FixedTask("a", 0, 1, 1.0)]).gap == 0.0  # the DP is exact


def test_milp_gap_reached_stays_within_the_gap_accepted():
    # same fractional instance: with a relative gap of 0.5 accepted, HiGHS may stop early, but the
    # gap it reports is at most 0.5 and the value at least (1 - 0.5) times the optimum
    tasks = [FlexibleTask("t0", 1.0, ((3.0, 5.0),), 2.0, step=1.0),
             FlexibleTask("t1", 2.0, ((2.0, 4.0),), 1.0, step=1.0),
             FlexibleTask("t2", 1.0, ((2.0, 3.0),), 3.0, step=1.0)]
    mi = solve_milp(tasks, 0.0, mip_rel_gap=0.5)
    assert mi.note == "branch and cut" and mi.status == "optimal"
    assert 0.0 <= mi.gap <= 0.5
    assert mi.value >= 0.5 * 6.0 - 1e-9
