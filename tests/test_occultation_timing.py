"""Likelihoods of occultation timings and non-detections (rhofollow.physics.occultation_timing)."""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from rhofollow.physics import occultation_timing as ot
from rhofollow.physics.kepler import occultation_offset_first_order

T0 = 2460000.0


@pytest.mark.parametrize("e,omega_deg,dt_days", [
    (0.0, 90.0, 5.000000), (0.3, 60.0, 5.984896), (0.3, 0.0, 6.880812), (0.6, 200.0, 1.546968),
    (0.1, 45.0, 5.450910),
])
def test_offset_matches_reference_table(e, omega_deg, dt_days):
    # REFERENCE.md sec. 2.5, "Delta t exact (conj)", P = 10 d: computed from the exact conjunction
    # anomalies f = pi/2 - omega and -pi/2 - omega (Winn 2010, arXiv:1001.2010, sec. 2; memory).
    got = ot.occultation_offset(e, np.radians(omega_deg), 10.0)
    assert got == pytest.approx(dt_days, abs=2e-6)


def test_offset_agrees_with_first_order_for_small_e():
    # Winn 2010 eq. 33 (value from memory): Delta t ~ P/2 (1 + 4 e cos(omega) / pi) at i = 90 deg;
    # the error is second order in e.
    om = np.linspace(0, 2 * np.pi, 37)
    for e in (0.01, 0.03):
        exact = ot.occultation_offset(e, om, 10.0)
        approx = occultation_offset_first_order(10.0, e, om)
        assert np.max(np.abs(exact - approx)) < 10.0 * 2 * e**2


def test_omega_90_puts_occultation_half_a_period_after_transit():
    # DESIGN.md convention test: omega = 90 deg puts the transit at periastron, so the two
    # conjunctions are symmetric about the apsidal line and are half a period apart
    # (common practice, no source).
    assert ot.occultation_offset(0.5, np.pi / 2, 8.0) == pytest.approx(4.0, abs=1e-12)
    # e cos(omega) > 0 makes the occultation later than half a period (REFERENCE sec. 2.4)
    assert ot.occultation_offset(0.2, 0.0, 8.0) > 4.0


def _geom(n):
    return dict(a_rs=np.full(n, 20.0), rstar=np.full(n, 1.0), inc=np.full(n, np.pi / 2),
                k=np.full(n, 0.1))


def test_timing_log_like_is_gaussian_in_the_residual():
    # Gaussian likelihood of a measured time (common practice, no source).
    e = np.array([0.0, 0.0])
    om = np.array([0.0, 0.0])
    per = np.array([10.0, 10.0])
    sig = 2.0 / 1440.0
    pred = ot.predicted_occultation_times(np.full(2, T0), per, e, om, T0 + 105.0, **{
        k: v for k, v in _geom(2).items() if k != "k"})
    # circular: half a period plus the light time 2a/c (20 R_sun: ~93 s)
    assert pred[0] - (T0 + 105.0) == pytest.approx(2 * 20 * 6.957e8 / 299792458.0 / 86400, abs=1e-9)
    t0s = np.array([T0, T0 + sig])  # second sample is 1 sigma early
    ll = ot.timing_log_like(t0s, per, e, om, pred[0], sig, **_geom(2))
    assert ll == pytest.approx([0.0, -0.5], abs=1e-6)
    with pytest.raises(ValueError, match="error"):
        ot.timing_log_like(t0s, per, e, om, pred[0], 0.0)


def test_timing_picks_the_nearest_epoch_and_excludes_missing_occultations():
    e = np.array([0.3, 0.3])
    om = np.array([0.0, 0.0])
    per = np.full(2, 10.0)
    t_meas = T0 + 5 * 10.0 + 6.880812
    geom = dict(a_rs=np.full(2, 20.0), inc=np.array([np.pi / 2, np.radians(80.0)]),
                k=np.full(2, 0.1))
    # sample 2: b_occ = 20 cos(80 deg) (1 - 0.09) = 3.2 > 1.1, no occultation at all
    ll = ot.timing_log_like(np.full(2, T0), per, e, om, t_meas, 1.0 / 1440, **geom)
    assert ll[0] > -1.0 and ll[1] == -np.inf


def test_non_detection_downweights_only_samples_seen_in_the_window():
    # circular sample: occultation at T0 + n P + P/2 inside the window; eccentric sample (e cos w
    # = 0.3) is ~1.9 d later and outside. Depth 1000 ppm vs a 300 ppm limit.
    e = np.array([0.0, 0.3, 0.0])
    om = np.zeros(3)
    per = np.full(3, 10.0)
    depth = np.array([1000.0, 1000.0, 50.0])  # third: circular but too shallow to be seen
    ll = ot.non_detection_log_like(np.full(3, T0), per, e, om, T0 + 104.8, T0 + 105.3, depth,
                                   300.0, **_geom(3))
    # Gaussian detection model: log Phi((L - d)/(L/3)) (common practice, no source)
    from scipy.stats import norm
    assert ll[0] == pytest.approx(norm.logcdf((300 - 1000) / 100.0), rel=1e-6)
    assert ll[1] == pytest.approx(norm.logcdf(3.0), rel=1e-6)
    assert ll[2] == pytest.approx(norm.logcdf(2.5), rel=1e-6)


def test_partial_coverage_weakens_the_exclusion():
    e = np.zeros(3)
    om = np.zeros(3)
    per = np.full(3, 10.0)
    t_occ = T0 + 5.0
    dur = np.full(3, 0.2)
    lls = [ot.non_detection_log_like(np.full(3, T0), per, e, om, t_occ - w0, t_occ + 0.3,
                                     np.full(3, 800.0), 300.0, duration=dur)[0]
           for w0 in (0.3, 0.05, -0.05)]
    # full, 75 % and 25 % of the event inside the window: ever weaker exclusion
    assert lls[0] < lls[1] < lls[2] < 0


@settings(max_examples=60, deadline=None)
@given(mid=st.floats(-3.0, 3.0), dur=st.one_of(st.just(0.0), st.floats(1e-3, 0.5)), ws=st.floats(-2.0, 2.0),
       length=st.floats(0.01, 3.0), period=st.floats(1.0, 20.0))
def test_coverage_is_a_fraction_and_grows_with_the_window(mid, dur, ws, length, period):
    # invariants of the coverage fraction (common practice, no source)
    c1 = ot.event_coverage(np.array([mid]), np.array([period]), np.array([dur]), ws, ws + length)
    c2 = ot.event_coverage(np.array([mid]), np.array([period]), np.array([dur]), ws - 0.1,
                           ws + length + 0.1)
    assert 0.0 <= c1[0] <= 1.0 + 1e-12
    assert c2[0] >= c1[0] - 1e-12
    if dur > 0 and any(ws <= mid + n * period - dur / 2 and mid + n * period + dur / 2 <= ws + length
                       for n in range(-3, 4)):
        assert c1[0] == pytest.approx(1.0)


def test_predicted_depth_close_to_reference_blackbody_case():
    # REFERENCE.md sec. 11 (computed from the Cowan & Agol 2011 day-side form, f = 2/3, A = 0):
    # Teff 5800 K, a/R* = 5, k = 0.1, 4.5 micron: 2525 ppm monochromatic. Our band is 20 % wide,
    # so allow 3 %.
    d = ot.predicted_depth_ppm(0.1, 5.0, 0.0, 0.0, 5800.0, 4.5, bond_albedo=0.0,
                               redistribution=0.0, geometric_albedo=0.0)
    assert d == pytest.approx(2525.0, rel=0.03)
    # an eccentric orbit with omega = 270 deg has the occultation at periastron: hotter, deeper
    # (r_occ = a (1 - e^2)/(1 - e sin w), Winn 2010 eq. 1 at conjunction, memory)
    d2 = ot.predicted_depth_ppm(0.1, 5.0, 0.4, np.radians(270.0), 5800.0, 4.5)
    assert d2 > ot.predicted_depth_ppm(0.1, 5.0, 0.0, 0.0, 5800.0, 4.5)
    with pytest.raises(ValueError, match="band"):
        ot.predicted_depth_ppm(0.1, 5.0, 0.0, 0.0, 5800.0, 0.2)


def test_timing_constrains_e_cos_omega():
    # A measured occultation time pins e cos(omega) (Winn 2010 eq. 33, memory): samples spread
    # in (e, omega) keep weight only near the true e cos(omega). Seeded.
    rng = np.random.default_rng(7)
    n = 20000
    e = rng.uniform(0, 0.8, n)
    om = rng.uniform(0, 2 * np.pi, n)
    per = np.full(n, 6.0)
    true_dt = ot.occultation_offset(0.4, np.radians(30.0), 6.0)
    ll = ot.timing_log_like(np.full(n, T0), per, e, om, T0 + 60.0 + true_dt, 3.0 / 1440)
    w = np.exp(ll - ll.max())
    ecosw = e * np.cos(om)
    mean = np.sum(w * ecosw) / w.sum()
    sd = np.sqrt(np.sum(w * (ecosw - mean) ** 2) / w.sum())
    # first order only: the exact offset also depends weakly on e sin(omega), hence 0.03
    assert mean == pytest.approx(0.4 * np.cos(np.radians(30.0)), abs=0.03)
    assert sd < 0.05 and sd < 0.2 * np.std(ecosw)
    # exactly: every sample that keeps weight predicts the measured offset
    keep = w > 1e-3
    dts = ot.occultation_offset(e[keep], om[keep], 6.0)
    assert np.all(np.abs(dts - true_dt) < 4 * 3.0 / 1440)
