"""RV time-to-confirm at reachable epochs (physics/rvreach.py), exposure choice, itemised overheads
and the site's loss fraction."""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rhofollow.io.instruments import Spectrograph
from rhofollow.physics import rvconfirm, rvreach
from rhofollow.physics.rvnoise import epoch_precision


def _posterior(n=400, e0=0.3, k=10.0, seed=1):
    rng = np.random.default_rng(seed)
    e = np.clip(rng.normal(e0, 0.05, n), 0.0, 0.9)
    return e, rng.uniform(0, 2 * np.pi, n), np.full(n, k)


def test_uniform_pool_matches_uniform_phase_simulation():
    # Cross-check: a pool spread uniformly in phase gives the power of rvconfirm's uniform-phase
    # simulation (same test; agreement within the Monte-Carlo error, 400 data sets per N:
    # sd of a power near 0.6 is 0.025, so 0.1 is four sd; common practice, no source).
    e, om, k = _posterior()
    pool = rvreach.uniform_pool(80, seed=2)
    ladder = [8, 14, 20]
    c = rvreach.power_curve_at_pool(e, om, k, 3.0, pool, ladder, seed=3)
    ref = [rvconfirm.power_at(e, om, k, 3.0, n, seed=3)[0] for n in ladder]
    assert np.allclose(c["power"], ref, atol=0.1)
    assert c["n"] == ladder


def test_one_phase_target_needs_more_visits_or_is_not_confirmable():
    # A target reachable only near one orbital phase (0.25 +- 0.02) cannot tell eccentric from
    # circular shapes as well as uniformly spread epochs (common practice, no source).
    e, om, k = _posterior()
    rng = np.random.default_rng(5)
    narrow = rvreach.EpochPool([0.25 + 0.02 * rng.standard_normal(20) for _ in range(60)])
    wide = rvreach.uniform_pool(60, seed=6)
    lad = rvreach.visit_ladder(60)
    c_n = rvreach.power_curve_at_pool(e, om, k, 3.0, narrow, lad, seed=7)
    c_w = rvreach.power_curve_at_pool(e, om, k, 3.0, wide, lad, seed=7)
    n_w, n_n = rvreach.visits_for_power(c_w, 0.8), rvreach.visits_for_power(c_n, 0.8)
    assert n_w is not None
    assert n_n is None or n_n > n_w
    assert max(c_n["power"]) < max(c_w["power"])


def test_loss_fraction_lowers_power():
    e, om, k = _posterior()
    pool = rvreach.uniform_pool(60, seed=2)
    lad = [10, 20, 30]
    p0 = rvreach.power_curve_at_pool(e, om, k, 3.0, pool, lad, seed=3)["power"]
    p5 = rvreach.power_curve_at_pool(e, om, k, 3.0, pool, lad, seed=3, loss=0.5)["power"]
    assert all(b < a for a, b in zip(p0, p5))
    with pytest.raises(ValueError, match="loss fraction"):
        rvreach.power_curve_at_pool(e, om, k, 3.0, pool, lad, loss=1.0)


def test_power_curve_is_seeded():
    e, om, k = _posterior(200)
    pool = rvreach.uniform_pool(20, seed=2)
    a = rvreach.power_curve_at_pool(e, om, k, 3.0, pool, [5, 10], seed=11, n_null=400, n_alt=200)
    b = rvreach.power_curve_at_pool(e, om, k, 3.0, pool, [5, 10], seed=11, n_null=400, n_alt=200)
    assert a == b


@settings(max_examples=25, deadline=None)
@given(st.integers(5, 300))
def test_visit_ladder_is_increasing_and_ends_at_max(n_max):
    lad = rvreach.visit_ladder(n_max)
    assert lad[0] == rvreach.N_MIN and lad[-1] == n_max
    assert all(b > a for a, b in zip(lad, lad[1:]))


def test_pool_draw_uses_distinct_nights():
    pool = rvreach.EpochPool([np.full(3, i / 10.0) for i in range(10)] + [np.zeros(0)])
    assert pool.n_nights == 10
    ph = pool.draw(50, 10, np.random.default_rng(0))
    assert all(len(set(np.round(r, 6))) == 10 for r in ph)
    with pytest.raises(ValueError, match="reachable nights"):
        pool.draw(1, 11, np.random.default_rng(0))


def test_fisher_at_uniform_phases_equals_rvconfirm():
    # Same Fisher matrix as rvconfirm.fisher_noncentrality when the phases are its uniform grid.
    e, om, k = _posterior(50)
    ph = (np.arange(256) + 0.5) / 256
    a = rvreach.fisher_noncentrality_at(e, om, k, ph) / 3.0**2
    b = rvconfirm.fisher_noncentrality(e, om, k, 3.0)
    assert np.allclose(a, b, rtol=1e-4)


_INST = Spectrograph("TEST-RV", precision_ref_ms=1.6, vmag_ref=9.0, exposure_ref_s=1200.0, floor_ms=0.8,
                     overhead_min=7.0, exposure_min_s=120.0, exposure_max_s=2700.0)


def test_large_k_gets_a_short_exposure_small_k_a_long_one():
    # K = 160 m/s on a V = 11 star: the per-visit error is not the limit, so the shortest exposure
    # gives the fewest hours; K = 4 m/s on V = 12 needs a long exposure (issue 13).
    ph = np.random.default_rng(0).random(200)
    e, om, _ = _posterior(200)
    big = rvreach.choose_exposure(rvreach.fisher_noncentrality_at(e, om, np.full(200, 160.0), ph), None,
                                  11.0, 2.5, _INST, n_cap=60)
    small = rvreach.choose_exposure(rvreach.fisher_noncentrality_at(e, om, np.full(200, 4.0), ph), None,
                                    12.0, 1.8, _INST, n_cap=60)
    assert big["exposure_s"] == pytest.approx(_INST.exposure_min_s)
    assert small["exposure_s"] > 4 * big["exposure_s"]
    assert _INST.exposure_min_s <= small["exposure_s"] <= _INST.exposure_max_s
    assert small["sigma_ms"] == pytest.approx(epoch_precision(12.0, small["exposure_s"], 1.6, 9.0, 1200.0, 0.8, 1.8))


def test_visit_overheads_itemised_once():
    from rhofollow.planning.rvreach import visit_overheads

    c = visit_overheads(600.0, _INST)
    assert c["instrument_overhead_s"] == 420.0 and c["site_slew_setup_s"] == 0.0
    assert c["visit_h"] == pytest.approx((600.0 + 420.0) / 3600.0)


def test_site_loss_fraction_key(tmp_path):
    from rhofollow.planning.site import DEFAULT_LOSS_FRACTION, ConfigError, load_site

    base = ('[site]\nname = "X"\nlatitude_deg = -30\nlongitude_deg = -70\nelevation_m = 2000\n'
            'timezone = "America/Santiago"\n[constraints]\nmin_altitude_deg = 30\ntwilight = "nautical"\n')
    p = tmp_path / "s.toml"
    p.write_text(base)
    assert load_site(p).loss_fraction == DEFAULT_LOSS_FRACTION == 0.25
    p.write_text(base + "[overheads]\nloss_fraction = 0.4\n")
    assert load_site(p).loss_fraction == 0.4
    for bad in ("1.2", "-0.1", '"a lot"'):
        p.write_text(base + f"[overheads]\nloss_fraction = {bad}\n")
        with pytest.raises(ConfigError, match="overheads.loss_fraction"):
            load_site(p)
