"""Tests of the Kepler solver, anomaly conversions and transit-to-occultation timing."""
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rhofollow.physics.kepler import (E_MAX, RESIDUAL_TOL, eccentric_to_mean, eccentric_to_true,
                                      mean_anomaly_at_transit, occultation_offset_first_order,
                                      solve_kepler, time_of_periastron, time_of_true_anomaly,
                                      transit_to_occultation_time, true_anomaly, true_to_eccentric,
                                      true_to_mean)

# --- published check values -------------------------------------------------------------------

# Meeus, Astronomical Algorithms (2nd ed.), Example 30.a: e = 0.1, M = 5 deg -> E = 5.554589 deg.
# Extended table (Meeus / Colwell 1993 values, REFERENCE.md sec. 5, CORROBORATED); the true
# anomalies are "computed from tan(f/2) = sqrt((1+e)/(1-e)) tan(E/2), REFERENCE.md sec. 5".
MEEUS = [
    (0.100, 5, 5.554589, 6.139762),
    (0.200, 5, 6.246908, 7.647084),
    (0.500, 5, 9.950063, 17.148292),
    (0.900, 5, 33.344447, 105.093495),
    (0.990, 5, 45.361023, 160.745616),
    (0.990, 1, 24.725822, 144.155952),
    (0.990, 2, 32.361007, 152.542134),
    (0.990, 33, 89.722155, 171.851096),
    (0.750, 70, 110.302228, 150.511502),
]


@pytest.mark.parametrize("e, m_deg, e_deg, f_deg", MEEUS)
def test_meeus_table(e, m_deg, e_deg, f_deg):
    E = solve_kepler(np.radians(m_deg), e)
    assert np.degrees(E) == pytest.approx(e_deg, abs=5e-7)
    assert np.degrees(true_anomaly(np.radians(m_deg), e)) == pytest.approx(f_deg, abs=5e-7)


def test_meeus_radian_example():
    # Meeus-based test value (REFERENCE.md sec. 5, CORROBORATED): e = 0.99, M = 0.2 rad.
    assert solve_kepler(0.2, 0.99) == pytest.approx(1.066997365282, abs=1e-11)


def test_vectorised_table_matches_scalar():
    e = np.array([r[0] for r in MEEUS])
    m = np.radians([r[1] for r in MEEUS])
    np.testing.assert_allclose(np.degrees(solve_kepler(m, e)), [r[2] for r in MEEUS], atol=5e-7)


# --- residual everywhere ------------------------------------------------------------------------

def test_residual_dense_grid():
    # Requirement of the issue: |E - e sin E - M| <= 1e-12 on a dense grid (common practice).
    m = np.linspace(-2 * np.pi, 4 * np.pi, 1201)
    e = np.concatenate([np.linspace(0.0, E_MAX, 400), 1.0 - np.logspace(-3, -1, 40)])
    mm, ee = np.meshgrid(m, e)
    E = solve_kepler(mm, ee)
    assert E.shape == mm.shape
    assert np.max(np.abs(E - ee * np.sin(E) - mm)) <= RESIDUAL_TOL


def test_residual_near_parabolic_and_tiny_m():
    # e -> 1 and M -> 0: the hardest corner of Kepler's equation (common practice, no source).
    m = np.concatenate([[0.0], np.logspace(-300, -1, 300), -np.logspace(-12, -1, 50)])
    e = np.full_like(m, E_MAX)
    E = solve_kepler(m, e)
    assert np.all(np.isfinite(E))
    assert np.max(np.abs(E - e * np.sin(E) - m)) <= RESIDUAL_TOL
    # Series solution for e = 1, small M: E ~ (6M)^(1/3) (common practice, no source).
    E1 = solve_kepler(1e-9, 0.999)
    assert 0 < E1 < (6e-9) ** (1 / 3) * 1.01


def test_circular_orbit_is_identity():
    m = np.linspace(-7, 7, 101)
    np.testing.assert_allclose(solve_kepler(m, 0.0), m, atol=1e-14)
    np.testing.assert_allclose(true_anomaly(m, 0.0), m, atol=1e-12)


def test_scalar_in_scalar_out():
    assert isinstance(solve_kepler(1.0, 0.3), float)


# --- property tests -----------------------------------------------------------------------------

@settings(max_examples=200, deadline=None)
@given(st.floats(-50, 50), st.floats(0.0, E_MAX))
def test_round_trip_mean_eccentric(m, e):
    E = solve_kepler(m, e)
    assert abs(eccentric_to_mean(E, e) - m) <= 1e-11


@settings(max_examples=200, deadline=None)
@given(st.floats(-np.pi + 1e-6, np.pi - 1e-6), st.floats(0.0, 0.99))
def test_round_trip_true_eccentric(f, e):
    assert true_anomaly(true_to_mean(f, e), e) == pytest.approx(f, abs=1e-9)
    assert eccentric_to_true(true_to_eccentric(f, e), e) == pytest.approx(f, abs=1e-12)


@settings(max_examples=100, deadline=None)
@given(st.floats(0.0, E_MAX), st.floats(0.0, 2 * np.pi - 1e-3))
def test_solution_monotonic_in_m(e, m):
    # E(M) increases with M (dE/dM = 1/(1 - e cos E) > 0): common practice, no source.
    assert solve_kepler(m + 1e-3, e) > solve_kepler(m, e)


@settings(max_examples=100, deadline=None)
@given(st.floats(0.0, 0.95), st.floats(0.0, 2 * np.pi), st.floats(0.5, 500.0))
def test_offset_in_period_range_and_symmetry(e, w, p):
    dt = transit_to_occultation_time(p, e, w)
    assert 0.0 <= dt < p
    # omega -> pi - omega mirrors the orbit about the line of sight: the occultation offset
    # becomes P - dt (e cos omega changes sign; derived from f_tra/f_occ, REFERENCE.md sec. 2.1).
    dt2 = transit_to_occultation_time(p, e, np.pi - w)
    assert min(abs(dt + dt2 - p), abs(dt + dt2), abs(dt + dt2 - 2 * p)) < 1e-8 * p


# --- timing -------------------------------------------------------------------------------------

def test_circular_offset_is_half_period_exactly():
    # e = 0: occultation exactly half a period after transit (Winn 2010, sec. 2; common practice).
    w = np.linspace(0, 2 * np.pi, 37)
    np.testing.assert_allclose(transit_to_occultation_time(3.7, 0.0, w), 1.85, atol=1e-14)


@pytest.mark.parametrize("e, w_deg, dt_exact, dt_first", [
    # REFERENCE.md sec. 2.5 table, P = 10 d: "computed from the exact Kepler algebra of Winn 2010".
    (0.3, 60, 5.984896, 5.954930),
    (0.5, 90, 5.000000, 5.000000),
    (0.5, 270, 5.000000, 5.000000),
    (0.3, 0, 6.880812, 6.909859),
    (0.6, 200, 1.546968, 1.410639),
    (0.1, 45, 5.450910, 5.450158),
])
def test_offset_reference_table(e, w_deg, dt_exact, dt_first):
    w = np.radians(w_deg)
    assert transit_to_occultation_time(10.0, e, w) == pytest.approx(dt_exact, abs=2e-6)
    assert occultation_offset_first_order(10.0, e, w) == pytest.approx(dt_first, abs=2e-6)


def test_first_order_agrees_to_second_order():
    # Winn (2010, eq. 33; value from memory): the first-order offset agrees with the exact one
    # through second order. Delta t - P/2 is odd in e (omega -> omega + pi swaps transit and
    # occultation), so there is no e^2 term and the residual is O(e^3): it shrinks ~8x when e
    # halves (derived; common practice, no source for the check itself).
    w = np.radians(np.arange(0, 360, 15))
    errs = []
    for e in (0.04, 0.02, 0.01):
        d = transit_to_occultation_time(1.0, e, w) - occultation_offset_first_order(1.0, e, w)
        errs.append(np.max(np.abs(d)))
    assert errs[0] / errs[1] == pytest.approx(8.0, rel=0.1)
    assert errs[1] / errs[2] == pytest.approx(8.0, rel=0.1)
    assert errs[2] < 1e-5  # fraction of P at e = 0.01


def test_omega_90_puts_transit_at_periastron():
    # DESIGN.md / REFERENCE.md sec. 2.6(a): omega = 90 deg -> transit at periastron (M_tra = 0).
    assert mean_anomaly_at_transit(0.5, np.pi / 2) == pytest.approx(0.0, abs=1e-14)
    assert time_of_periastron(100.0, 10.0, 0.5, np.pi / 2) == pytest.approx(100.0, abs=1e-12)
    # Apastron (f = pi) comes half a period later.
    assert time_of_true_anomaly(np.pi, 100.0, 10.0, 0.5, np.pi / 2) == pytest.approx(105.0)


# Published eccentric planets: RV orbit -> predicted occultation, compared with the measured one.

def test_gj436b_occultation_phase():
    # Measured phase 0.587 +- 0.005: Deming et al. 2007, ApJ 667, L199 (verified, abstract).
    # RV orbit e = 0.16 +- 0.02, omega = 339 +- 10 deg: Maness et al. 2007, PASP 119, 90
    # (value from memory). Uncertainty of the prediction propagated by Monte Carlo.
    rng = np.random.default_rng(436)
    e = rng.normal(0.16, 0.02, 4000)
    w = np.radians(rng.normal(339.0, 10.0, 4000))
    phase = transit_to_occultation_time(1.0, e, w)
    sigma = np.hypot(np.std(phase), 0.005)
    assert abs(np.median(phase) - 0.587) < 2 * sigma
    point = transit_to_occultation_time(1.0, 0.16, np.radians(339))
    assert point == pytest.approx(0.5949, abs=1e-4)


def test_hd80606b_occultation_time_high_e():
    # e > 0.5 case. Occultation centre HJD 2454424.736 +- 0.003: Laughlin et al. 2009, Nature
    # 457, 562 (value from memory). Transit centre HJD 2455210.6502 +- 0.0064: Shporer et al.
    # 2010, ApJ 722, 880 (verified, abstract). P = 111.4367 +- 0.0004 d, e = 0.9330 +- 0.0005,
    # omega = 300.83 +- 0.15 deg: Moutou et al. 2009, A&A 498, L5 / Hebrard et al. 2010 (value
    # from memory).
    p, sp = 111.4367, 0.0004
    t_occ, t_tra = 2454424.736, 2455210.6502
    n = int((t_tra - t_occ) // p)
    measured_gap = (t_tra - t_occ) - n * p  # occultation -> following transit, days
    rng = np.random.default_rng(80606)
    e = rng.normal(0.9330, 0.0005, 4000)
    w = np.radians(rng.normal(300.83, 0.15, 4000))
    predicted_gap = p - transit_to_occultation_time(p, e, w)
    sigma = np.sqrt(np.var(predicted_gap) + 0.003**2 + 0.0064**2 + (n * sp) ** 2)
    assert abs(np.median(predicted_gap) - measured_gap) < 2 * sigma
    # The first-order formula is useless here (off by days): the exact route matters.
    first = p - occultation_offset_first_order(p, 0.933, np.radians(300.83))
    assert abs(first - measured_gap) > 1.0


# --- bad input ----------------------------------------------------------------------------------

@pytest.mark.parametrize("e", [-0.1, 0.9995, 1.0, 1.5])
def test_eccentricity_out_of_range_raises(e):
    with pytest.raises(ValueError, match="eccentricity"):
        solve_kepler(1.0, e)


def test_non_finite_raises_not_nan():
    with pytest.raises(ValueError, match="finite"):
        solve_kepler(np.array([0.1, np.nan]), 0.2)
