"""Occultation (secondary-eclipse) geometry of an eccentric orbit, exact and vectorised.

Units: lengths in stellar radii unless named, times in days, angles in radians. ``omega`` is the
RV-convention argument of periastron (transit at f = pi/2 - omega, occultation at
f = -pi/2 - omega; DESIGN.md). Sky geometry follows Winn (2010, arXiv:1001.2010, eqs. 1-4):
r = a(1-e^2)/(1+e cos f), sky separation d = r sqrt(1 - sin^2(omega+f) sin^2 i).

Durations are exact: the contacts are the roots of d = 1 +- k on the Kepler orbit, found by a
bracketed Newton iteration on all samples at once, then turned into times through the mean
anomaly. The closed forms of Winn (2010) and Kipping (2010) are kept as cross-checks only.
"""
from __future__ import annotations

import numpy as np

from rhofollow.physics.constants import C_SI, DAY_S, R_SUN_M
from rhofollow.physics.kepler import true_to_mean
from rhofollow.errors import NumericalError

__all__ = [
    "ContactError",
    "transit_impact_parameter",
    "occultation_impact_parameter",
    "separation_at_transit",
    "separation_at_occultation",
    "occultation_occurs",
    "occultation_probability",
    "eclipse_durations",
    "duration_winn",
    "duration_kipping",
    "light_travel_delay",
]

_TWO_PI = 2.0 * np.pi


class ContactError(NumericalError, ArithmeticError):
    """Raised when the contact points of an eclipse could not be located."""


def _as(*xs):
    return np.broadcast_arrays(*[np.asarray(x, dtype=float) for x in xs])


def separation_at_transit(a_rs, e, omega):
    """Star-planet distance at mid-transit (f = pi/2 - omega), in units of a_rs's length.

    r_tra = a (1 - e^2) / (1 + e sin omega) (Winn 2010, arXiv:1001.2010, eq. 1 at conjunction).

    Parameters
    ----------
    a_rs : float or ndarray
        Semi-major axis (any length unit; a/R* gives stellar radii).
    e : float or ndarray
        Eccentricity in [0, 1).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).

    Returns
    -------
    ndarray
        Distance, unit of ``a_rs``.
    """
    a_rs, e, omega = _as(a_rs, e, omega)
    return a_rs * (1.0 - e * e) / (1.0 + e * np.sin(omega))


def separation_at_occultation(a_rs, e, omega):
    """Star-planet distance at mid-occultation (f = -pi/2 - omega), same unit as ``a_rs``.

    r_occ = a (1 - e^2) / (1 - e sin omega). Used for the day-side irradiation and the reflected
    light at the occultation.

    Parameters
    ----------
    a_rs : float or ndarray
        Semi-major axis (any length unit; a/R* gives stellar radii).
    e : float or ndarray
        Eccentricity in [0, 1).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).

    Returns
    -------
    ndarray
        Distance, unit of ``a_rs``.
    """
    a_rs, e, omega = _as(a_rs, e, omega)
    return a_rs * (1.0 - e * e) / (1.0 - e * np.sin(omega))


def transit_impact_parameter(a_rs, inc, e, omega):
    """Sky separation at transit conjunction in stellar radii: a cos i (1-e^2)/(1+e sin omega).

    Winn (2010), arXiv:1001.2010, eq. 7 (value from memory).

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
        Impact parameter, stellar radii.
    """
    return separation_at_transit(a_rs, e, omega) * np.cos(inc)


def occultation_impact_parameter(a_rs, inc, e, omega):
    """Sky separation at occultation conjunction in stellar radii: a cos i (1-e^2)/(1-e sin omega).

    Winn (2010), arXiv:1001.2010, eq. 8 (value from memory).

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
        Impact parameter, stellar radii.
    """
    return separation_at_occultation(a_rs, e, omega) * np.cos(inc)


def occultation_occurs(a_rs, inc, e, omega, k):
    """Boolean array: the planet passes behind the stellar disc (b_occ < 1 + k, grazing counts).

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
    k : float or ndarray
        Radius ratio Rp/R*.

    Returns
    -------
    ndarray of bool
        True where an occultation happens.
    """
    return occultation_impact_parameter(a_rs, inc, e, omega) < 1.0 + np.asarray(k, dtype=float)


def occultation_probability(a_rs, inc, e, omega, k, weights=None) -> float:
    """Posterior probability that an occultation happens, given the transit.

    The weighted fraction of samples with b_occ < 1 + k (grazing included). ``weights`` default to
    equal weights.

    Parameters
    ----------
    a_rs : ndarray
        Scaled semi-major axis a/R* per sample.
    inc : ndarray
        Inclination, radians.
    e : ndarray
        Eccentricity in [0, 1).
    omega : ndarray
        Argument of periastron, radians (RV convention).
    k : ndarray
        Radius ratio Rp/R*.
    weights : ndarray, optional
        Sample weights (any positive scale).

    Returns
    -------
    float
        Probability in [0, 1].
    """
    occ = occultation_occurs(a_rs, inc, e, omega, k)
    if weights is None:
        return float(np.mean(occ))
    w = np.broadcast_to(np.asarray(weights, dtype=float), occ.shape)
    return float(np.sum(w * occ) / np.sum(w))


def _contact_angle(a_rs, inc, e, omega, u_c, c, side, max_iter=100):
    """Angle x >= 0 from conjunction (argument of latitude u = u_c + side*x) where d(u) = c.

    Bracketed Newton on h(x) = d^2 - c^2 over [0, pi/2]; h(0) < 0 is required (the caller masks
    the others). A step that does not halve |h| is replaced by a bisection. Returns x
    (radians); NaN where d never reaches c within a quarter orbit (orbits that graze the star at
    periastron), which the callers report.
    """
    sin2i = np.sin(inc) ** 2
    p = a_rs * (1.0 - e * e)  # semi-latus rectum in stellar radii
    c2 = c * c

    def h_and_slope(x, j):
        u = u_c[j] + side * x
        su, cu = np.sin(u), np.cos(u)
        f = u - omega[j]
        ecf = e[j] * np.cos(f)
        den = 1.0 + ecf
        r = p[j] / den
        dr = r * e[j] * np.sin(f) / den
        g = 1.0 - su * su * sin2i[j]
        h = r * r * g - c2[j]
        dh = side * (2.0 * r * dr * g - 2.0 * r * r * su * cu * sin2i[j])
        return h, dh

    r_c = p / (1.0 + e * np.cos(u_c - omega))
    b2 = r_c**2 * (1.0 - sin2i)
    x = np.arcsin(np.clip(np.sqrt(np.maximum(c2 - b2, 0.0)) / r_c, 0.0, 1.0))
    lo = np.zeros_like(x)
    hi = np.full_like(x, 0.5 * np.pi)
    every = np.arange(x.size)
    no_root = h_and_slope(hi, every)[0] <= 0.0
    act = every[~no_root]  # active elements: only these are iterated
    h_prev = np.full(x.size, np.inf)
    for _ in range(max_iter):
        if act.size == 0:
            break
        xa = x[act]
        h, dh = h_and_slope(xa, act)
        la = np.where(h < 0.0, np.maximum(lo[act], xa), lo[act])
        ha = np.where(h > 0.0, np.minimum(hi[act], xa), hi[act])
        lo[act], hi[act] = la, ha
        with np.errstate(divide="ignore", invalid="ignore"):
            step = xa - h / dh
        # Newton inside the bracket while |h| at least halves; otherwise bisect.
        ok = np.isfinite(step) & (step > la) & (step < ha) & (np.abs(h) <= 0.5 * h_prev[act])
        h_prev[act] = np.abs(h)
        x_new = np.where(ok, step, 0.5 * (la + ha))
        x[act] = np.where(np.abs(h) <= 1e-15 * c2[act], xa, x_new)
        act = act[~((np.abs(x_new - xa) <= 1e-13) | (ha - la <= 1e-13)
                    | (np.abs(h) <= 1e-15 * c2[act]))]
    if act.size:
        raise ContactError("eclipse contact points did not converge")
    return np.where(no_root, np.nan, x)


def eclipse_durations(period, a_rs, inc, e, omega, k, which: str = "occultation"):
    """Exact total (T14) and full (T23) eclipse durations in days.

    The four contacts are the true anomalies where the sky separation equals 1 + k (first and
    fourth) and 1 - k (second and third) on the Kepler orbit, on the far side of the star for the
    occultation (near side for the transit). Times between contacts come from the mean anomaly,
    so the result is exact for any e < 1 (no small-angle or small-e expansion).

    Parameters
    ----------
    period : days
    a_rs : true semi-major axis in stellar radii
    inc : inclination, radians
    e, omega : eccentricity, argument of periastron (radians, RV convention)
    k : planet-to-star radius ratio
    which : "occultation" or "transit"

    Returns
    -------
    (t14, t23) : ndarrays, days. ``t14`` is NaN when the eclipse does not happen (impact
    parameter >= 1 + k); ``t23`` is NaN when it is grazing (>= 1 - k) or absent. Both are NaN
    for the rare orbits whose sky separation stays below 1 +- k for a quarter orbit around the
    conjunction (periastron grazing the star).
    """
    period, a_rs, inc, e, omega, k = _as(period, a_rs, inc, e, omega, k)
    shape = period.shape
    period, a_rs, inc, e, omega, k = (np.ravel(v) for v in (period, a_rs, inc, e, omega, k))
    if which == "occultation":
        u_c = -0.5 * np.pi
        b = occultation_impact_parameter(a_rs, inc, e, omega)
    elif which == "transit":
        u_c = 0.5 * np.pi
        b = transit_impact_parameter(a_rs, inc, e, omega)
    else:
        raise ValueError(f"which must be 'occultation' or 'transit', not {which!r}")
    u_c = np.full_like(b, u_c)
    out = []
    for c in (1.0 + k, 1.0 - k):
        has = b < c
        # Elements without contacts get a harmless stand-in (c -> 2b + 1) and are masked later.
        cc = np.where(has, c, 2.0 * b + 1.0)
        x_in = _contact_angle(a_rs, inc, e, omega, u_c, cc, -1.0)
        x_out = _contact_angle(a_rs, inc, e, omega, u_c, cc, +1.0)
        f_in = u_c - x_in - omega
        f_out = u_c + x_out - omega
        dm = np.mod(true_to_mean(f_out, e) - true_to_mean(f_in, e), _TWO_PI)
        out.append(np.where(has, period * dm / _TWO_PI, np.nan).reshape(shape))
    if shape == ():
        return float(out[0]), float(out[1])
    return out[0], out[1]


def duration_winn(period, a_rs, inc, e, omega, k, which="occultation", full=False):
    """Winn (2010, arXiv:1001.2010, eqs. 14-16; value from memory) duration, days: cross-check.

    T = (P/pi) asin[sqrt((1 +- k)^2 - b^2)/(a sin i)] sqrt(1-e^2)/(1 +- e sin omega), with the
    transit (+) or occultation (-) sign and impact parameter.

    Parameters
    ----------
    period : float or ndarray
        Orbital period, days.
    a_rs : float or ndarray
        Scaled semi-major axis a/R*.
    inc : float or ndarray
        Inclination, radians.
    e : float or ndarray
        Eccentricity in [0, 1).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).
    k : float or ndarray
        Radius ratio Rp/R*.
    which : str
        "transit" or "occultation".
    full : bool
        T23 (second to third contact) instead of T14.

    Returns
    -------
    ndarray
        Duration, days.
    """
    period, a_rs, inc, e, omega, k = _as(period, a_rs, inc, e, omega, k)
    s = 1.0 if which == "transit" else -1.0
    b = a_rs * np.cos(inc) * (1.0 - e * e) / (1.0 + s * e * np.sin(omega))
    c = 1.0 - k if full else 1.0 + k
    arg = np.sqrt(np.maximum(c * c - b * b, 0.0)) / (a_rs * np.sin(inc))
    return period / np.pi * np.arcsin(np.minimum(arg, 1.0)) * np.sqrt(1.0 - e * e) / (
        1.0 + s * e * np.sin(omega))


def duration_kipping(period, a_rs, inc, e, omega, k, which="occultation", full=False):
    """Kipping (2010, MNRAS 407, 301; value from memory) one-term duration, days: cross-check.

    T = (P/pi) (rho_c^2/sqrt(1-e^2)) asin[sqrt((1 +- k)^2 - b^2)/(a rho_c sin i)],
    rho_c = (1-e^2)/(1 +- e sin omega).

    Parameters
    ----------
    period : float or ndarray
        Orbital period, days.
    a_rs : float or ndarray
        Scaled semi-major axis a/R*.
    inc : float or ndarray
        Inclination, radians.
    e : float or ndarray
        Eccentricity in [0, 1).
    omega : float or ndarray
        Argument of periastron, radians (RV convention).
    k : float or ndarray
        Radius ratio Rp/R*.
    which : str
        "transit" or "occultation".
    full : bool
        T23 (second to third contact) instead of T14.

    Returns
    -------
    ndarray
        Duration, days.
    """
    period, a_rs, inc, e, omega, k = _as(period, a_rs, inc, e, omega, k)
    s = 1.0 if which == "transit" else -1.0
    rho_c = (1.0 - e * e) / (1.0 + s * e * np.sin(omega))
    b = a_rs * np.cos(inc) * rho_c
    c = 1.0 - k if full else 1.0 + k
    arg = np.sqrt(np.maximum(c * c - b * b, 0.0)) / (a_rs * rho_c * np.sin(inc))
    return period / np.pi * rho_c**2 / np.sqrt(1.0 - e * e) * np.arcsin(np.minimum(arg, 1.0))


def light_travel_delay(a_rs, rstar, inc, e, omega):
    """Extra delay of the occultation relative to the transit from light travel, days.

    Delta t_LT = (r_tra + r_occ) sin i / c (REFERENCE sec. 13; derivation standard, e.g. Kaplan
    2010 -- attribution from memory): the transit is seen early by r_tra sin i / c and the
    occultation late by r_occ sin i / c relative to the star. For a circular orbit 2 a sin i / c.

    Parameters
    ----------
    a_rs : semi-major axis in stellar radii
    rstar : stellar radius, solar radii
    inc : radians; e, omega : eccentricity and argument of periastron (radians)
    """
    a_rs, rstar, inc, e, omega = _as(a_rs, rstar, inc, e, omega)
    r_sum = separation_at_transit(a_rs, e, omega) + separation_at_occultation(a_rs, e, omega)
    return r_sum * rstar * R_SUN_M * np.sin(inc) / C_SI / DAY_S
