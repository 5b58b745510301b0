"""Independent stellar density routes.

References
----------
Torres, G., Andersen, J. & Giménez, A. 2010, A&ARv 18, 67: empirical mass and radius from Teff, log g
and [Fe/H] (their calibration; scatter sigma_logM = 0.027, sigma_logR = 0.014; valid above 0.6 Msun for
main-sequence and evolved stars). Coefficients as tabulated in that review.
Density from log g and R: g = G M / R^2 => rho = 3 g / (4 pi G R) (definition).

Units: densities g/cm^3, masses Msun, radii Rsun, log g in dex(cm/s^2), Teff in K.
"""
from __future__ import annotations

import numpy as np

from rhofollow.physics.constants import G_SI, R_SUN_M, RHO_SUN_CGS, GM_SUN_SI

__all__ = ["rho_from_mass_radius", "rho_from_logg_radius", "mass_from_logg_radius",
           "torres_mass_radius", "TORRES_SIGMA_LOGM", "TORRES_SIGMA_LOGR",
           "mass_from_density_ms"]

_TORRES_A = (1.5689, 1.3787, 0.4243, 1.139, -0.14250, 0.01969, 0.10100)
_TORRES_B = (2.4427, 0.6679, 0.1771, 0.705, -0.21415, 0.02306, 0.04173)
TORRES_SIGMA_LOGM = 0.027
TORRES_SIGMA_LOGR = 0.014


def rho_from_mass_radius(mstar, rstar):
    """Mean density (g/cm^3) of a star of mass ``mstar`` (Msun) and radius ``rstar`` (Rsun).

    Parameters
    ----------
    mstar : float or ndarray
        Stellar mass, Msun.
    rstar : float or ndarray
        Stellar radius, Rsun.

    Returns
    -------
    ndarray
        Mean density, g/cm^3.
    """
    return RHO_SUN_CGS * np.asarray(mstar, dtype=float) / np.asarray(rstar, dtype=float) ** 3


def rho_from_logg_radius(logg, rstar):
    """Mean density (g/cm^3) from surface gravity log g (cgs) and radius (Rsun): rho = 3g/(4 pi G R).

    Parameters
    ----------
    logg : float or ndarray
        log10 of the surface gravity in cm/s^2.
    rstar : float or ndarray
        Stellar radius, Rsun.

    Returns
    -------
    ndarray
        Mean density, g/cm^3.
    """
    g_si = 10.0 ** (np.asarray(logg, dtype=float) - 2.0)  # cm/s^2 -> m/s^2
    r_m = np.asarray(rstar, dtype=float) * R_SUN_M
    return 3.0 * g_si / (4.0 * np.pi * G_SI * r_m) * 1e-3


def mass_from_logg_radius(logg, rstar):
    """Mass (Msun) from log g (cgs) and radius (Rsun): M = g R^2 / G (using the nominal GM_sun).

    Parameters
    ----------
    logg : float or ndarray
        log10 of the surface gravity in cm/s^2.
    rstar : float or ndarray
        Stellar radius, Rsun.

    Returns
    -------
    ndarray
        Stellar mass, Msun.
    """
    g_si = 10.0 ** (np.asarray(logg, dtype=float) - 2.0)
    r_m = np.asarray(rstar, dtype=float) * R_SUN_M
    return g_si * r_m**2 / GM_SUN_SI


def torres_mass_radius(teff, logg, feh, rng=None, scatter=True):
    """Mass and radius (Msun, Rsun) from Teff (K), log g (cgs) and [Fe/H] (dex), Torres et al. 2010.

    log M = a1 + a2 X + a3 X^2 + a4 X^3 + a5 (log g)^2 + a6 (log g)^3 + a7 [Fe/H], X = log Teff - 4.1,
    and the same form for log R with the b coefficients. With ``scatter`` and an ``rng``, the
    calibration's intrinsic scatter (0.027 dex in M, 0.014 dex in R) is added to each sample.

    Parameters
    ----------
    teff : float or ndarray
        Effective temperature, K.
    logg : float or ndarray
        log10 of the surface gravity in cm/s^2.
    feh : float or ndarray
        Metallicity [Fe/H], dex.
    rng : numpy.random.Generator, optional
        Source of the calibration scatter.
    scatter : bool
        Add the calibration's intrinsic scatter (needs ``rng``).

    Returns
    -------
    (ndarray, ndarray)
        Mass (Msun) and radius (Rsun).
    """
    x = np.log10(np.asarray(teff, dtype=float)) - 4.1
    lg = np.asarray(logg, dtype=float)
    fe = np.asarray(feh, dtype=float)
    a, b = _TORRES_A, _TORRES_B
    logm = a[0] + a[1] * x + a[2] * x**2 + a[3] * x**3 + a[4] * lg**2 + a[5] * lg**3 + a[6] * fe
    logr = b[0] + b[1] * x + b[2] * x**2 + b[3] * x**3 + b[4] * lg**2 + b[5] * lg**3 + b[6] * fe
    if scatter and rng is not None:
        shape = np.broadcast(logm, logr).shape
        logm = logm + rng.normal(0.0, TORRES_SIGMA_LOGM, shape)
        logr = logr + rng.normal(0.0, TORRES_SIGMA_LOGR, shape)
    return 10.0**logm, 10.0**logr


def mass_from_density_ms(rho):
    """Rough main-sequence mass (Msun) from density (g/cm^3), for a star with no other mass route.

    Uses R proportional to M^0.8 on the lower main sequence, so rho/rho_sun = M^(-1.4) (common practice,
    no source; good to ~20 % for FGK dwarfs). Callers warn when they use it.

    Parameters
    ----------
    rho : float or ndarray
        Mean stellar density, g/cm^3.

    Returns
    -------
    ndarray
        Stellar mass, Msun.
    """
    return (np.asarray(rho, dtype=float) / RHO_SUN_CGS) ** (-1.0 / 1.4)
