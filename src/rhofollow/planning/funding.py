"""The funding rule of occultation blocks: is one observed event likely enough to be detected?

A block is funded when the expected S/N of one fully observed occultation (the record's
``occ_snr``, from :mod:`rhofollow.physics.occultation_snr`) times the probability that the block
catches the whole event reaches :attr:`~rhofollow.planning.values.ValueModel.min_occ_snr`. The catch
probability is read off the event's mid-time quantiles (a piecewise-linear CDF between q025 and
q975, BJD_TDB). Pure numerics on the plain record dicts of the occultation stage, no I/O.
"""
from __future__ import annotations

import numpy as np

from rhofollow.planning.values import ValueModel, record_number

__all__ = ["mid_time_cdf", "whole_catch_probability", "funding_refusal"]

_QUANTILE_KEYS = ["q025", "q16", "q50", "q84", "q975"]
_QUANTILE_LEVELS = [0.025, 0.16, 0.5, 0.84, 0.975]


def mid_time_cdf(ev: dict, x_bjd) -> np.ndarray:
    """Piecewise-linear CDF of an event's mid-time from its quantiles (tails clamped to 0 and 1).

    Parameters
    ----------
    ev : dict
        One event of an occultation record; ``mid_bjd_tdb`` holds the quantiles q025, q16, q50,
        q84, q975 (BJD_TDB, days).
    x_bjd : float or array
        Times at which to evaluate the CDF (BJD_TDB, days).

    Returns
    -------
    ndarray
        Probability (0..1) that the mid-time is at or before each time; NaN everywhere when the
        quantiles are missing, not finite or not increasing.
    """
    q = ev.get("mid_bjd_tdb") or {}
    xs = np.array([record_number(q.get(k)) for k in _QUANTILE_KEYS])
    if not np.all(np.isfinite(xs)) or np.any(np.diff(xs) < 0):
        return np.full(np.shape(x_bjd), np.nan)
    return np.interp(x_bjd, xs, _QUANTILE_LEVELS, left=0.0, right=1.0)


def whole_catch_probability(record: dict, ev: dict, k: int, mass: float) -> float:
    """Probability that the event's mid-time lies where window ``k`` holds the whole event.

    The window is the credible region widened by ``window_pad_h`` (half the duration plus the
    baseline) on each side, so the mid-time must fall inside the window shrunk by that pad.

    Parameters
    ----------
    record : dict
        Occultation record; ``window_pad_h`` (hours) is read.
    ev : dict
        The event: ``window_bjd_tdb`` ``[[start, end], ...]`` (BJD_TDB, days) and its mid-time
        quantiles (:func:`mid_time_cdf`).
    k : int
        Index of the window within the event.
    mass : float
        The window's share of the timing posterior (probability), the fallback.

    Returns
    -------
    float
        Probability (0..1); ``mass`` when the record lacks the BJD window, the pad or usable
        quantiles.
    """
    pad = record_number(record.get("window_pad_h")) / 24.0
    try:
        w0, w1 = (float(x) for x in ev["window_bjd_tdb"][k])
    except (IndexError, KeyError, TypeError, ValueError):
        return mass
    if not np.isfinite(pad):
        return mass
    p = float(np.diff(mid_time_cdf(ev, np.array([w0 + pad, w1 - pad])))[0]) if w1 - w0 > 2 * pad else 0.0
    return p if np.isfinite(p) else mass


def funding_refusal(record: dict, p_catch: float, model: ValueModel) -> str:
    """The reason an occultation block is not funded, or "" when it passes the S/N rule.

    Parameters
    ----------
    record : dict
        Occultation record: ``occ_snr`` (expected S/N of one fully observed event, dimensionless,
        None when not computed) and ``occ_snr_note`` (why not). A record without the ``occ_snr``
        key (built by hand) is not checked.
    p_catch : float
        Probability that the block catches the whole event (occurrence included, 0..1).
    model : ValueModel
        Gives ``min_occ_snr``.

    Returns
    -------
    str
        "" when funded, else a sentence starting "not funded: ".
    """
    if "occ_snr" not in record:  # a hand-built record: no detectability check asked for
        return ""
    snr = record["occ_snr"]
    if snr is None:
        note = record.get("occ_snr_note") or "expected S/N not computed"
        return f"not funded: {note}"
    score = float(snr) * p_catch
    if not score >= model.min_occ_snr:
        return (f"not funded: expected S/N {float(snr):.1f} × catch probability {p_catch:.2f} = "
                f"{score:.1f}, below {model.min_occ_snr:g}")
    return ""
