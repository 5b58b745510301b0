"""Likelihoods of occultation (secondary-eclipse) observations for weighted posterior samples.

Two kinds of observation re-weight the (e, omega, ...) samples of a target:

* a measured occultation mid-time with a Gaussian error: :func:`timing_log_like`;
* a non-detection over a time window with a depth the observation could have seen:
  :func:`non_detection_log_like` (samples that put a deep enough occultation inside the window
  are down-weighted).

Both return log-likelihood arrays of shape (N,) for ``SampleSet.reweighted``.

Units: days (times, periods, BJD_TDB), radians (omega, inc), ppm (depths), microns (band),
kelvin, solar radii. Plain numpy; no I/O.

Conventions (DESIGN.md): omega is the RV-fit argument of periastron; the transit is at true anomaly
f = pi/2 - omega and the occultation at f = -pi/2 - omega.
"""
from __future__ import annotations

import numpy as np
from scipy.special import log_ndtr

from rhofollow.physics.kepler import transit_to_occultation_time
from rhofollow.physics.occultation import (eclipse_durations, light_travel_delay, occultation_occurs,
                          separation_at_occultation)
from rhofollow.physics.thermal import BAND_MAX_UM, BAND_MIN_UM, occultation_depth, tophat_band

__all__ = [
    "occultation_offset", "light_time_delay", "occultation_duration",
    "predicted_occultation_times", "timing_log_like", "non_detection_log_like", "event_coverage",
    "predicted_depth_ppm",
]

TWO_PI = 2.0 * np.pi


def occultation_offset(e, omega, period):
    """Exact transit-to-occultation time offset (days, in [0, P)) per sample (conjunctions,
    no light travel): :func:`rhofollow.physics.kepler.transit_to_occultation_time`.

    Parameters
    ----------
    e : ndarray
        Eccentricity in [0, 1).
    omega : ndarray
        Argument of periastron, radians (RV convention).
    period : ndarray
        Orbital period, days.

    Returns
    -------
    ndarray
        Offset, days.
    """
    return transit_to_occultation_time(period, e, omega)


def light_time_delay(e, omega, a_rs, rstar_rsun, inc):
    """Extra observed delay of the occultation after the transit from light travel (days),
    (r_tra + r_occ) sin i / c: :func:`rhofollow.physics.occultation.light_travel_delay`.

    Parameters
    ----------
    e : ndarray
        Eccentricity in [0, 1).
    omega : ndarray
        Argument of periastron, radians (RV convention).
    a_rs : ndarray
        Scaled semi-major axis a/R*.
    rstar_rsun : ndarray
        Stellar radius, Rsun.
    inc : ndarray
        Inclination, radians.

    Returns
    -------
    ndarray
        Delay, days.
    """
    return light_travel_delay(a_rs, rstar_rsun, inc, e, omega)


def occultation_duration(period, a_rs, inc, e, omega, k):
    """Exact first-to-fourth-contact occultation duration (days); 0 where none happens.

    Parameters
    ----------
    period : ndarray
        Orbital period, days.
    a_rs : ndarray
        Scaled semi-major axis a/R*.
    inc : ndarray
        Inclination, radians.
    e : ndarray
        Eccentricity in [0, 1).
    omega : ndarray
        Argument of periastron, radians (RV convention).
    k : ndarray
        Radius ratio Rp/R*.

    Returns
    -------
    ndarray
        T14 of the occultation, days.
    """
    t14, _ = eclipse_durations(period, a_rs, inc, e, omega, k, which="occultation")
    return np.where(np.isfinite(t14), t14, 0.0)


def predicted_occultation_times(t0, period, e, omega, t_ref, *, a_rs=None, rstar=None, inc=None):
    """Per sample, the predicted occultation mid-time (BJD_TDB) closest to ``t_ref``.

    With ``a_rs``, ``rstar`` and ``inc`` the light-travel delay is included.

    Parameters
    ----------
    t0 : ndarray
        Mid-transit epoch, BJD_TDB (days).
    period : ndarray
        Orbital period, days.
    e : ndarray
        Eccentricity in [0, 1).
    omega : ndarray
        Argument of periastron, radians (RV convention).
    t_ref : float
        Reference time, BJD_TDB (days).
    a_rs : ndarray, optional
        Scaled semi-major axis a/R*.
    rstar : ndarray, optional
        Stellar radius, Rsun.
    inc : ndarray, optional
        Inclination, radians.

    Returns
    -------
    ndarray
        Occultation mid-times, BJD_TDB (days).
    """
    dt = occultation_offset(e, omega, period)
    if a_rs is not None and rstar is not None and inc is not None:
        dt = dt + light_time_delay(e, omega, a_rs, rstar, inc)
    first = t0 + dt
    n = np.rint((t_ref - first) / period)
    return first + n * period


def timing_log_like(t0, period, e, omega, t_meas, sigma_d, *, a_rs=None, rstar=None, inc=None,
                    k=None):
    """Log-likelihood of a measured occultation mid-time for each sample.

    Gaussian in (predicted - measured) with the measurement's 1-sigma error ``sigma_d`` (days),
    the prediction taken at the epoch closest to the measurement. Samples for which no
    occultation happens (needs ``a_rs``, ``inc`` and ``k``) get -inf.

    Parameters
    ----------
    t0 : ndarray
        Mid-transit epoch, BJD_TDB (days).
    period : ndarray
        Orbital period, days.
    e : ndarray
        Eccentricity in [0, 1).
    omega : ndarray
        Argument of periastron, radians (RV convention).
    t_meas : float
        Measured occultation mid-time, BJD_TDB (days).
    sigma_d : float
        Its 1-sigma error, days.
    a_rs : ndarray, optional
        Scaled semi-major axis a/R*.
    rstar : ndarray, optional
        Stellar radius, Rsun.
    inc : ndarray, optional
        Inclination, radians.
    k : ndarray, optional
        Radius ratio Rp/R*.

    Returns
    -------
    ndarray (N,)
        Log-likelihood (natural log), up to a constant.
    """
    if not sigma_d > 0:
        raise ValueError(f"the timing error must be > 0 days, got {sigma_d!r}")
    t_pred = predicted_occultation_times(t0, period, e, omega, t_meas, a_rs=a_rs, rstar=rstar,
                                         inc=inc)
    ll = -0.5 * ((t_pred - t_meas) / sigma_d) ** 2
    if a_rs is not None and inc is not None and k is not None:
        ll = np.where(occultation_occurs(a_rs, inc, e, omega, k), ll, -np.inf)
    return ll


def event_coverage(t_mid_first, period, duration, window_start, window_end):
    """Largest fraction of any occultation event (mid-times ``t_mid_first + n P``, length
    ``duration``) that lies inside [window_start, window_end]. Zero-length events count as
    fully covered when their mid-time is inside.

    Parameters
    ----------
    t_mid_first : ndarray
        Mid-time of a first event, days.
    period : ndarray
        Orbital period, days.
    duration : ndarray
        Event duration, days.
    window_start, window_end : float
        The observed window, days (same time scale as ``t_mid_first``).

    Returns
    -------
    ndarray
        Covered fraction in [0, 1].
    """
    half = 0.5 * np.asarray(duration, dtype=float)
    n0 = np.ceil((window_start - half - t_mid_first) / period)
    best = np.zeros(np.broadcast(t_mid_first, period, half).shape)
    # a window shorter than a period meets at most two events; longer windows are rare here,
    # so look at enough epochs to cover the window.
    n_extra = int(np.ceil(np.max((window_end - window_start) / np.min(period)))) + 1
    for j in range(n_extra + 1):
        mid = t_mid_first + (n0 + j) * period
        lo = np.maximum(mid - half, window_start)
        hi = np.minimum(mid + half, window_end)
        inside = (mid >= window_start) & (mid <= window_end)
        frac = np.where(half > 0, np.clip(hi - lo, 0.0, None) / np.where(half > 0, 2 * half, 1.0),
                        inside.astype(float))
        best = np.maximum(best, frac)
    return best


def non_detection_log_like(t0, period, e, omega, window_start, window_end, depth_ppm,
                           depth_limit_ppm, *, duration=None, threshold_sigma=3.0, a_rs=None,
                           rstar=None, inc=None, k=None):
    """Log-likelihood of "no occultation seen" over a window, for each sample.

    Model: the depth measured in the window is Gaussian with sigma = depth_limit / threshold_sigma
    around the depth of the part of the event that falls in the window (coverage c times the
    sample's depth); "not seen" means it stayed below ``depth_limit_ppm``. So a sample gets
    log Phi((limit - c * depth) / sigma): ~0 when its occultation is outside the window, shallow,
    or does not occur; strongly negative when a deep occultation falls inside.

    Parameters
    ----------
    t0, period, e, omega : arrays (N,) — days, radians
    window_start, window_end : float, BJD_TDB days
    depth_ppm : array (N,) or float — the occultation depth each sample predicts in the band
    depth_limit_ppm : float — the smallest depth the observation would have detected
    duration : array (N,) or None — occultation durations (days); None derives them from
        ``a_rs``, ``inc``, ``k`` when given, else treats the event as a point in time
    """
    if not window_end > window_start:
        raise ValueError("the window must end after it starts")
    if not depth_limit_ppm > 0:
        raise ValueError(f"the depth limit must be > 0 ppm, got {depth_limit_ppm!r}")
    have_geom = a_rs is not None and inc is not None and k is not None
    if duration is None:
        duration = (occultation_duration(period, a_rs, inc, e, omega, k) if have_geom
                    else np.zeros(np.shape(e)))
    dt = occultation_offset(e, omega, period)
    if a_rs is not None and rstar is not None and inc is not None:
        dt = dt + light_time_delay(e, omega, a_rs, rstar, inc)
    cov = event_coverage(t0 + dt, period, duration, window_start, window_end)
    depth = np.asarray(depth_ppm, dtype=float)
    seen_depth = cov * np.where(np.isfinite(depth), depth, 0.0)
    if have_geom:
        seen_depth = np.where(occultation_occurs(a_rs, inc, e, omega, k), seen_depth, 0.0)
    sigma = depth_limit_ppm / threshold_sigma
    return log_ndtr((depth_limit_ppm - seen_depth) / sigma)


def predicted_depth_ppm(k, a_rs, e, omega, teff, band_um, *, bond_albedo=0.1,
                        redistribution=0.2, geometric_albedo=0.1):
    """Occultation depth (ppm) per sample in a top-hat band of relative width 20 % around
    ``band_um`` (narrower near the 0.3-30 micron limits): day-side thermal emission at the
    occultation distance plus reflected light (:func:`rhofollow.physics.thermal.occultation_depth`,
    Cowan & Agol 2011 parameters). NaN where ``teff`` is NaN.

    Parameters
    ----------
    k : ndarray
        Radius ratio Rp/R*.
    a_rs : ndarray
        Scaled semi-major axis a/R*.
    e : ndarray
        Eccentricity in [0, 1).
    omega : ndarray
        Argument of periastron, radians (RV convention).
    teff : ndarray
        Stellar effective temperature, K.
    band_um : float
        Band centre, microns.
    bond_albedo : float
        Bond albedo (dimensionless).
    redistribution : float
        Heat redistribution factor (dimensionless).
    geometric_albedo : float
        Geometric albedo (dimensionless).

    Returns
    -------
    ndarray
        Depth, ppm.
    """
    width = 0.999 * min(0.2 * band_um, 2.0 * (band_um - BAND_MIN_UM), 2.0 * (BAND_MAX_UM - band_um))
    if not width > 0:
        raise ValueError(f"band {band_um!r} micron must lie inside {BAND_MIN_UM}-{BAND_MAX_UM}")
    lam, resp = tophat_band(band_um, width)
    r_occ = separation_at_occultation(a_rs, e, omega)
    return 1e6 * occultation_depth(k, teff, r_occ, lam, resp, bond_albedo=bond_albedo,
                                   redistribution=redistribution,
                                   geometric_albedo=geometric_albedo)
