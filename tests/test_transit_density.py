"""Circular-orbit density routes and the photo-eccentric relations (physics/transit.py)."""
import math

import numpy as np
import pytest
from hypothesis import assume, given, settings, strategies as st

from rhofollow.physics import constants as c
from rhofollow.physics.transit import (ars_from_rho, ars_from_t14_b, circular_durations, density_ratio_from_orbit,
                                       eccentric_durations, ecc_min_from_ratio, g_factor, rho_from_ars,
                                       smo_invert, inclination_from_b, transit_impact_parameter)

H = 1 / 24


def test_mean_solar_density_from_iau_nominal_values():
    # IAU 2015 Resolution B3 nominal GM_sun and R_sun with CODATA 2018 G: rho_sun = 1.40978 g/cm^3
    # (computed from 3 M / (4 pi R^3), REFERENCE sheet section 10)
    assert c.RHO_SUN_CGS == pytest.approx(1.40978, rel=2e-5)


def test_earth_sun_geometry_gives_solar_density():
    # a/R* = au / R_sun and P = 1 Julian year give the Sun's density (Kepler III with the
    # Seager & Mallen-Ornelas 2003 form rho = 3 pi (a/R*)^3 / (G P^2)); computed 1.40983, ratio 1.00004
    a_rs = c.AU_M / c.R_SUN_M
    assert a_rs == pytest.approx(215.0322, rel=1e-6)
    rho = rho_from_ars(a_rs, 365.25)
    assert rho == pytest.approx(1.40983, rel=2e-5)
    # the small excess over rho_sun is the Earth's mass in Kepler's third law (M_earth/M_sun = 3e-6
    # would give 3e-6; 1 Julian year vs the sidereal year adds the rest): within 1e-4
    assert rho / c.RHO_SUN_CGS == pytest.approx(1.0, abs=1e-4)


def test_density_from_ars_reference_value():
    # computed from rho = 3 pi aR^3/(G P^2), Seager & Mallen-Ornelas 2003: aR = 10, P = 3 d -> 2.10182
    assert rho_from_ars(10.0, 3.0) == pytest.approx(2.10182, rel=1e-5)
    assert ars_from_rho(2.10182, 3.0) == pytest.approx(10.0, rel=1e-5)


def test_smo_forward_durations_reference():
    # computed from the exact circular SMO 2003 relations (REFERENCE section 1 check table)
    t14, t23 = circular_durations(10.0, 0.3, 0.1, 3.0)
    assert t14 / H == pytest.approx(2.431095, abs=2e-6)
    assert t23 / H == pytest.approx(1.947903, abs=2e-6)


def test_smo_exact_inversion_round_trip():
    # exact SMO 2003 inversion returns b = 0.3, aR = 10, rho = 2.101819 (REFERENCE section 1)
    b, a = smo_invert(2.431095 * H, 1.947903 * H, 0.1, 3.0)
    assert b == pytest.approx(0.3, abs=2e-5)
    assert a == pytest.approx(10.0, rel=1e-5)
    assert rho_from_ars(a, 3.0) == pytest.approx(2.101819, rel=2e-5)


def test_small_planet_inversion_is_only_approximate():
    # the small-planet SMO approximation gives aR = 9.9647 (1 % low) for the same durations
    # (REFERENCE section 1); the exact route must not agree with it to better than 0.2 %
    t14, t23 = 2.431095 * H, 1.947903 * H
    k = 0.1
    a_small = (2 * 3.0 / math.pi) * k**0.5 / math.sqrt(t14**2 - t23**2)
    assert a_small == pytest.approx(9.9647, rel=2e-4)
    _, a_exact = smo_invert(t14, t23, k, 3.0)
    assert abs(a_exact / a_small - 1) > 2e-3


def test_earth_transit_durations():
    # Earth transiting the Sun edge-on: T14 = 13.0952 h, T23 = 12.8573 h (computed, REFERENCE section 1)
    k = c.R_EARTH_M / c.R_SUN_M
    t14, t23 = circular_durations(c.AU_M / c.R_SUN_M, 0.0, k, 365.25)
    assert t14 / H == pytest.approx(13.0952, abs=2e-4)
    assert t23 / H == pytest.approx(12.8573, abs=2e-4)


def test_ars_from_t14_and_b():
    t14, _ = circular_durations(12.0, 0.5, 0.08, 5.0)
    assert ars_from_t14_b(t14, 0.5, 0.08, 5.0) == pytest.approx(12.0, rel=1e-10)


@pytest.mark.parametrize("e,w_deg,g3", [
    (0.0, 90, 1.0), (0.3, 60, 2.30330), (0.5, 90, 5.19615), (0.5, 270, 0.19245),
    (0.3, 0, 1.15196), (0.6, 200, 0.98058), (0.1, 45, 1.24613)])
def test_density_ratio_g_cubed(e, w_deg, g3):
    # rho_circ/rho_true = g^3, g = (1 + e sin w)/sqrt(1 - e^2) (Dawson & Johnson 2012; Kipping 2010);
    # values computed in REFERENCE section 2.5 table, last column
    assert density_ratio_from_orbit(e, math.radians(w_deg)) == pytest.approx(g3, rel=2e-5)


@pytest.mark.parametrize("e,w_deg,winn_h", [
    (0.0, 90, 4.04475), (0.3, 60, 3.06305), (0.5, 90, 2.33603), (0.5, 270, 7.00528), (0.3, 0, 3.85854),
    (0.6, 200, 4.07153), (0.1, 45, 3.75877)])
def test_eccentric_durations_winn_form(e, w_deg, winn_h):
    # Winn 2010 eqs. 14-16 (value from memory for the equation numbers); P = 10 d, aR = 20, k = 0.1,
    # b = 0.3: values computed in REFERENCE section 2.5, "Winn" column
    t14, _ = eccentric_durations(20.0, 0.3, 0.1, 10.0, e, math.radians(w_deg))
    assert t14 / H == pytest.approx(winn_h, abs=2e-5)


@pytest.mark.parametrize("e,w_deg,exact_h", [(0.3, 60, 3.06365), (0.5, 90, 2.33750), (0.6, 200, 4.07320)])
def test_eccentric_durations_close_to_exact(e, w_deg, exact_h):
    # exact numerical durations (REFERENCE section 2.5 "T14 exact"): the Winn form is within 0.1 %
    t14, _ = eccentric_durations(20.0, 0.3, 0.1, 10.0, e, math.radians(w_deg))
    assert t14 / H == pytest.approx(exact_h, rel=1e-3)


def test_omega_convention_transit_at_periastron():
    # DESIGN.md convention (REFERENCE section 2.6a): omega = 90 deg puts the transit at periastron:
    # the shortest transit, T14 ratio to circular ~ sqrt(1-e^2)/(1+e) (0.5774 at e = 0.5), rho_circ > rho_true
    e = 0.5
    t_peri, _ = eccentric_durations(20.0, 0.0, 0.01, 10.0, e, math.radians(90))
    t_circ, _ = eccentric_durations(20.0, 0.0, 0.01, 10.0, 0.0, 0.0)
    others = [eccentric_durations(20.0, 0.0, 0.01, 10.0, e, math.radians(w))[0] for w in range(0, 360, 15)]
    assert t_peri <= min(others) + 1e-12
    assert t_peri / t_circ == pytest.approx(math.sqrt(1 - e * e) / (1 + e), rel=2e-3)
    assert density_ratio_from_orbit(e, math.radians(90)) > 1


@pytest.mark.parametrize("ratio,emin", [(0.2, 0.49032), (0.5, 0.22702), (1.0, 0.0), (2.0, 0.22702),
                                        (5.196152, 0.5), (8.0, 0.6)])
def test_ecc_min_closed_form(ratio, emin):
    # e_min = |q - 1|/(q + 1), q = R^(2/3) (derived from g^2 = (1+e)/(1-e) at sin w = +-1; values computed
    # in REFERENCE section 3.2)
    assert ecc_min_from_ratio(ratio) == pytest.approx(emin, abs=2e-5)


@pytest.mark.parametrize("ratio", [0.05, 0.3, 0.9, 1.3, 3.0, 20.0])
def test_ecc_min_against_brute_force(ratio):
    # brute force over a fine (e, omega) grid: the smallest e whose g^3 can reach the ratio
    e = np.linspace(0, 0.999, 20001)[:, None]
    w = np.linspace(0, 2 * np.pi, 721)[None, :]
    g3 = density_ratio_from_orbit(e, w)
    reach = (g3.min(axis=1) <= ratio) & (g3.max(axis=1) >= ratio)
    e_brute = e[reach.argmax(), 0]
    assert ecc_min_from_ratio(ratio) == pytest.approx(e_brute, abs=1e-4)


@settings(max_examples=200, deadline=None)
@given(st.floats(0.0, 0.95), st.floats(0.0, 2 * math.pi), st.floats(0.0, 0.9), st.floats(3.0, 50.0))
def test_impact_parameter_inclination_round_trip(e, w, b, a_rs):
    inc = inclination_from_b(b, a_rs, e, w)
    if np.isfinite(inc):
        assert transit_impact_parameter(a_rs, inc, e, w) == pytest.approx(b, abs=1e-9)


@settings(max_examples=200, deadline=None)
@given(st.floats(2.5, 80.0), st.floats(0.0, 0.85), st.floats(0.01, 0.2), st.floats(0.5, 100.0))
def test_smo_round_trip_property(a_rs, b, k, period):
    assume(b < 1 - k - 0.02)  # full (non-grazing) transits only: T23 must exist
    t14, t23 = circular_durations(a_rs, b, k, period)
    b2, a2 = smo_invert(t14, t23, k, period)
    assert a2 == pytest.approx(a_rs, rel=1e-6)
    assert b2 == pytest.approx(b, abs=1e-5)


@settings(max_examples=200, deadline=None)
@given(st.floats(0.0, 0.98), st.floats(0.0, 2 * math.pi))
def test_ecc_min_never_exceeds_true_e(e, w):
    assert ecc_min_from_ratio(density_ratio_from_orbit(e, w)) <= e + 1e-9
    assert np.isfinite(g_factor(e, w))
