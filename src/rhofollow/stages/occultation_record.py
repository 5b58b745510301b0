"""The occultation record of one target from its posterior samples (BJD_TDB only; no printing).

Part of :mod:`rhofollow.stages.occultations`, in the order the record is built: whether the
occultation happens (:func:`rhofollow.physics.occultation.occultation_occurs`), its timing (the exact
transit-to-occultation offset plus the light-travel delay), its exact durations, its depth and expected
S/N, and the events of the date range (:func:`rhofollow.physics.windows.summarise_events`). UTC is
added afterwards, in one batch for every target.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rhofollow.core.samples import QUANTILE_LEVELS, SampleSet, quantile_dict, reliability
from rhofollow.core.types import Notice
from rhofollow.physics.kepler import transit_to_occultation_time
from rhofollow.physics.occultation import (eclipse_durations, light_travel_delay, occultation_impact_parameter,
                                           occultation_occurs, separation_at_occultation)
from rhofollow.physics.occultation_snr import event_snr, scatter_per_minute_ppm
from rhofollow.physics.thermal import occultation_depth
from rhofollow.physics.windows import summarise_events

__all__ = ["target_record"]

_DAY_H = 24.0


def _epoch_error_warnings(s: SampleSet, target) -> list[Notice]:
    msgs = []
    for col, key in (("t0", "t0_bjd"), ("period", "period_d")):
        m = target.get(key) if target is not None else None
        if m is not None:
            missing = not m.has_error
        else:
            missing = float(np.ptp(getattr(s, col))) == 0.0
        if missing:
            msgs.append(Notice(f"{key} has no uncertainty: treated as exact (error zero), so the windows "
                               "hold only the orbit uncertainty", "assumed", s.name))
    return msgs


def _empty_q():
    return {k: None for k in QUANTILE_LEVELS}


@dataclass
class _Occulting:
    """The samples that occult, with their normalised weights and timing (days)."""

    name: str            # the target
    i: np.ndarray        # indices into the SampleSet
    wi: np.ndarray       # weights, sum 1
    e: np.ndarray
    om: np.ndarray       # radians
    per: np.ndarray      # days
    a_rs: np.ndarray
    inc: np.ndarray      # radians
    k: np.ndarray
    dt: np.ndarray       # transit-to-occultation offset, days
    ltt: np.ndarray      # light-travel delay, days
    t_ref: np.ndarray    # a reference occultation time, BJD_TDB


def _timing(s: SampleSet, occ: np.ndarray, warn: list) -> _Occulting:
    """Offsets and reference times of the occulting samples (light-travel delay where R* is known)."""
    i = np.flatnonzero(occ)
    w = s.weights
    wi = w[i] / w[i].sum()
    e, om, per, a_rs, inc, k = s.e[i], s.omega[i], s.period[i], s.a_rs[i], s.inc[i], s.k[i]
    dt = transit_to_occultation_time(per, e, om)
    ltt = light_travel_delay(a_rs, s.rstar[i], inc, e, om)
    lt_ok = np.isfinite(ltt)
    if not lt_ok.all():
        warn.append(Notice("stellar radius unknown for some samples: light-travel delay left out there",
                           "occultation", s.name))
        ltt = np.where(lt_ok, ltt, 0.0)
    return _Occulting(s.name, i, wi, e, om, per, a_rs, inc, k, dt, ltt, s.t0[i] + dt + ltt)


def _durations(o: _Occulting, opts, rec: dict, warn: list) -> None:
    """Phase, offset and exact durations (hours) into ``rec``."""
    # Durations: exact root-finding, on an evenly strided subset when the set is large (the
    # samples are independent draws, so a stride is a fair, deterministic subsample).
    sub = np.unique(np.linspace(0, o.i.size - 1, min(o.i.size, opts.max_duration_samples)).astype(int))
    t14, t23 = eclipse_durations(o.per[sub], o.a_rs[sub], o.inc[sub], o.e[sub], o.om[sub], o.k[sub],
                                 "occultation")
    wsub = o.wi[sub]
    ok14 = np.isfinite(t14)
    bad_frac = 1.0 - wsub[ok14].sum() / wsub.sum()
    if 0.001 <= bad_frac < 1.0:
        warn.append(Notice(f"{100 * bad_frac:.1f}% of the occulting samples have orbits that graze the "
                           "star at periastron: no duration for them", "occultation", o.name))
    rec["occ_phase"] = quantile_dict((o.dt + o.ltt) / o.per, o.wi)
    rec["occ_offset_d"] = quantile_dict(o.dt + o.ltt, o.wi)
    rec["occ_duration_h"] = quantile_dict(t14[ok14], wsub[ok14], _DAY_H)
    full = np.isfinite(t23)
    rec["occ_full_duration_h"] = (quantile_dict(t23[full], wsub[full], _DAY_H) if full.any()
                                  else _empty_q())


def _depth(s: SampleSet, o: _Occulting, opts, lam, resp, warn: list) -> dict:
    """Quantiles of the occultation depth (ppm) in the band; empty without the stellar Teff."""
    teff = s.teff[o.i]
    if np.all(np.isfinite(teff)) and np.all(teff > 0):
        r_occ = separation_at_occultation(o.a_rs, o.e, o.om)
        depth = occultation_depth(o.k, teff, r_occ, lam, resp, opts.bond_albedo,
                                  opts.redistribution, opts.geometric_albedo)
        return quantile_dict(depth, o.wi, 1e6)
    warn.append(Notice("stellar Teff unknown: occultation depth not computed", "occultation", s.name))
    return _empty_q()


def _events(o: _Occulting, opts, start_bjd: float, end_bjd: float, pad: float, merge_gap: float) -> list:
    """The events of the range: epoch, mid-time quantiles, credible regions and windows (BJD_TDB)."""
    events = summarise_events(o.t_ref, o.per, o.wi, start_bjd, end_bjd, prob=opts.coverage,
                              pad=pad, merge_gap=merge_gap)
    return [{
        "epoch": ev.epoch,
        "mid_bjd_tdb": {k2: float(v) for k2, v in zip(QUANTILE_LEVELS, ev.quantiles)},
        "region_bjd_tdb": [[float(a), float(b)] for a, b in ev.region],
        "window_bjd_tdb": [[float(a), float(b)] for a, b in ev.window],
    } for ev in events]


def target_record(s: SampleSet, target, opts, start_bjd: float, end_bjd: float, lam, resp) -> tuple[dict, list]:
    """The occultation record of one target, BJD_TDB only (UTC is added in one batch afterwards).

    Parameters
    ----------
    s : SampleSet
        The target's weighted posterior (days, radians, Rsun, K).
    target : Target or None
        The catalogue row (tells whether the epoch and period had errors), when known.
    opts : EclipseOptions
        Coverage, albedos, baseline (hours), photometer precision and the duration subset size.
    start_bjd, end_bjd : float
        The range of events to list, BJD_TDB (days).
    lam, resp : ndarray
        The band: wavelengths (microns) and response.

    Returns
    -------
    rec : dict
        ``p_occultation``, phase, offset (days), durations (hours), ``b_occ``, depth (ppm), window
        padding (hours), expected S/N and ``events`` (BJD_TDB).
    warn : list of str
        The target's warnings from this stage.
    """
    warn = _epoch_error_warnings(s, target)
    occ = occultation_occurs(s.a_rs, s.inc, s.e, s.omega, s.k)
    p_occ = min(1.0, float(np.sum(s.weights * occ)))   # a probability: no rounding above 1
    rec = {"p_occultation": p_occ, "n_samples": s.n, "ess": s.ess}
    rec["reliable"], why = reliability(s.ess)
    if not rec["reliable"]:
        rec["reliability_note"] = why
    if not p_occ > 0.0:
        warn.append(Notice("no posterior sample gives an occultation (the planet always passes outside "
                           "the stellar disc): no events listed", "occultation", s.name))
        rec.update(occ_phase=_empty_q(), occ_duration_h=_empty_q(), occ_full_duration_h=_empty_q(),
                   b_occ=_empty_q(), depth_ppm=_empty_q(), events=[])
        return rec, warn
    if p_occ < 0.99:
        warn.append(Notice(f"the occultation is missed in {100 * (1 - p_occ):.1f}% of the posterior "
                           "(grazing or passing outside the disc); timing and depth are for the rest",
                           "occultation", s.name))
    o = _timing(s, occ, warn)
    _durations(o, opts, rec, warn)
    rec["b_occ"] = quantile_dict(occultation_impact_parameter(o.a_rs, o.inc, o.e, o.om), o.wi)
    if rec["occ_duration_h"]["q50"] is None:
        # Every occulting orbit grazes the star at periastron (for example a posterior piled up at
        # e ~ 0.99 on a short period): no duration, so no window can be drawn around the events.
        warn.append(Notice("no occulting sample has an occultation duration (every such orbit grazes the "
                           "star at periastron): duration, depth and windows not available", "occultation",
                           s.name))
        rec.update(depth_ppm=_empty_q(), events=[])
        return rec, warn
    rec["light_travel_s"] = float(np.sum(o.wi * o.ltt) * 86400.0)
    rec["depth_ppm"] = _depth(s, o, opts, lam, resp, warn)
    dur_med = float(rec["occ_duration_h"]["q50"]) / _DAY_H
    base = max(dur_med, 1.0 / _DAY_H) if opts.baseline_h is None else opts.baseline_h / _DAY_H
    rec["window_pad_h"] = (0.5 * dur_med + base) * _DAY_H
    rec["occ_snr"], why = _expected_snr(rec, s, opts, base * _DAY_H)
    if why:
        rec["occ_snr_note"] = why
    rec["events"] = _events(o, opts, start_bjd, end_bjd, 0.5 * dur_med + base, dur_med)
    return rec, warn


def _expected_snr(rec: dict, s: SampleSet, opts, baseline_h: float):
    """(S/N of one fully observed event at the median depth and durations, reason if None)."""
    if opts.scatter_ref_ppm is None or opts.mag_ref is None:
        return None, "no photometer precision model (precision_ref_ppm, vmag_ref): S/N not computed"
    depth = rec["depth_ppm"].get("q50")
    if depth is None:
        return None, "occultation depth not computed: S/N not computed"
    try:
        vmag = float(s.meta.get("vmag"))
    except (TypeError, ValueError):
        vmag = math.nan
    if not math.isfinite(vmag):
        return None, "no V magnitude (catalogue column 'vmag'): S/N not computed"
    t23 = rec["occ_full_duration_h"].get("q50")
    sigma = scatter_per_minute_ppm(vmag, opts.scatter_ref_ppm, opts.mag_ref)
    snr = event_snr(depth, rec["occ_duration_h"]["q50"], math.nan if t23 is None else t23,
                    baseline_h, sigma)
    return round(float(snr), 3), ""
