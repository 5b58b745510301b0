"""Tests of occultation geometry: impact parameters, exact durations, occurrence, light time."""
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rhofollow.physics.constants import AU_M, C_SI, DAY_S, R_SUN_M
from rhofollow.physics.occultation import (duration_kipping, duration_winn, eclipse_durations,
                                           light_travel_delay, occultation_impact_parameter,
                                           occultation_occurs, occultation_probability,
                                           separation_at_occultation, transit_impact_parameter)

P, AR, K, BT = 10.0, 20.0, 0.1, 0.3


def _inc(e, w):
    """Inclination giving transit impact parameter BT (REFERENCE.md sec. 2.5 set-up)."""
    return np.arccos(BT * (1 + e * np.sin(w)) / (AR * (1 - e * e)))


# REFERENCE.md sec. 2.5: "computed from the exact numerical solution (Kepler orbit, sky separation
# root-found at 1 +- k)", COMPUTED; Winn and Kipping columns from their formulas (value from
# memory).
TABLE = [
    # e, omega, T14 exact, Winn, Kipping, T23 exact, T14 occ exact (hours)
    (0.0, 90, 4.04475, 4.04475, 4.04475, 3.24248, 4.04475),
    (0.3, 60, 3.06365, 3.06305, 3.06436, 2.45576, 4.79937),
    (0.5, 90, 2.33750, 2.33603, 2.33932, 1.87333, 4.18869),
    (0.5, 270, 7.00527, 7.00528, 7.00346, 5.61588, 2.41911),
    (0.3, 0, 3.85887, 3.85854, 3.85891, 3.09336, 3.85887),
    (0.6, 200, 4.07320, 4.07153, 4.07256, 3.26477, 2.74780),
    (0.1, 45, 3.75890, 3.75877, 3.75907, 3.01327, 4.27331),
]


@pytest.mark.parametrize("e, wd, t14, winn, kip, t23, o14", TABLE)
def test_durations_reference_table(e, wd, t14, winn, kip, t23, o14):
    w = np.radians(wd)
    inc = _inc(e, w)
    tt14, tt23 = eclipse_durations(P, AR, inc, e, w, K, "transit")
    oo14, _ = eclipse_durations(P, AR, inc, e, w, K, "occultation")
    assert tt14 * 24 == pytest.approx(t14, abs=1e-5)
    assert tt23 * 24 == pytest.approx(t23, abs=1e-5)
    assert oo14 * 24 == pytest.approx(o14, abs=1e-5)
    # Closed forms as cross-checks: within 0.1 % of exact for e <= 0.6 (REFERENCE.md sec. 2.5).
    assert duration_winn(P, AR, inc, e, w, K, "transit") * 24 == pytest.approx(winn, abs=1e-5)
    assert duration_kipping(P, AR, inc, e, w, K, "transit") * 24 == pytest.approx(kip, abs=1e-5)
    assert duration_winn(P, AR, inc, e, w, K, "transit") == pytest.approx(tt14, rel=1e-3)


def test_circular_equal_durations_and_smo_value():
    # e = 0: transit and occultation durations are equal; Seager & Mallen-Ornelas 2003 (exact
    # circular relation, value from memory) check value P = 3 d, aR = 10, b = 0.3, k = 0.1:
    # T14 = 2.431095 h, T23 = 1.947903 h (REFERENCE.md sec. 1, COMPUTED).
    inc = np.arccos(0.3 / 10.0)
    t14, t23 = eclipse_durations(3.0, 10.0, inc, 0.0, 1.0, 0.1, "transit")
    o14, o23 = eclipse_durations(3.0, 10.0, inc, 0.0, 1.0, 0.1, "occultation")
    assert t14 * 24 == pytest.approx(2.431095, abs=1e-6)
    assert t23 * 24 == pytest.approx(1.947903, abs=1e-6)
    assert o14 == pytest.approx(t14, rel=1e-12)
    assert o23 == pytest.approx(t23, rel=1e-12)


def test_impact_parameters_winn():
    # Winn 2010 eqs. 7-8 (value from memory): b_occ/b_tra = (1 + e sin w)/(1 - e sin w).
    e, w, inc = 0.5, np.radians(90), np.radians(89.0)
    r = occultation_impact_parameter(AR, inc, e, w) / transit_impact_parameter(AR, inc, e, w)
    assert r == pytest.approx(3.0, rel=1e-12)
    assert separation_at_occultation(AR, e, w) == pytest.approx(AR * 1.5, rel=1e-12)


def test_occurrence_and_probability():
    # An orbit with b_tra = 0.3 and e = 0.6, omega = 90 deg has b_occ = 0.3 * 1.6/0.4 = 1.2:
    # no occultation for k = 0.1 (Winn 2010 eq. 8, value from memory).
    e, w = 0.6, np.radians(90.0)
    inc = _inc(e, w)
    assert occultation_impact_parameter(AR, inc, e, w) == pytest.approx(1.2, rel=1e-12)
    assert not occultation_occurs(AR, inc, e, w, 0.1)
    t14, t23 = eclipse_durations(P, AR, inc, e, w, 0.1)
    assert np.isnan(t14) and np.isnan(t23)
    # Grazing: 1 - k < b_occ < 1 + k -> T14 defined, T23 not.
    inc2 = _inc(0.55, w)
    b2 = occultation_impact_parameter(AR, inc2, 0.55, w)
    assert 0.9 < b2 < 1.1
    g14, g23 = eclipse_durations(P, AR, inc2, 0.55, w, 0.1)
    assert g14 > 0 and np.isnan(g23)
    # Posterior probability is the weighted fraction.
    e_s = np.array([0.0, 0.6])
    w_s = np.full(2, w)
    inc_s = np.array([_inc(0.0, w), inc])
    assert occultation_probability(AR, inc_s, e_s, w_s, 0.1) == 0.5
    assert occultation_probability(AR, inc_s, e_s, w_s, 0.1, weights=[3, 1]) == 0.75


def test_light_travel_circular_hd189733b():
    # Circular orbit: 2 a sin i / c. HD 189733b, a = 0.0313 au: 31.24 s (REFERENCE.md sec. 2.4,
    # COMPUTED), measured "31 s light-travel time delay" (Agol et al. 2010, verified abstract).
    a_rs = 0.0313 * AU_M / R_SUN_M  # with R* = 1 Rsun, a_rs * rstar = a
    dt = light_travel_delay(a_rs, 1.0, np.pi / 2, 0.0, 0.0) * DAY_S
    assert dt == pytest.approx(2 * 0.0313 * AU_M / C_SI, rel=1e-12)
    assert dt == pytest.approx(31.24, abs=0.01)


@settings(max_examples=60, deadline=None)
@given(st.floats(0.0, 0.7), st.floats(0.0, 2 * np.pi), st.floats(0.0, 0.6), st.floats(0.01, 0.2))
def test_duration_properties(e, w, b, k):
    # Invariants (common practice, no source): T23 < T14; both shorter than a quarter period;
    # the exact T14 of the occultation is within 1 % of Winn's closed form for aR = 20 up to e = 0.6,
    # 2 % above (the closed form takes the planet's speed as constant across the event, so its error
    # grows with e: a scan of 20,000 random geometries gives at most 0.5 % for e <= 0.6 and 1.5 % at
    # e = 0.7; computed, no source).
    a_rs = 20.0
    inc = np.arccos(b * (1 + e * np.sin(w)) / (a_rs * (1 - e * e)))
    if occultation_impact_parameter(a_rs, inc, e, w) >= 1 - k:
        return
    t14, t23 = eclipse_durations(P, a_rs, inc, e, w, k)
    assert 0 < t23 < t14 < P / 4
    assert t14 == pytest.approx(duration_winn(P, a_rs, inc, e, w, k), rel=0.01 if e <= 0.6 else 0.02)


def test_vectorised_matches_elementwise():
    rng = np.random.default_rng(5)
    e = rng.uniform(0, 0.6, 50)
    w = rng.uniform(0, 2 * np.pi, 50)
    inc = _inc(e, w)
    t14, _ = eclipse_durations(P, AR, inc, e, w, K)
    one = [eclipse_durations(P, AR, inc[i], e[i], w[i], K)[0] for i in range(0, 50, 7)]
    np.testing.assert_allclose(t14[::7], one, rtol=1e-12)


def test_bad_which():
    with pytest.raises(ValueError, match="which"):
        eclipse_durations(P, AR, 1.5, 0.1, 0.0, K, "eclipse")
