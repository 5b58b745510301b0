"""Circular-orbit transit geometry and the density it implies.

References
----------
Seager, S. & Mallén-Ornelas, G. 2003, ApJ 585, 1038 (SMO): exact circular-orbit relations between the
total (T14) and full (T23) durations, impact parameter b, radius ratio k and a/R*, and the stellar density
from Kepler's third law.
Winn, J. N. 2010, "Transits and Occultations", in Exoplanets (ed. Seager), arXiv:1001.2010: eccentric
durations (eqs. 14-16) and impact parameter (eq. 7).
Kipping, D. M. 2010, MNRAS 407, 301 and Dawson & Johnson 2012, ApJ 756, 122: the photo-eccentric density
ratio rho_circ / rho_true = g^3 with g = (1 + e sin w) / sqrt(1 - e^2).

Units: periods and durations in days, densities in g/cm^3, angles in radians.
"""
from __future__ import annotations

import numpy as np

from rhofollow.physics.constants import G_SI, DAY_S

__all__ = [
    "rho_from_ars", "ars_from_rho", "circular_durations", "smo_invert", "ars_from_t14_b",
    "g_factor", "density_ratio_from_orbit", "ecc_min_from_ratio", "eccentric_durations",
    "inclination_from_b", "transit_impact_parameter",
]

_RHO_FACTOR = 3.0 * np.pi / (G_SI * DAY_S**2) * 1e-3   # kg/m^3 -> g/cm^3


def rho_from_ars(a_rs, period):
    """Mean stellar density (g/cm^3) from a/R* and period (days), Kepler III with Mp << M*.

    rho = 3 pi (a/R*)^3 / (G P^2)  (SMO 2003; with the 3/(4 pi) of the mean density included).

    Parameters
    ----------
    a_rs : float or ndarray
        Scaled semi-major axis a/R* (dimensionless).
    period : float or ndarray
        Orbital period, days.

    Returns
    -------
    ndarray
        Mean stellar density, g/cm^3.
    """
    a_rs = np.asarray(a_rs, dtype=float)
    period = np.asarray(period, dtype=float)
    return _RHO_FACTOR * a_rs**3 / period**2


def ars_from_rho(rho, period):
    """a/R* from the stellar density (g/cm^3) and period (days): the inverse of :func:`rho_from_ars`.

    Parameters
    ----------
    rho : float or ndarray
        Mean stellar density, g/cm^3.
    period : float or ndarray
        Orbital period, days.

    Returns
    -------
    ndarray
        Scaled semi-major axis a/R* (dimensionless).
    """
    return np.cbrt(np.asarray(rho, dtype=float) * np.asarray(period, dtype=float) ** 2 / _RHO_FACTOR)


def circular_durations(a_rs, b, k, period):
    """Exact circular-orbit total and full durations (days), SMO 2003 eqs. for a flat-bottomed transit.

    sin(pi T14 / P) = sqrt((1+k)^2 - b^2) / (a/R* sin i), b = a/R* cos i; T23 likewise with (1-k).
    T23 is 0 for grazing geometry (b > 1 - k).

    Parameters
    ----------
    a_rs : float or ndarray
        Scaled semi-major axis a/R*.
    b : float or ndarray
        Impact parameter, stellar radii.
    k : float or ndarray
        Radius ratio Rp/R*.
    period : float or ndarray
        Orbital period, days.

    Returns
    -------
    (ndarray, ndarray)
        T14 and T23, days.
    """
    a_rs, b, k, period = (np.asarray(x, dtype=float) for x in (a_rs, b, k, period))
    sin_i = np.sqrt(np.clip(1.0 - (b / a_rs) ** 2, 0.0, 1.0))
    x14 = np.sqrt(np.clip((1 + k) ** 2 - b**2, 0.0, None)) / (a_rs * sin_i)
    x23 = np.sqrt(np.clip((1 - k) ** 2 - b**2, 0.0, None)) / (a_rs * sin_i)
    t14 = period / np.pi * np.arcsin(np.clip(x14, 0.0, 1.0))
    t23 = period / np.pi * np.arcsin(np.clip(x23, 0.0, 1.0))
    return t14, t23


def smo_invert(t14, t23, k, period):
    """Exact SMO 2003 inversion of (T14, T23, k, P) to (b, a/R*) for a circular orbit.

    With S14 = sin^2(pi T14/P), S23 = sin^2(pi T23/P):
    b^2 = [(1-k)^2 - (S23/S14)(1+k)^2] / (1 - S23/S14),  (a/R*)^2 = [(1+k)^2 - b^2 (1 - S14)] / S14.

    Returns (b, a_rs); b is NaN where b^2 < 0 (inconsistent durations).

    Parameters
    ----------
    t14, t23 : float or ndarray
        Total and full durations, days.
    k : float or ndarray
        Radius ratio Rp/R*.
    period : float or ndarray
        Orbital period, days.

    Returns
    -------
    (ndarray, ndarray)
        Impact parameter b (stellar radii; NaN where inconsistent) and a/R*.
    """
    t14, t23, k, period = (np.asarray(x, dtype=float) for x in (t14, t23, k, period))
    s14 = np.sin(np.pi * t14 / period) ** 2
    s23 = np.sin(np.pi * t23 / period) ** 2
    r = s23 / s14
    with np.errstate(invalid="ignore", divide="ignore"):
        b2 = ((1 - k) ** 2 - r * (1 + k) ** 2) / (1 - r)
        b = np.where(b2 >= -1e-9, np.sqrt(np.clip(b2, 0.0, None)), np.nan)  # rounding at b = 0
        a2 = ((1 + k) ** 2 - b2 * (1 - s14)) / s14
        a_rs = np.where(a2 > 0, np.sqrt(np.abs(a2)), np.nan)
    return b, a_rs


def ars_from_t14_b(t14, b, k, period):
    """Exact circular a/R* from T14 (days), impact parameter b, k and P (days).

    From sin^2(pi T14/P) (a^2 - b^2) = (1+k)^2 - b^2 (SMO 2003):
    (a/R*)^2 = b^2 + ((1+k)^2 - b^2) / sin^2(pi T14 / P).

    Parameters
    ----------
    t14 : float or ndarray
        Total duration, days.
    b : float or ndarray
        Impact parameter, stellar radii.
    k : float or ndarray
        Radius ratio Rp/R*.
    period : float or ndarray
        Orbital period, days.

    Returns
    -------
    ndarray
        Circular-orbit a/R* (dimensionless).
    """
    t14, b, k, period = (np.asarray(x, dtype=float) for x in (t14, b, k, period))
    s14 = np.sin(np.pi * t14 / period) ** 2
    return np.sqrt(b**2 + np.clip((1 + k) ** 2 - b**2, 0.0, None) / s14)


def g_factor(e, omega):
    """Photo-eccentric factor g = (1 + e sin w) / sqrt(1 - e^2) (Kipping 2010; Dawson & Johnson 2012).

    omega is the RV-convention argument of periastron (radians): the transit is at true anomaly
    pi/2 - omega, so omega = pi/2 puts the transit at periastron and g > 1.

    Parameters
    ----------
    e : float or ndarray
        Eccentricity in [0, 1).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).

    Returns
    -------
    ndarray
        g (dimensionless).
    """
    e = np.asarray(e, dtype=float)
    return (1.0 + e * np.sin(omega)) / np.sqrt(1.0 - e * e)


def density_ratio_from_orbit(e, omega):
    """rho_circ / rho_true = g^3 (Dawson & Johnson 2012, photo-eccentric effect).

    Parameters
    ----------
    e : float or ndarray
        Eccentricity in [0, 1).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).

    Returns
    -------
    ndarray
        rho_circ / rho_true (dimensionless).
    """
    return g_factor(e, omega) ** 3


def ecc_min_from_ratio(ratio):
    """Smallest eccentricity that can produce a density ratio rho_circ/rho_true (closed form).

    With q = ratio^(2/3): e_min = |q - 1| / (q + 1), reached at omega = 90 deg (ratio > 1) or
    270 deg (ratio < 1); follows from g^2 = (1 + e)/(1 - e) at sin w = +-1.

    Parameters
    ----------
    ratio : float or ndarray
        Density ratio rho_circ / rho_true (> 0, dimensionless).

    Returns
    -------
    ndarray
        Smallest eccentricity (dimensionless, in [0, 1)).
    """
    q = np.asarray(ratio, dtype=float) ** (2.0 / 3.0)
    return np.abs(q - 1.0) / (q + 1.0)


def transit_impact_parameter(a_rs, inc, e, omega):
    """Transit impact parameter b = a/R* cos i (1 - e^2)/(1 + e sin w) (Winn 2010 eq. 7).

    Parameters
    ----------
    a_rs : float or ndarray
        Scaled semi-major axis a/R*.
    inc : float or ndarray
        Inclination, radians.
    e : float or ndarray
        Eccentricity in [0, 1).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).

    Returns
    -------
    ndarray
        Impact parameter at transit, stellar radii.
    """
    e = np.asarray(e, dtype=float)
    return a_rs * np.cos(inc) * (1 - e * e) / (1 + e * np.sin(omega))


def inclination_from_b(b, a_rs, e, omega):
    """Inclination (rad) from the transit impact parameter: inverse of :func:`transit_impact_parameter`.

    Returns NaN where no inclination gives that b (cos i > 1).

    Parameters
    ----------
    b : float or ndarray
        Transit impact parameter, stellar radii.
    a_rs : float or ndarray
        Scaled semi-major axis a/R*.
    e : float or ndarray
        Eccentricity in [0, 1).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).

    Returns
    -------
    ndarray
        Inclination, radians in [0, pi/2] (NaN where impossible).
    """
    e = np.asarray(e, dtype=float)
    cos_i = np.asarray(b, dtype=float) * (1 + e * np.sin(omega)) / (np.asarray(a_rs) * (1 - e * e))
    with np.errstate(invalid="ignore"):
        return np.where(cos_i <= 1.0, np.arccos(np.clip(cos_i, -1.0, 1.0)), np.nan)


def eccentric_durations(a_rs, b, k, period, e, omega):
    """Transit T14 and T23 (days) of an eccentric orbit (Winn 2010 eqs. 14-16).

    T = (P/pi) asin( sqrt((1 +- k)^2 - b^2) / (a/R* sin i) ) * sqrt(1-e^2)/(1 + e sin w),
    with b the transit impact parameter and i from b. Accurate to ~0.1 % against an exact numerical
    solution for e <= 0.6 (REFERENCE comparison table); T23 = 0 for grazing transits.

    Parameters
    ----------
    a_rs : float or ndarray
        Scaled semi-major axis a/R*.
    b : float or ndarray
        Transit impact parameter, stellar radii.
    k : float or ndarray
        Radius ratio Rp/R*.
    period : float or ndarray
        Orbital period, days.
    e : float or ndarray
        Eccentricity in [0, 1).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).

    Returns
    -------
    (ndarray, ndarray)
        T14 and T23, days.
    """
    a_rs, b, k, period, e = (np.asarray(x, dtype=float) for x in (a_rs, b, k, period, e))
    t14, t23, _ = durations_from_sin(a_rs, b, k, period, e, np.sin(omega))
    return t14, t23


def durations_from_sin(a_rs, b, k, period, e, sin_w, full=True):
    """:func:`eccentric_durations` from sin(omega) computed once by the caller (float arrays).

    Parameters
    ----------
    a_rs, b, k, period, e : ndarray
        a/R*, impact parameter (stellar radii), Rp/R*, period (days), eccentricity.
    sin_w : ndarray
        Sine of the argument of periastron (RV convention).
    full : bool
        Also compute T23 (else None is returned for it).

    Returns
    -------
    (ndarray, ndarray or None, ndarray)
        T14 and T23 (days), and (1 - e^2) / (1 + e sin w) (dimensionless).
    """
    one_e2 = 1 - e * e
    e_sin1 = 1 + e * sin_w
    fac = one_e2 / e_sin1
    cos_i = b / (a_rs * fac)
    sin_i = np.sqrt(np.clip(1 - cos_i**2, 1e-300, 1.0))
    scale = np.sqrt(one_e2) / e_sin1
    b2 = b**2
    a_sin_i = a_rs * sin_i
    x14 = np.sqrt(np.clip((1 + k) ** 2 - b2, 0.0, None)) / a_sin_i
    t14 = period / np.pi * np.arcsin(np.clip(x14, 0.0, 1.0)) * scale
    if not full:
        return t14, None, fac
    x23 = np.sqrt(np.clip((1 - k) ** 2 - b2, 0.0, None)) / a_sin_i
    t23 = period / np.pi * np.arcsin(np.clip(x23, 0.0, 1.0)) * scale
    return t14, t23, fac
