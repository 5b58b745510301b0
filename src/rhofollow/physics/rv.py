"""Radial-velocity semi-amplitude and the Keplerian RV curve (plain floats / numpy arrays).

Units: days, radians, solar masses, Earth masses, m/s. Everything broadcasts over samples.

Convention (DESIGN.md): omega is the star's argument of periastron of RV papers,
v* = gamma + K [cos(f + omega) + e cos(omega)]; the transit happens at true anomaly
f = pi/2 - omega (Winn 2010, "Transits and Occultations", in *Exoplanets*, ed. Seager).

References
----------
- Semi-amplitude: K = (2 pi G / P)^(1/3) Mp sin i / (M* + Mp)^(2/3) / sqrt(1 - e^2)
  (Lovis & Fischer 2010, radial-velocity chapter in *Exoplanets*, ed. Seager; Cumming et al. 1999).
- Kepler's equation and anomalies: the shared solver :mod:`rhofollow.physics.kepler`.
"""
from __future__ import annotations

import numpy as np

from rhofollow.physics.constants import DAY_S, G_SI, GM_EARTH_SI, GM_SUN_SI
from rhofollow.physics.kepler import mean_anomaly_at_transit, true_anomaly

__all__ = ["semi_amplitude", "true_anomaly_at", "rv_shape", "rv_curve",
           "circular_shape"]

_TWO_PI = 2.0 * np.pi


def semi_amplitude(mp_mearth, mstar_msun, period_d, e=0.0, inc_rad=np.pi / 2):
    """Stellar RV semi-amplitude K in m/s (full formula, planet mass kept in the denominator).

    Parameters
    ----------
    mp_mearth : float or ndarray, Earth masses (true planet mass)
    mstar_msun : float or ndarray, solar masses
    period_d : float or ndarray, days
    e : float or ndarray, eccentricity in [0, 1)
    inc_rad : float or ndarray, orbital inclination in radians (pi/2 = edge-on)

    Returns
    -------
    ndarray or float, m/s
        K = (2 pi G / P)^(1/3) Mp sin i / (M* + Mp)^(2/3) / sqrt(1 - e^2) (Lovis & Fischer 2010).
    """
    mp = np.asarray(mp_mearth, dtype=float) * (GM_EARTH_SI / G_SI)
    mtot = np.asarray(mstar_msun, dtype=float) * (GM_SUN_SI / G_SI) + mp
    p_s = np.asarray(period_d, dtype=float) * DAY_S
    e = np.asarray(e, dtype=float)
    k = (_TWO_PI * G_SI / p_s) ** (1.0 / 3.0) * mp * np.sin(inc_rad) / mtot ** (2.0 / 3.0)
    return k / np.sqrt(1.0 - e * e)


def true_anomaly_at(phase, e, omega):
    """True anomaly (radians) at orbital phase ``phase`` = (t - t0) / P measured from mid-transit.

    Parameters
    ----------
    phase : float or ndarray, orbital phase (t - t0) / P, dimensionless (0 = mid-transit)
    e : float or ndarray, eccentricity in [0, 1)
    omega : float or ndarray, star's argument of periastron, radians (RV convention)

    Returns
    -------
    ndarray, true anomaly f in radians; all arguments broadcast against each other.
    """
    e = np.asarray(e, dtype=float)
    mean_anom = _TWO_PI * np.asarray(phase, dtype=float) + mean_anomaly_at_transit(e, omega)
    return true_anomaly(mean_anom, e)


def rv_shape(phase, e, omega):
    """Unit-amplitude RV curve cos(f + omega) + e cos(omega) at phase = (t - t0)/P from transit.

    Parameters
    ----------
    phase : float or ndarray, orbital phase (t - t0) / P, dimensionless (0 = mid-transit)
    e : float or ndarray, eccentricity in [0, 1)
    omega : float or ndarray, star's argument of periastron, radians (RV convention)

    Returns
    -------
    ndarray, dimensionless (multiply by K in m/s and add gamma to get v*(t)). Broadcasts, so a
    (G, 1) grid of (e, omega) against (1, N) phases gives (G, N) templates.
    """
    omega = np.asarray(omega, dtype=float)
    f = true_anomaly_at(phase, e, omega)
    return np.cos(f + omega) + np.asarray(e, dtype=float) * np.cos(omega)


def circular_shape(phase):
    """Unit-amplitude circular-orbit RV curve: cos(2 pi phase + pi/2) = -sin(2 pi phase).

    The star recedes fastest a quarter period before transit and approaches after it.

    Parameters
    ----------
    phase : float or ndarray, orbital phase (t - t0) / P, dimensionless (0 = mid-transit)

    Returns
    -------
    ndarray, dimensionless curve (multiply by K in m/s), same shape as ``phase``.
    """
    return -np.sin(_TWO_PI * np.asarray(phase, dtype=float))


def rv_curve(t, period_d, t0, e, omega, k_ms, gamma_ms=0.0):
    """Stellar radial velocity v*(t) in m/s.

    Parameters
    ----------
    t : float or ndarray, BJD_TDB (days)
    period_d, t0 : orbital period (days) and mid-transit epoch (BJD_TDB)
    e, omega : eccentricity and argument of periastron (radians, RV convention)
    k_ms, gamma_ms : semi-amplitude and systemic velocity, m/s

    Returns
    -------
    ndarray, m/s; all arguments broadcast (for example samples (S, 1) against times (1, N)).
    """
    phase = (np.asarray(t, dtype=float) - np.asarray(t0, dtype=float)) / np.asarray(period_d, dtype=float)
    return np.asarray(gamma_ms, float) + np.asarray(k_ms, float) * rv_shape(phase, e, omega)
