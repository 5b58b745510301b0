"""Planet mass draws from radius: published relations first, then draws, then bad input."""
import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from rhofollow.physics.massradius import (GIANT_MASS_RANGE_MEARTH, bashi17_radius, draw_planet_mass,
                                          otegi20_rocky_mean, otegi20_volatile_mean, relation_for_radius,
                                          wrf16_mean)


# Reference points computed from the published relations (REFERENCE.md §8, COMPUTED table):
# Wolfgang, Rogers & Ford 2016 M = 2.7 R^1.3; Otegi, Bouchy & Helled 2020 rocky M = 0.9 R^3.45 and
# volatile-rich M = 1.74 R^1.58.
@pytest.mark.parametrize("r, m", [(1.0, 2.700), (2.0, 6.648), (3.0, 11.262)])
def test_wrf16_points(r, m):
    assert wrf16_mean(r) == pytest.approx(m, abs=1e-3)


@pytest.mark.parametrize("r, m", [(1.0, 0.900), (1.5, 3.646), (2.0, 9.835)])
def test_otegi_rocky_points(r, m):
    assert otegi20_rocky_mean(r) == pytest.approx(m, abs=1e-3)


@pytest.mark.parametrize("r, m", [(2.0, 5.202), (3.0, 9.872), (4.0, 15.553)])
def test_otegi_volatile_points(r, m):
    assert otegi20_volatile_mean(r) == pytest.approx(m, abs=1e-3)


def test_bashi_break_and_slopes():
    # Bashi et al. 2017, A&A 604, A83: break at 124 M_earth / 12.1 R_earth, R ∝ M^0.55 below and
    # M^0.01 above.
    assert bashi17_radius(124.0) == pytest.approx(12.1)
    assert bashi17_radius(62.0) == pytest.approx(12.1 * 0.5**0.55)
    assert bashi17_radius(1240.0) == pytest.approx(12.1 * 10**0.01)


def test_wrf16_scatter():
    # Wolfgang, Rogers & Ford 2016: Gaussian intrinsic mass scatter 1.9 M_earth about the mean
    # (truncation negligible at R = 2.5, where the mean is 8.8 M_earth).
    rng = np.random.default_rng(1)
    m, used = draw_planet_mass(np.full(20000, 2.5), rng, "wrf16")
    assert np.all(used == "wrf16")
    assert np.mean(m) == pytest.approx(wrf16_mean(2.5), abs=0.06)
    assert np.std(m) == pytest.approx(1.9, rel=0.04)
    assert np.all(m > 0)


def test_wrf16_truncated_positive_at_small_radius():
    # WRF16 truncate to physical masses: at R = 0.8 (mean 1.9, scatter 1.9) no mass <= 0, and none
    # above our upper bound max(2 x Otegi rocky, mean + 1 sigma) (module docstring construction).
    m, _ = draw_planet_mass(np.full(5000, 0.8), np.random.default_rng(2), "wrf16")
    upper = max(2 * otegi20_rocky_mean(0.8), wrf16_mean(0.8) + 1.9)
    assert m.min() > 0 and m.max() <= upper + 1e-9


def test_otegi_draw_median():
    # The coefficient draws scatter around the published relation (Otegi et al. 2020).
    m, _ = draw_planet_mass(np.full(20000, 3.0), np.random.default_rng(3), "otegi20-volatile")
    assert np.median(m) == pytest.approx(otegi20_volatile_mean(3.0), rel=0.04)


def test_giant_prior_range():
    # Broad log-uniform prior over 0.1-13 M_J above 10 R_earth (degenerate region of Bashi et al. 2017).
    m, used = draw_planet_mass(np.full(20000, 12.0), np.random.default_rng(4))
    lo, hi = GIANT_MASS_RANGE_MEARTH
    assert np.all(used == "giant") and m.min() >= lo and m.max() <= hi
    assert np.median(np.log(m)) == pytest.approx(0.5 * (np.log(lo) + np.log(hi)), abs=0.05)


def test_auto_ladder():
    assert list(relation_for_radius([1.0, 2.0, 6.0, 15.0])) == ["otegi20-rocky", "wrf16", "otegi20-volatile",
                                                                 "giant"]


def test_known_mass_respected():
    m, used = draw_planet_mass(np.full(1000, 2.0), np.random.default_rng(5), known_mp_mearth=7.5)
    assert np.all(m == 7.5) and np.all(used == "known")
    m, _ = draw_planet_mass(np.full(20000, 2.0), np.random.default_rng(5), known_mp_mearth=7.5, known_err=0.5)
    assert np.mean(m) == pytest.approx(7.5, abs=0.02) and np.std(m) == pytest.approx(0.5, rel=0.05)


def test_seeded():
    r = np.linspace(0.7, 20, 500)
    a, _ = draw_planet_mass(r, np.random.default_rng(9))
    b, _ = draw_planet_mass(r, np.random.default_rng(9))
    np.testing.assert_array_equal(a, b)


@settings(max_examples=30, deadline=None)
@given(r=st.floats(0.3, 30.0), seed=st.integers(0, 2**31))
def test_draws_positive_finite(r, seed):
    m, _ = draw_planet_mass(np.full(50, r), np.random.default_rng(seed))
    assert np.all(np.isfinite(m)) and np.all(m > 0)


def test_bad_input():
    rng = np.random.default_rng(0)
    with pytest.raises(ValueError, match="unknown mass-radius relation"):
        draw_planet_mass([2.0], rng, "chen")
    with pytest.raises(ValueError, match="positive and finite"):
        draw_planet_mass([2.0, -1.0], rng)
    with pytest.raises(ValueError, match="must be positive"):
        draw_planet_mass([2.0], rng, known_mp_mearth=-3.0)
