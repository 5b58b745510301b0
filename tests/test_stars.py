"""Independent stellar density routes (physics/stars.py)."""
import numpy as np
import pytest

from rhofollow.physics.stars import (mass_from_logg_radius, rho_from_logg_radius, rho_from_mass_radius,
                                     torres_mass_radius, TORRES_SIGMA_LOGM, TORRES_SIGMA_LOGR)


def test_torres_solar_test_case():
    # Torres, Andersen & Gimenez 2010 (A&ARv 18, 67): the Sun (5777 K, log g 4.4374, [Fe/H] 0) gives
    # M = 1.051, R = 1.018 (their published check)
    m, r = torres_mass_radius(5777.0, 4.4374, 0.0)
    assert m == pytest.approx(1.051, abs=1e-3)
    assert r == pytest.approx(1.018, abs=1e-3)


@pytest.mark.parametrize("teff,logg,feh,m,r", [(6200, 4.2, 0.1, 1.2793, 1.4741), (5000, 4.5, -0.2, 0.7929, 0.8210)])
def test_torres_other_stars(teff, logg, feh, m, r):
    # computed from the Torres et al. 2010 calibration (coefficients value from memory, corroborated;
    # REFERENCE section 9)
    mm, rr = torres_mass_radius(teff, logg, feh)
    assert mm == pytest.approx(m, rel=2e-4)
    assert rr == pytest.approx(r, rel=2e-4)


def test_torres_scatter_is_added():
    # the calibration's intrinsic scatter (0.027 dex in M, 0.014 dex in R; Torres et al. 2010)
    rng = np.random.default_rng(3)
    m, r = torres_mass_radius(np.full(40000, 5777.0), 4.4374, 0.0, rng=rng)
    assert np.std(np.log10(m)) == pytest.approx(TORRES_SIGMA_LOGM, rel=0.03)
    assert np.std(np.log10(r)) == pytest.approx(TORRES_SIGMA_LOGR, rel=0.03)


def test_density_from_logg_and_radius():
    # rho = 3 g / (4 pi G R): log g = 4.438, R = 1 Rsun -> 1.40956 g/cm^3 (computed, REFERENCE section 9)
    assert rho_from_logg_radius(4.438, 1.0) == pytest.approx(1.40956, rel=2e-5)


def test_mass_from_logg_radius_nominal_sun():
    # nominal solar log g = 4.438068 (IAU 2015 GM_sun / R_sun^2 in cgs) gives 1 Msun
    assert mass_from_logg_radius(4.438068, 1.0) == pytest.approx(1.0, rel=2e-5)


def test_mass_radius_route_gives_solar_density():
    # IAU 2015 nominal Sun: 1 Msun, 1 Rsun -> 1.40978 g/cm^3
    assert rho_from_mass_radius(1.0, 1.0) == pytest.approx(1.40978, rel=2e-5)
    assert rho_from_mass_radius(1.0, 2.0) == pytest.approx(1.40978 / 8, rel=2e-5)
