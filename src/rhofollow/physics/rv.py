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
from rhofollow.physics.kepler_solver import solve_kepler

__all__ = ["semi_amplitude", "true_anomaly_at", "rv_shape", "rv_shape_gradient", "rv_curve",
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


def rv_shape_gradient(phase, e, omega):
    """The unit RV curve and its exact derivatives in h = e cos(omega) and q = e sin(omega).

    At a fixed phase from mid-transit the mean anomaly is M = 2 pi phase + M_t(e, omega), with M_t
    the mean anomaly at transit (true anomaly f_t = pi/2 - omega). With Kepler's equation in the form
    M(f, e), whose partials are dM/df = (1 - e^2)^(3/2) / (1 + e cos f)^2 and
    dM/de = -sin f (2 + e cos f) sqrt(1 - e^2) / (1 + e cos f)^2 (differentiating Kepler's equation
    and tan(f/2) = sqrt((1+e)/(1-e)) tan(E/2); the orbit relations of Murray & Dermott 1999, *Solar
    System Dynamics*, ch. 2; checked against central differences in the tests), the true anomaly moves by
    df/de = (dM/de(f_t) - dM/de(f)) / dM/df(f) and df/domega = -dM/df(f_t) / dM/df(f), and
    s = cos(f + omega) + e cos(omega) follows by the chain rule; (h, q) from (e, omega) by
    de/dh = cos w, de/dq = sin w, dw/dh = -sin w / e, dw/dq = cos w / e, with the 1/e factors
    cancelled analytically so that e = 0 is regular. One Kepler solve per point, against five
    for central differences; equal to them to their truncation error (tests/test_rv_gradient.py).

    Parameters
    ----------
    phase : ndarray, orbital phase (t - t0) / P (0 = mid-transit), broadcast against e and omega
    e : ndarray, eccentricity in [0, 0.999]
    omega : ndarray, star's argument of periastron, radians (RV convention)

    Returns
    -------
    tuple of ndarray ``(s, ds_dh, ds_dq)``: the dimensionless curve and its partial derivatives,
    all of the broadcast shape.
    """
    e = np.asarray(e, dtype=float)
    omega = np.asarray(omega, dtype=float)
    cw, sw = np.cos(omega), np.sin(omega)
    mean_anom = _TWO_PI * np.asarray(phase, dtype=float) + mean_anomaly_at_transit(e, omega)
    big_e = solve_kepler(mean_anom, e)
    # cos f and sin f from tan(E/2) and tan(f/2) = sqrt((1+e)/(1-e)) tan(E/2) (numpy's tangent is
    # vectorised, its sine and cosine of large arrays are not)
    tau = np.sqrt((1.0 + e) / (1.0 - e)) * np.tan(0.5 * big_e)
    tau2 = tau * tau
    cf = (1.0 - tau2) / (1.0 + tau2)
    sf = 2.0 * tau / (1.0 + tau2)
    c_sum = cf * cw - sf * sw                 # cos(f + omega)
    s_sum = sf * cw + cf * sw                 # sin(f + omega)
    shape = c_sum + e * cw
    rt = np.sqrt(1.0 - e * e)
    den, den_t = 1.0 + e * cf, 1.0 + e * sw   # cos f_t = sin omega, sin f_t = cos omega
    ratio = (den / den_t) ** 2                # dM/df(f_t) / dM/df(f)
    df_de = (sf * (2.0 + e * cf) - cw * (2.0 + e * sw) * ratio) / (rt * rt)
    # (1 + df/domega) / e, without the cancellation of 1 - ratio at small e
    one_plus_df_dw_over_e = (sw - cf) * (2.0 + e * (sw + cf)) / (den_t * den_t)
    ds_de = -s_sum * df_de + cw
    ds_dw_over_e = -s_sum * one_plus_df_dw_over_e - sw
    return shape, ds_de * cw - ds_dw_over_e * sw, ds_de * sw + ds_dw_over_e * cw


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
