"""Occultation depth: Planck functions, day-side temperature, band-integrated thermal and
reflected light. Plain floats / arrays: wavelengths in microns, temperatures in kelvin, depths as
fractions (multiply by 1e6 for ppm).

References
----------
- Planck's law, B_lambda(T) = 2 h c^2 / lambda^5 / (exp(h c / (lambda k T)) - 1) (SI; checked
  against astropy.modeling.physical_models.BlackBody in the tests).
- Cowan & Agol (2011), ApJ 729, 54, arXiv:1001.0012: day-side temperature with Bond albedo A_B and
  redistribution efficiency epsilon, T_day = T0 (1 - A_B)^(1/4) (2/3 - 5 epsilon/12)^(1/4),
  T0 = Teff sqrt(R*/r) (their eqs. 4-5; value from memory).
- Thermal occultation depth k^2 * int B(T_p) S / int B(Teff) S over the band; reflected light
  A_g (k / (r/R*))^2 at full phase (REFERENCE sec. 11).
"""
from __future__ import annotations

import numpy as np

from rhofollow.physics.constants import C_SI, H_SI, KB_SI

__all__ = [
    "BAND_MIN_UM",
    "BAND_MAX_UM",
    "planck_lambda",
    "tophat_band",
    "dayside_temperature",
    "band_flux_ratio",
    "band_flux_ratio_fast",
    "thermal_depth",
    "reflected_depth",
    "occultation_depth",
]

#: Wavelength range (microns) accepted for depth bands: optical to mid-infrared.
BAND_MIN_UM = 0.3
BAND_MAX_UM = 30.0

_HC_K = H_SI * C_SI / KB_SI  # m K


def planck_lambda(wavelength_um, temperature_k):
    """Spectral radiance B_lambda in W m^-2 m^-1 sr^-1 (SI).

    Parameters
    ----------
    wavelength_um : float or ndarray, microns
    temperature_k : float or ndarray, kelvin (broadcast against the wavelength)
    """
    lam = np.asarray(wavelength_um, dtype=float) * 1e-6
    t = np.asarray(temperature_k, dtype=float)
    x = _HC_K / (lam * t)
    return 2.0 * H_SI * C_SI**2 / lam**5 / np.expm1(x)


def tophat_band(center_um: float, width_um: float, n: int = 65):
    """A top-hat filter curve: (wavelength_um, response) sampled on ``n`` points.

    Parameters
    ----------
    center_um : float
        Band centre, microns.
    width_um : float
        Full width, microns.
    n : int
        Number of points.

    Returns
    -------
    (ndarray, ndarray)
        Wavelengths (microns) and response (dimensionless, 1 inside).
    """
    lo, hi = center_um - 0.5 * width_um, center_um + 0.5 * width_um
    if not (width_um > 0 and lo >= BAND_MIN_UM and hi <= BAND_MAX_UM):
        raise ValueError(f"band {center_um}:{width_um} micron must lie within "
                         f"{BAND_MIN_UM}-{BAND_MAX_UM} micron with a positive width")
    return np.linspace(lo, hi, n), np.ones(n)


def dayside_temperature(teff_k, r_over_rstar, bond_albedo=0.1, redistribution=0.2):
    """Day-side temperature in K (Cowan & Agol 2011, eqs. 4-5; value from memory).

    T_day = Teff sqrt(R*/r) (1 - A_B)^(1/4) (2/3 - 5 eps/12)^(1/4). With eps = 1 this is the
    full-redistribution equilibrium temperature (f = 1/4), with eps = 0 the instant re-radiation
    limit (f = 2/3).

    Parameters
    ----------
    teff_k : stellar effective temperature, K
    r_over_rstar : star-planet distance in stellar radii (at the occultation for eccentric orbits)
    bond_albedo : A_B in [0, 1]
    redistribution : epsilon in [0, 1]
    """
    teff = np.asarray(teff_k, dtype=float)
    r = np.asarray(r_over_rstar, dtype=float)
    return teff * np.sqrt(1.0 / r) * ((1.0 - bond_albedo) * (2.0 / 3.0 - 5.0 * redistribution
                                                            / 12.0)) ** 0.25


def band_flux_ratio(t_planet, t_star, wavelength_um, response, photon_counting=True):
    """Band-averaged surface-brightness ratio int B(T_p) S w / int B(T*) S w.

    ``wavelength_um`` and ``response`` describe the filter (a top-hat or a two-column curve);
    with ``photon_counting`` the weight w = lambda (photon detector), else w = 1 (energy).
    Temperatures broadcast; the band is integrated with the trapezoid rule along a trailing axis.

    Parameters
    ----------
    t_planet, t_star : float or ndarray
        Planet and star brightness temperatures, K.
    wavelength_um : ndarray
        Filter wavelengths, microns.
    response : ndarray
        Filter response (dimensionless).
    photon_counting : bool
        Photon-counting detector weight.

    Returns
    -------
    ndarray
        Surface-brightness ratio (dimensionless).
    """
    lam = np.asarray(wavelength_um, dtype=float)
    s = np.asarray(response, dtype=float) * (lam if photon_counting else 1.0)
    tp = np.asarray(t_planet, dtype=float)[..., None]
    ts = np.asarray(t_star, dtype=float)[..., None]
    num = np.trapezoid(planck_lambda(lam, tp) * s, lam, axis=-1)
    den = np.trapezoid(planck_lambda(lam, ts) * s, lam, axis=-1)
    return num / den


def _band_flux(temps, lam, s):
    """Band-integrated B_lambda (arbitrary constant units) for a 1-D array of temperatures."""
    return np.trapezoid(planck_lambda(lam, temps[:, None]) * s, lam, axis=-1)


def band_flux_ratio_fast(t_planet, t_star, wavelength_um, response, photon_counting=True,
                         n_grid=4096):
    """As :func:`band_flux_ratio` for many samples: the band integral is evaluated on the unique
    stellar temperatures and, for the planet, on a log-spaced grid of ``n_grid`` temperatures
    spanning the samples, interpolated linearly in (log T, log flux). Relative error below 1e-5
    for the temperature spans of posterior samples (tested against the direct integral).

    Parameters
    ----------
    t_planet, t_star : ndarray
        Planet and star brightness temperatures, K.
    wavelength_um : ndarray
        Filter wavelengths, microns.
    response : ndarray
        Filter response (dimensionless).
    photon_counting : bool
        Photon-counting detector weight.
    n_grid : int
        Planet temperatures of the interpolation grid.

    Returns
    -------
    ndarray
        Surface-brightness ratio (dimensionless).
    """
    lam = np.asarray(wavelength_um, dtype=float)
    s = np.asarray(response, dtype=float) * (lam if photon_counting else 1.0)
    tp, ts = np.broadcast_arrays(np.asarray(t_planet, dtype=float),
                                 np.asarray(t_star, dtype=float))
    u_s, inv = np.unique(ts, return_inverse=True)
    den = _band_flux(u_s, lam, s)[inv.reshape(ts.shape)]
    lo, hi = float(np.min(tp)), float(np.max(tp))
    if tp.size <= n_grid or hi <= lo:
        num = _band_flux(tp.ravel(), lam, s).reshape(tp.shape)
    else:
        grid = np.geomspace(lo, hi, n_grid)
        log_f = np.log(_band_flux(grid, lam, s))
        num = np.exp(np.interp(np.log(tp), np.log(grid), log_f))
    return num / den


def thermal_depth(k, t_planet, t_star, wavelength_um, response, photon_counting=True):
    """Thermal occultation depth (fraction): k^2 times the band flux ratio.

    Parameters
    ----------
    k : float or ndarray
        Radius ratio Rp/R*.
    t_planet, t_star : float or ndarray
        Planet and star temperatures, K.
    wavelength_um : ndarray
        Filter wavelengths, microns.
    response : ndarray
        Filter response (dimensionless).
    photon_counting : bool
        Photon-counting detector weight.

    Returns
    -------
    ndarray
        Depth (fraction of the stellar flux).
    """
    return np.asarray(k, dtype=float) ** 2 * band_flux_ratio_fast(t_planet, t_star, wavelength_um,
                                                                response, photon_counting)


def reflected_depth(k, r_over_rstar, geometric_albedo=0.1):
    """Reflected-light occultation depth (fraction) at full phase: A_g (k / (r/R*))^2.

    Parameters
    ----------
    k : float or ndarray
        Radius ratio Rp/R*.
    r_over_rstar : float or ndarray
        Star-planet distance at occultation, stellar radii.
    geometric_albedo : float
        Geometric albedo (dimensionless).

    Returns
    -------
    ndarray
        Depth (fraction of the stellar flux).
    """
    return geometric_albedo * (np.asarray(k, dtype=float) / np.asarray(r_over_rstar,
                                                                     dtype=float)) ** 2


def occultation_depth(k, teff_k, r_over_rstar, wavelength_um, response, bond_albedo=0.1,
                      redistribution=0.2, geometric_albedo=0.1, photon_counting=True):
    """Total occultation depth (fraction) per sample: thermal day side plus reflected light.

    Parameters
    ----------
    k : planet-to-star radius ratio
    teff_k : stellar effective temperature, K (the star is treated as a blackbody)
    r_over_rstar : star-planet distance at the occultation, stellar radii
    wavelength_um, response : filter curve (microns, relative response)
    bond_albedo, redistribution : Cowan & Agol (2011) A_B and epsilon
    geometric_albedo : A_g for the reflected light
    """
    t_day = dayside_temperature(teff_k, r_over_rstar, bond_albedo, redistribution)
    return (thermal_depth(k, t_day, teff_k, wavelength_um, response, photon_counting)
            + reflected_depth(k, r_over_rstar, geometric_albedo))
