"""Task building from plain records and visibility arrays (no astropy needed)."""
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rhofollow.planning.scheduler import schedule
from rhofollow.planning.tasks import (
    ValueModel, VisGrid, airmass_factor, ecc_evidence, iso_to_jd, jd_to_iso, occultation_tasks,
    phase_weight, rv_task, visible_windows)

JD0 = 2461376.5 + 1.0 / 24.0  # 2026-12-03T01:00Z, an invented night start


def _vis(names=("HTS-101",), n=97, obs=None, airmass=None):
    t = JD0 + np.arange(n) * 5.0 / 1440.0  # 5-minute grid, 8 hours
    o = np.ones((len(names), n), bool) if obs is None else np.atleast_2d(obs)
    x = np.full((len(names), n), 1.2) if airmass is None else np.atleast_2d(airmass)
    return VisGrid(t, list(names), o, x)


def test_iso_jd_round_trip():
    # JD of 2000-01-01T12:00 UTC is 2451545.0 (common practice, no source)
    assert iso_to_jd("2000-01-01T12:00:00Z") == pytest.approx(2451545.0)
    assert jd_to_iso(2451545.0) == "2000-01-01T12:00:00Z"
    assert iso_to_jd(2451545.25) == 2451545.25


def test_airmass_factor_and_phase_weight():
    assert airmass_factor(1.0) == pytest.approx(1.0)
    assert airmass_factor(2.0) == pytest.approx(math.exp(-0.5))
    assert airmass_factor(np.inf) == 0.0
    assert phase_weight(0.25, [0.25]) == pytest.approx(1.0)
    # circular distance: 0.98 is 0.04 from 0.02
    assert phase_weight(0.98, [0.02]) == pytest.approx(phase_weight(0.06, [0.02]))
    assert phase_weight(0.75, [0.25], floor=0.25) == pytest.approx(0.25, abs=1e-6)
    assert np.all(phase_weight(np.linspace(0, 1, 5), []) == 1.0)


@settings(max_examples=50, deadline=None)
@given(st.floats(-3, 3), st.lists(st.floats(0, 1), max_size=3), st.floats(0, 1))
def test_phase_weight_bounded_and_periodic(phase, best, floor):
    w = phase_weight(phase, best, floor=floor)
    assert floor - 1e-12 <= w <= 1 + 1e-12
    assert phase_weight(phase + 1.0, best, floor=floor) == pytest.approx(w, abs=1e-9)


def test_ecc_evidence():
    assert ecc_evidence([0.0, 0.05, 0.2, 0.5]) == pytest.approx(0.5)
    assert ecc_evidence([0.0, 0.5], [3.0, 1.0]) == pytest.approx(0.25)
    assert ecc_evidence([]) == 0.0


def _occ_record(w0, w1, p=0.8, dur=2.0, mass=None):
    ev = {"epoch": 12, "window_utc": [[jd_to_iso(w0), jd_to_iso(w1)]]}
    if mass:
        ev["window_mass"] = mass
    return {"name": "HTS-101", "p_occultation": p, "occ_duration_h": {"q50": dur}, "events": [ev]}


def test_occultation_task_value_formula():
    vis = _vis()
    rec = _occ_record(JD0 + 2 / 24, JD0 + 4 / 24)   # 2 h window, 1 h baselines -> 4 h block
    tasks, skipped = occultation_tasks(rec, 0.9, vis)
    assert not skipped and len(tasks) == 1
    t = tasks[0]
    assert (t.start, t.end) == (pytest.approx(1.0), pytest.approx(5.0))
    expected = 0.8 * 1.0 * 0.9 * math.exp(-0.5 * 0.2) * (2.0 / 4.0)
    assert t.value == pytest.approx(expected)
    assert t.kind == "occultation" and t.meta["airmass_max"] == pytest.approx(1.2)


def test_occultation_skips_unobservable_and_outside():
    obs = np.ones(97, bool)
    obs[30:40] = False
    vis = _vis(obs=obs)
    rec = _occ_record(JD0 + 2 / 24, JD0 + 4 / 24)
    tasks, skipped = occultation_tasks(rec, 0.9, vis)
    assert tasks == [] and "observable only" in skipped[0].reason
    # a window on another night is neither a task nor a skip
    rec = _occ_record(JD0 + 3, JD0 + 3.1)
    assert occultation_tasks(rec, 0.9, vis) == ([], [])
    # a window running past the end of the night
    rec = _occ_record(JD0 + 7.5 / 24, JD0 + 9 / 24)
    tasks, skipped = occultation_tasks(rec, 0.9, vis)
    assert tasks == [] and "does not fit inside the night" in skipped[0].reason


def test_two_windows_split_probability():
    vis = _vis()
    ev = {"epoch": 3, "window_utc": [[JD0 + 1.5 / 24, JD0 + 2 / 24], [JD0 + 5 / 24, JD0 + 5.5 / 24]],
          "window_mass": [0.7, 0.3]}
    rec = {"name": "HTS-101", "p_occultation": 1.0, "occ_duration_h": 1.0, "events": [ev]}
    tasks, _ = occultation_tasks(rec, 1.0, vis, ValueModel(baseline_h=0.5))
    assert [t.name for t in tasks] == ["HTS-101 occ E3 w1", "HTS-101 occ E3 w2"]
    assert tasks[0].value / tasks[1].value == pytest.approx(0.7 / 0.3)


def test_visible_windows():
    t_h = np.arange(13) * 0.5
    obs = np.array([1, 1, 1, 1, 0, 1, 1, 1, 1, 1, 1, 0, 0], bool)
    # run 0..1.5 h and run 2.5..5.0 h; a 1 h block fits in both
    assert visible_windows(obs, t_h, 1.0) == [(0.0, 0.5), (2.5, 4.0)]
    assert visible_windows(obs, t_h, 2.0) == [(2.5, 3.0)]
    assert visible_windows(obs, t_h, 9.0) == []


@settings(max_examples=50, deadline=None)
@given(st.lists(st.booleans(), min_size=2, max_size=40), st.floats(0.1, 3.0))
def test_visible_windows_blocks_are_observable(obs, dur):
    obs = np.array(obs)
    t_h = np.arange(obs.size) * 0.25
    for a, b in visible_windows(obs, t_h, dur):
        for s in np.linspace(a, b, 7):
            inside = (t_h >= s - 1e-9) & (t_h <= s + dur + 1e-9)
            assert obs[inside].all() and s + dur <= t_h[-1] + 1e-9


def test_rv_task_prefers_informative_phase():
    vis = _vis()
    period = 2.0
    # phase 0.25 is reached at JD0 + 3.5 h (t0 chosen so), a 0.5 h visit centred there
    t0 = JD0 + 3.5 / 24 - 0.25 * period
    rec = {"name": "HTS-101", "n_epochs_confirm_ecc": 4, "hours_confirm_ecc": 2.0, "best_phases": [0.25]}
    task, skip = rv_task(rec, 1.0, vis, t0, period)
    assert skip is None and task.duration == pytest.approx(0.5)
    sched = schedule([task])
    b = sched.blocks[0]
    assert b.start + 0.25 == pytest.approx(3.5, abs=0.1)
    assert b.value == pytest.approx(1.0 * airmass_factor(1.2) / 4, rel=0.02)
    assert task.meta["phase_of"](b.start) == pytest.approx(0.25, abs=0.01)


def test_rv_task_scales_with_remaining_epochs_and_skips():
    vis = _vis()
    rec = {"name": "HTS-101", "n_epochs_confirm_ecc": 10, "hours_confirm_ecc": 5.0, "best_phases": []}
    a, _ = rv_task(rec, 1.0, vis, JD0, 3.0)
    b, _ = rv_task(rec, 1.0, vis, JD0, 3.0, n_done=8)
    assert b.values_at(np.array([1.0]))[0] == pytest.approx(5 * a.values_at(np.array([1.0]))[0])
    t, skip = rv_task(dict(rec, n_epochs_confirm_ecc=float("inf")), 1.0, vis, JD0, 3.0)
    assert t is None and "cannot be confirmed" in skip.reason
    t, skip = rv_task(rec, 0.0, vis, JD0, 3.0)
    assert t is None and "no value" in skip.reason
    t, skip = rv_task(rec, 1.0, _vis(obs=np.zeros(97, bool)), JD0, 3.0)
    assert t is None and "not observable" in skip.reason


def test_visgrid_shape_check():
    with pytest.raises(ValueError, match="shape"):
        VisGrid(np.arange(3.0), ["a", "b"], np.ones((1, 3), bool), np.ones((1, 3)))


def _long_event(mid_jd, sig_d, offset=0.0008):
    """A 12-hour window around mid_jd (UTC) with mid-time quantiles of a normal of width sig_d."""
    z = {"q025": -1.96, "q16": -1.0, "q50": 0.0, "q84": 1.0, "q975": 1.96}
    w0, w1 = mid_jd - 0.25, mid_jd + 0.25
    return {"epoch": 5, "window_utc": [[jd_to_iso(w0), jd_to_iso(w1)]],
            "window_bjd_tdb": [[w0 + offset, w1 + offset]],
            "mid_bjd_tdb": {k: mid_jd + offset + v * sig_d for k, v in z.items()}}


def test_partial_block_for_window_longer_than_night():
    vis = _vis()  # 8 h night from JD0
    mid = JD0 + 4 / 24
    rec = {"name": "HTS-101", "p_occultation": 1.0, "occ_duration_h": 2.0, "events": [_long_event(mid, 2 / 24)]}
    model = ValueModel(baseline_h=0.0, partial_baseline_h=1.0)
    tasks, skipped = occultation_tasks(rec, 1.0, vis, model)
    assert not skipped and len(tasks) == 1
    t = tasks[0]
    assert t.name.endswith("partial") and t.meta["partial"]
    assert (t.start, t.end) == (pytest.approx(0.0), pytest.approx(8.0))
    # the mid-time must fall in [JD0 + 2 h, JD0 + 6 h]: +-1 sigma of the invented normal -> 0.68
    assert t.meta["p_catch"] == pytest.approx(0.68, abs=1e-3)
    expected = 0.68 * math.exp(-0.5 * 0.2) * (2.0 / 8.0)
    assert t.value == pytest.approx(expected, rel=1e-3)
    # a mid-time posterior far outside the night: nothing to catch, the window is skipped
    rec["events"] = [_long_event(JD0 + 0.5, 1 / 24)]
    tasks, skipped = occultation_tasks(rec, 1.0, vis, model)
    assert tasks == [] and "does not fit inside the night" in skipped[0].reason
