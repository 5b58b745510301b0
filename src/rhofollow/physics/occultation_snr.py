"""Expected signal-to-noise of one observed occultation (secondary eclipse) with a photometer.

The light curve is modelled as white noise of ``sigma_1min`` (ppm per minute of data) around a
trapezoid of depth ``delta``: flat bottom of length ``T23``, linear ingress and egress of length
``tau = (T14 - T23) / 2`` each, and an out-of-eclipse baseline of ``B`` on each side, so the
observed stretch lasts ``N = T14 + 2 B``. With the timing and shape known (the window is placed on
the predicted event) and the out-of-eclipse level free, the model ``c - delta s(t)`` is linear in
``(c, delta)`` and the least-squares depth has the variance

    var(delta) = sigma_1min^2 / (I - A^2 / N)          (times in minutes)

with ``A = T23 + tau`` the integral of the profile ``s`` (1 on the flat part, linear on ingress
and egress) and ``I = T23 + 2 tau / 3`` the integral of its square (the shape's information
time). For a box (``T14 = T23``) it reduces to ``sigma^2 (1 / T_in + 1 / T_out)``, the difference
of two means. This is the standard linear least-squares result for one amplitude and an offset in
white noise (common practice, no source); red noise and systematics make real data worse, so the
S/N is an upper bound and the README says so.

The photometer's scatter scales with the star's brightness as photon noise does:
``sigma = sigma_ref * 10**(0.2 (m - m_ref))`` (flux ratio 10**(-0.4 dm), Pogson's magnitude
scale; noise ~ sqrt(flux), relative noise ~ 1 / sqrt(flux)).

Everything here is plain numpy, vectorised over targets or samples.
"""
from __future__ import annotations

import numpy as np

__all__ = ["scatter_per_minute_ppm", "information_minutes", "event_snr"]


def scatter_per_minute_ppm(mag, scatter_ref_ppm, mag_ref):
    """Photometric scatter per minute of data at magnitude ``mag`` (ppm).

    Parameters
    ----------
    mag : array_like
        The star's magnitude in the photometer's reference band (mag).
    scatter_ref_ppm : float
        Scatter per minute of data at ``mag_ref`` (ppm).
    mag_ref : float
        Reference magnitude (mag).
    """
    mag = np.asarray(mag, dtype=float)
    return scatter_ref_ppm * 10.0 ** (0.2 * (mag - mag_ref))


def information_minutes(t14_h, t23_h):
    """Information time of a trapezoidal eclipse, ``T23 + (T14 - T23) / 3`` (minutes).

    A grazing event (``t23_h`` not finite or negative) is a triangle: ``T14 / 3``.

    Parameters
    ----------
    t14_h, t23_h : float or ndarray
        Total and full durations, hours.

    Returns
    -------
    ndarray
        Information time, minutes.
    """
    t14 = np.asarray(t14_h, dtype=float)
    t23 = np.asarray(t23_h, dtype=float)
    t23 = np.where(np.isfinite(t23) & (t23 > 0.0), np.minimum(t23, t14), 0.0)
    return 60.0 * (t23 + (t14 - t23) / 3.0)


def event_snr(depth_ppm, t14_h, t23_h, baseline_h, sigma_1min_ppm):
    """Expected S/N of the depth of one fully observed occultation with baselines.

    Parameters
    ----------
    depth_ppm : array_like
        Occultation depth (ppm).
    t14_h, t23_h : array_like
        Total and full (flat-bottom) occultation durations (hours); ``t23_h`` NaN for a grazing
        event.
    baseline_h : array_like
        Out-of-eclipse baseline on each side (hours).
    sigma_1min_ppm : array_like
        Photometric scatter per minute of data (ppm).

    Returns
    -------
    ndarray
        ``depth / sigma_depth`` (dimensionless); NaN where an input is missing, 0 for a
        non-positive depth or duration.
    """
    depth = np.asarray(depth_ppm, dtype=float)
    t14 = 60.0 * np.asarray(t14_h, dtype=float)
    t23 = np.asarray(t23_h, dtype=float)
    t23 = 60.0 * np.where(np.isfinite(t23) & (t23 > 0.0), np.minimum(t23, t14_h), 0.0)
    info = information_minutes(t14_h, t23_h)
    area = 0.5 * (t14 + t23)
    total = t14 + 120.0 * np.asarray(baseline_h, dtype=float)
    sig = np.asarray(sigma_1min_ppm, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        denom = info - area ** 2 / total
        snr = np.where((denom > 0) & (depth > 0), depth * np.sqrt(np.maximum(denom, 0.0)) / sig, 0.0)
    bad = ~(np.isfinite(depth) & np.isfinite(info) & np.isfinite(total) & np.isfinite(sig))
    return np.where(bad, np.nan, snr)
