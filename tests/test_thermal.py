"""Tests of the Planck function, day-side temperature and occultation depths."""
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rhofollow.physics.thermal import (band_flux_ratio, dayside_temperature, occultation_depth,
                                       planck_lambda, reflected_depth, thermal_depth, tophat_band)


@pytest.mark.parametrize("lam_um", [0.5, 2.15, 4.5, 8.0, 24.0])
@pytest.mark.parametrize("temp", [300.0, 1500.0, 5772.0])
def test_planck_against_astropy(lam_um, temp):
    # Reference library: astropy.modeling.physical_models.BlackBody (per wavelength, per sr).
    import astropy.units as u
    from astropy.modeling.physical_models import BlackBody

    bb = BlackBody(temperature=temp * u.K, scale=1.0 * u.W / (u.m**2 * u.m * u.sr))
    ref = bb(lam_um * u.micron).to_value(u.W / (u.m**2 * u.m * u.sr))
    assert planck_lambda(lam_um, temp) == pytest.approx(ref, rel=1e-10)


def test_dayside_limits_cowan_agol():
    # Cowan & Agol 2011 eqs. 4-5 (value from memory): eps = 1 -> T_eq with f = 1/4; eps = 0 ->
    # f = 2/3. REFERENCE.md sec. 11 COMPUTED values for Teff 5050 K, aR 8.84, A_B = 0:
    # T_eq = 1201.0 K, T_day(eps = 0) = 1534.8 K.
    assert dayside_temperature(5050, 8.84, 0.0, 1.0) == pytest.approx(1201.0, abs=0.1)
    assert dayside_temperature(5050, 8.84, 0.0, 0.0) == pytest.approx(1534.8, abs=0.1)
    # Earth: Teff 5772 K at 1 au, A = 0.3 -> 254.59 K (REFERENCE.md sec. 11, COMPUTED).
    a_rs = 149597870700.0 / 6.957e8
    assert dayside_temperature(5772, a_rs, 0.3, 1.0) == pytest.approx(254.59, abs=0.02)


def test_hd189733b_like_depths():
    # REFERENCE.md sec. 11 (COMPUTED, monochromatic 4.5 um): 1593 ppm at 1201 K, 3019 ppm at
    # 1535 K; measured 2140 +- 200 ppm (Charbonneau et al. 2008, verified) lies in between.
    lam = np.array([4.4999, 4.5001])
    resp = np.ones(2)
    lo = thermal_depth(0.155, dayside_temperature(5050, 8.84, 0, 1), 5050, lam, resp) * 1e6
    hi = thermal_depth(0.155, dayside_temperature(5050, 8.84, 0, 0), 5050, lam, resp) * 1e6
    assert lo == pytest.approx(1593, abs=1)
    assert hi == pytest.approx(3019, abs=1)
    assert lo < 2140 < hi
    # Reflected light with A_g = 0.1: 30.7 ppm (same section).
    assert reflected_depth(0.155, 8.84, 0.1) * 1e6 == pytest.approx(30.7, abs=0.1)


def test_generic_case_not_rayleigh_jeans():
    # REFERENCE.md sec. 11 (COMPUTED): Teff 5800, aR 5, k 0.1, f = 2/3, A = 0 -> 2343.8 K,
    # 4.5 um depth 2525 ppm (Rayleigh-Jeans would give 4041 ppm).
    t = dayside_temperature(5800, 5.0, 0.0, 0.0)
    assert t == pytest.approx(2343.8, abs=0.1)
    d = thermal_depth(0.1, t, 5800, np.array([4.4999, 4.5001]), np.ones(2)) * 1e6
    assert d == pytest.approx(2525, abs=1)


def test_band_vs_filter_curve_and_weighting():
    lam, resp = tophat_band(4.5, 1.0)
    r_top = band_flux_ratio(1500.0, 5000.0, lam, resp)
    # A two-column curve sampled more finely gives the same integral (common practice).
    lam2 = np.linspace(4.0, 5.0, 2001)
    assert band_flux_ratio(1500.0, 5000.0, lam2, np.ones_like(lam2)) == pytest.approx(r_top,
                                                                                      rel=1e-4)
    # Energy vs photon weighting differ slightly over a wide band.
    r_e = band_flux_ratio(1500.0, 5000.0, lam, resp, photon_counting=False)
    assert r_e != pytest.approx(r_top, rel=1e-6)
    assert r_e == pytest.approx(r_top, rel=0.05)


@settings(max_examples=50, deadline=None)
@given(st.floats(3000, 9000), st.floats(2.5, 50), st.floats(0.3, 25.0))
def test_depth_properties(teff, a_rs, lam_c):
    # Invariants (common practice, no source): depth grows as the planet moves closer and
    # with k^2; T_day below Teff.
    lam = np.array([lam_c * 0.999, lam_c * 1.001])
    resp = np.ones(2)
    d1 = occultation_depth(0.1, teff, a_rs, lam, resp)
    d2 = occultation_depth(0.1, teff, a_rs * 1.2, lam, resp)
    assert d1 > d2 > 0
    assert occultation_depth(0.2, teff, a_rs, lam, resp) == pytest.approx(4 * d1, rel=1e-10)
    assert dayside_temperature(teff, a_rs) < teff


@pytest.mark.parametrize("c, w", [(0.2, 0.05), (29.9, 1.0), (4.5, -1.0), (0.31, 0.1)])
def test_band_outside_range_refused(c, w):
    with pytest.raises(ValueError, match="micron"):
        tophat_band(c, w)


def test_fast_band_ratio_matches_direct():
    # The grid-interpolated band integral equals the direct one (self-consistency, no source).
    from rhofollow.physics.thermal import band_flux_ratio_fast

    rng = np.random.default_rng(11)
    tp = rng.uniform(300.0, 3000.0, 5000)
    ts = np.full(5000, 5600.0)
    for c, w in [(0.6, 0.2), (2.15, 0.32), (4.5, 1.0), (15.0, 5.0)]:
        lam, resp = tophat_band(c, w)
        np.testing.assert_allclose(band_flux_ratio_fast(tp, ts, lam, resp),
                                   band_flux_ratio(tp, ts, lam, resp), rtol=1e-5)
