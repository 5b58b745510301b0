"""Occultation predictions from posterior samples: timing, occurrence, duration, depth and the
observing windows of every event in a date range (library API, no printing).

For each target the weighted samples (e, omega, P, T0, a/R*, i, k, Teff, R*) give, per sample:
the exact transit-to-occultation offset (physics.kepler), the light-travel delay, whether the
occultation happens, its exact T14 (physics.occultation) and its depth (physics.thermal). Events
of epoch n are t_ref + n P per sample, summarised by physics.windows. Times are BJD_TDB inside;
windows are also given in UTC at the observer, with the barycentric light-travel correction for
the target direction applied through astropy (offline: IERS tables never download).
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from rhofollow.physics.constants import YEAR_D
from rhofollow.physics.kepler import transit_to_occultation_time
from rhofollow.physics.occultation import (eclipse_durations, light_travel_delay, occultation_occurs,
                                  occultation_impact_parameter, separation_at_occultation)
from rhofollow.physics.occultation_snr import event_snr, scatter_per_minute_ppm
from rhofollow.physics.thermal import BAND_MAX_UM, BAND_MIN_UM, occultation_depth, tophat_band
from rhofollow.physics.windows import summarise_events
from rhofollow.core.samples import QUANTILE_LEVELS, SampleSet, quantile_dict, reliability

__all__ = ["CAUTION", "MAX_RANGE_YEARS", "EclipseInputError", "EclipseOptions", "parse_date", "describe_failure",
           "check_band", "bjd_tdb_to_utc", "predict_occultations"]

#: Printed with every plan: the tool advises, the observatory decides.
from rhofollow.stages.records import CAUTION  # noqa: E402  (one caution text for every output)
from rhofollow.errors import InputError

#: Longest date range accepted (years): ephemeris errors grow with the epoch number.
MAX_RANGE_YEARS = 20.0

_DAY_H = 24.0


class EclipseInputError(InputError, ValueError):
    """A bad option value for the occultation predictions (message names the option)."""


@dataclass
class EclipseOptions:
    """Options of :func:`predict_occultations`.

    coverage : probability held by each event's credible region (0.5-0.995).
    band : (center, width) of a top-hat band in microns, used when ``filter_curve`` is None.
    filter_curve : (wavelength_um, response) arrays of a filter transmission curve.
    bond_albedo, redistribution : Cowan & Agol (2011) A_B and epsilon of the day side.
    geometric_albedo : A_g for the reflected light.
    baseline_h : out-of-eclipse baseline before and after the window, hours (None: equal to
        the median occultation duration, at least 1 h).
    location : astropy EarthLocation of the observer (None: the geocentre).
    scatter_ref_ppm, mag_ref : the photometer's scatter per minute of data (ppm) at the reference
        V magnitude; with both given every record gets ``occ_snr``, the expected S/N of one fully
        observed event (:func:`rhofollow.physics.occultation_snr.event_snr`), else ``None``.
    max_duration_samples : the exact durations are computed on at most this many samples
        (an evenly strided subset); timing and depth always use every sample.
    """

    coverage: float = 0.9
    band: tuple = (2.15, 0.32)
    filter_curve: tuple | None = None
    bond_albedo: float = 0.1
    redistribution: float = 0.2
    geometric_albedo: float = 0.1
    baseline_h: float | None = None
    location: object = None
    scatter_ref_ppm: float | None = None
    mag_ref: float | None = None
    max_duration_samples: int = 4000


def parse_date(value, what: str):
    """An astropy Time (UTC) from a string (ISO date or date-time) or a Time; clear error."""
    from astropy.time import Time

    if isinstance(value, Time):
        return value.utc
    try:
        return Time(str(value).strip(), scale="utc")
    except ValueError:
        raise EclipseInputError(f"{what} '{value}' is not a date; use ISO form such as "
                                "2027-03-01 or 2027-03-01T18:00") from None


def check_band(center_um: float, width_um: float) -> None:
    """Refuse a band outside the optical to mid-infrared range of the thermal model."""
    lo, hi = center_um - 0.5 * width_um, center_um + 0.5 * width_um
    if not (np.isfinite(center_um) and np.isfinite(width_um) and width_um > 0):
        raise EclipseInputError(f"band {center_um}:{width_um} needs a finite centre and a "
                                "positive width in microns")
    if lo < BAND_MIN_UM or hi > BAND_MAX_UM:
        raise EclipseInputError(f"band {center_um}:{width_um} micron reaches {lo:g}-{hi:g} "
                                f"micron, outside the supported {BAND_MIN_UM}-{BAND_MAX_UM} micron")


def _check_filter(curve) -> tuple:
    lam = np.asarray(curve[0], dtype=float)
    resp = np.asarray(curve[1], dtype=float)
    if lam.ndim != 1 or lam.shape != resp.shape or lam.size < 2:
        raise EclipseInputError("the filter curve needs two columns of equal length (>= 2 rows)")
    if not (np.all(np.isfinite(lam)) and np.all(np.isfinite(resp))):
        raise EclipseInputError("the filter curve has non-finite values")
    if np.any(np.diff(lam) <= 0):
        raise EclipseInputError("the filter wavelengths must increase strictly")
    if lam[0] < BAND_MIN_UM or lam[-1] > BAND_MAX_UM:
        raise EclipseInputError(f"the filter spans {lam[0]:g}-{lam[-1]:g} micron, outside the "
                                f"supported {BAND_MIN_UM}-{BAND_MAX_UM} micron")
    if np.any(resp < 0) or not np.any(resp > 0):
        raise EclipseInputError("the filter response must be >= 0 and not all zero")
    return lam, resp


def bjd_tdb_to_utc(bjd_tdb, ra_deg, dec_deg, location=None, as_iso=True):
    """Convert barycentric BJD_TDB event times to UTC at the observer.

    Solves t_obs + ltt(t_obs) = BJD_TDB for the observer's time (two fixed-point steps). The
    barycentric correction ltt is the geometry of astropy's ``Time.light_travel_time``
    (astropy's barycentric Earth position plus the site's GCRS position, projected on the
    target direction, over c), evaluated without frame objects for speed and tested against
    it. Then TDB is converted to UTC. Runs offline: IERS auto-download is off; stale or missing
    Earth-orientation data and dubious-year leap-second lookups (dates beyond the installed
    tables) are not fatal (microseconds, or at most a future leap second) and are summarised
    in one notice.

    Parameters
    ----------
    bjd_tdb, ra_deg, dec_deg : arrays broadcast together (days, degrees)
    location : astropy EarthLocation or None (geocentre)

    Returns
    -------
    (iso_utc, notice) : ndarray of ISO 8601 strings ("YYYY-MM-DDTHH:MM:SSZ") and a notice
    string (empty when nothing was degraded). With ``as_iso=False`` the first item is the
    observer's time as a float JD in TDB instead.
    """
    import astropy.units as u
    from astropy.coordinates import get_body_barycentric
    from astropy.time import Time
    from astropy.utils import iers

    bjd, ra, dec = np.broadcast_arrays(np.asarray(bjd_tdb, dtype=float),
                                       np.asarray(ra_deg, dtype=float),
                                       np.asarray(dec_deg, dtype=float))
    if bjd.size == 0:
        return np.array([], dtype=str), ""
    ra_r, dec_r = np.radians(ra.ravel()), np.radians(dec.ravel())
    n_hat = np.array([np.cos(dec_r) * np.cos(ra_r), np.cos(dec_r) * np.sin(ra_r), np.sin(dec_r)])
    c_km_d = 299792.458 * 86400.0
    with iers.conf.set_temp("auto_download", False), \
            iers.conf.set_temp("auto_max_age", None), \
            iers.conf.set_temp("iers_degraded_accuracy", "warn"), \
            warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        bary = bjd.ravel()
        t_obs = bary.copy()
        for _ in range(2):
            # Same geometry as astropy's Time.light_travel_time(kind="barycentric"): the
            # observer's barycentric position (Earth + site in GCRS axes) projected on the
            # target direction, divided by c. Done without frame objects for speed.
            t = Time(t_obs, format="jd", scale="tdb")
            pos = get_body_barycentric("earth", t).xyz.to_value(u.km)
            if location is not None:
                pos = pos + location.get_gcrs_posvel(t)[0].xyz.to_value(u.km)
            t_obs = bary - np.sum(pos * n_hat, axis=0) / c_km_d
        if not as_iso:
            return t_obs.reshape(bjd.shape), _notice(caught)
        t_utc = Time(t_obs, format="jd", scale="tdb").utc
        iso = np.char.add(t_utc.strftime("%Y-%m-%dT%H:%M:%S").astype(str), "Z")
    return iso.reshape(bjd.shape), _notice(caught)


def _notice(caught) -> str:
    """The run's one notice about dates past the installed tables ("" if none, or already given)."""
    if not caught:
        return ""
    from rhofollow.core import timescales as offline
    with offline._LOCK:
        if offline._STATE["notice_given"]:
            return ""
        offline._STATE["notice_given"] = True
    return ("some times lie beyond the installed Earth-orientation or leap-second tables "
            "(no download attempted); UTC is extrapolated and may be off by a leap second")

def describe_failure(exc: BaseException) -> str:
    """One line naming an unexpected exception (its type and first message line)."""
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


def _as_items(items):
    """Normalise assessments / SampleSets to (name, ok, errors, warnings, samples, target)."""
    out = []
    for it in items:
        if isinstance(it, SampleSet):
            out.append((it.name, True, [], [], it, None))
        else:
            out.append((it.name, bool(it.ok), list(it.errors), list(it.warnings),
                        getattr(it, "samples", None), getattr(it, "target", None)))
    return out


def _epoch_error_warnings(s: SampleSet, target) -> list[str]:
    msgs = []
    for col, key in (("t0", "t0_bjd"), ("period", "period_d")):
        m = target.get(key) if target is not None else None
        if m is not None:
            missing = not m.has_error
        else:
            missing = float(np.ptp(getattr(s, col))) == 0.0
        if missing:
            msgs.append(f"{key} has no uncertainty: treated as exact (error zero), so the windows "
                        "hold only the orbit uncertainty")
    return msgs


def _radec(s: SampleSet, target):
    ra = s.meta.get("ra_deg")
    dec = s.meta.get("dec_deg")
    if (ra is None or dec is None) and target is not None:
        ra, dec = target.value("ra_deg"), target.value("dec_deg")
    try:
        ra, dec = float(ra), float(dec)
    except (TypeError, ValueError):
        return None
    return (ra, dec) if np.isfinite(ra) and np.isfinite(dec) else None


def _empty_q():
    return {k: None for k in QUANTILE_LEVELS}


def _target_record(s: SampleSet, target, opts, start_bjd, end_bjd, lam, resp):
    """The record of one target, BJD_TDB only (UTC is added in one batch afterwards)."""
    warn = _epoch_error_warnings(s, target)
    w = s.weights
    occ = occultation_occurs(s.a_rs, s.inc, s.e, s.omega, s.k)
    p_occ = min(1.0, float(np.sum(w * occ)))   # a probability: no rounding above 1
    rec = {"p_occultation": p_occ, "n_samples": s.n, "ess": s.ess}
    rec["reliable"], why = reliability(s.ess)
    if not rec["reliable"]:
        rec["reliability_note"] = why
    if not p_occ > 0.0:
        warn.append("no posterior sample gives an occultation (the planet always passes outside "
                    "the stellar disc): no events listed")
        rec.update(occ_phase=_empty_q(), occ_duration_h=_empty_q(), occ_full_duration_h=_empty_q(),
                   b_occ=_empty_q(), depth_ppm=_empty_q(), events=[])
        return rec, warn
    if p_occ < 0.99:
        warn.append(f"the occultation is missed in {100 * (1 - p_occ):.1f}% of the posterior "
                    "(grazing or passing outside the disc); timing and depth are for the rest")
    i = np.flatnonzero(occ)
    wi = w[i] / w[i].sum()
    e, om, per, a_rs, inc, k = s.e[i], s.omega[i], s.period[i], s.a_rs[i], s.inc[i], s.k[i]
    dt = transit_to_occultation_time(per, e, om)
    ltt = light_travel_delay(a_rs, s.rstar[i], inc, e, om)
    lt_ok = np.isfinite(ltt)
    if not lt_ok.all():
        warn.append("stellar radius unknown for some samples: light-travel delay left out there")
        ltt = np.where(lt_ok, ltt, 0.0)
    t_ref = s.t0[i] + dt + ltt
    # Durations: exact root-finding, on an evenly strided subset when the set is large (the
    # samples are independent draws, so a stride is a fair, deterministic subsample).
    sub = np.unique(np.linspace(0, i.size - 1, min(i.size, opts.max_duration_samples)).astype(int))
    t14, t23 = eclipse_durations(per[sub], a_rs[sub], inc[sub], e[sub], om[sub], k[sub],
                                 "occultation")
    wsub = wi[sub]
    ok14 = np.isfinite(t14)
    bad_frac = 1.0 - wsub[ok14].sum() / wsub.sum()
    if 0.001 <= bad_frac < 1.0:
        warn.append(f"{100 * bad_frac:.1f}% of the occulting samples have orbits that graze the "
                    "star at periastron: no duration for them")
    rec["occ_phase"] = quantile_dict((dt + ltt) / per, wi)
    rec["occ_offset_d"] = quantile_dict(dt + ltt, wi)
    rec["occ_duration_h"] = quantile_dict(t14[ok14], wsub[ok14], _DAY_H)
    full = np.isfinite(t23)
    rec["occ_full_duration_h"] = (quantile_dict(t23[full], wsub[full], _DAY_H) if full.any()
                                  else _empty_q())
    if rec["occ_duration_h"]["q50"] is None:
        # Every occulting orbit grazes the star at periastron (for example a posterior piled up at
        # e ~ 0.99 on a short period): no duration, so no window can be drawn around the events.
        warn.append("no occulting sample has an occultation duration (every such orbit grazes the "
                    "star at periastron): duration, depth and windows not available")
        rec.update(b_occ=quantile_dict(occultation_impact_parameter(a_rs, inc, e, om), wi),
                   depth_ppm=_empty_q(), events=[])
        return rec, warn
    rec["b_occ"] = quantile_dict(occultation_impact_parameter(a_rs, inc, e, om), wi)
    rec["light_travel_s"] = float(np.sum(wi * ltt) * 86400.0)
    teff = s.teff[i]
    if np.all(np.isfinite(teff)) and np.all(teff > 0):
        r_occ = separation_at_occultation(a_rs, e, om)
        depth = occultation_depth(k, teff, r_occ, lam, resp, opts.bond_albedo,
                                  opts.redistribution, opts.geometric_albedo)
        rec["depth_ppm"] = quantile_dict(depth, wi, 1e6)
    else:
        warn.append("stellar Teff unknown: occultation depth not computed")
        rec["depth_ppm"] = _empty_q()
    dur_med = float(rec["occ_duration_h"]["q50"]) / _DAY_H
    base = max(dur_med, 1.0 / _DAY_H) if opts.baseline_h is None else opts.baseline_h / _DAY_H
    rec["window_pad_h"] = (0.5 * dur_med + base) * _DAY_H
    rec["occ_snr"], why = _expected_snr(rec, s, opts, base * _DAY_H)
    if why:
        rec["occ_snr_note"] = why
    events = summarise_events(t_ref, per, wi, start_bjd, end_bjd, prob=opts.coverage,
                              pad=0.5 * dur_med + base, merge_gap=dur_med)
    rec["events"] = [{
        "epoch": ev.epoch,
        "mid_bjd_tdb": {k2: float(v) for k2, v in zip(QUANTILE_LEVELS, ev.quantiles)},
        "region_bjd_tdb": [[float(a), float(b)] for a, b in ev.region],
        "window_bjd_tdb": [[float(a), float(b)] for a, b in ev.window],
    } for ev in events]
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


def predict_occultations(items, start, end, options: EclipseOptions | None = None) -> dict:
    """Occultation predictions for every target, with the events between ``start`` and ``end``.

    Parameters
    ----------
    items : iterable of assessments (objects with ``name, ok, errors, warnings, samples,
        target``) or of :class:`~rhofollow.core.samples.SampleSet`.
    start, end : str or astropy Time (UTC): the date range; at most 20 years.
    options : :class:`EclipseOptions`

    Returns
    -------
    dict with ``targets`` (one record per item: ``name, ok, errors, warnings, p_occultation,
    occ_phase, occ_duration_h, depth_ppm, events``; quantile objects q025..q975; every event
    has ``epoch, mid_bjd_tdb, mid_utc, window_utc, window_bjd_tdb``), the range, the options
    used, the caution text and ``notices`` (run-level messages). ``occ_phase`` is the observed
    transit-to-occultation time over the period (phase 0 = transit), light-travel delay
    included; timing, duration and depth are conditional on the occultation happening
    (probability ``p_occultation``). Extra keys: ``occ_offset_d``, ``occ_full_duration_h``,
    ``b_occ``, ``light_travel_s``, ``window_pad_h``, ``n_samples``, ``ess`` and per event
    ``region_bjd_tdb`` (the credible region before widening).

    Raises
    ------
    EclipseInputError
        End before start, range over 20 years, coverage outside 0.5-0.995, bad band or filter.
    """
    opts = options or EclipseOptions()
    with warnings.catch_warnings():
        # Dates beyond the installed leap-second table: the UTC conversion reports it once.
        warnings.simplefilter("ignore")
        t_start, t_end = parse_date(start, "start date"), parse_date(end, "end date")
        span = (t_end - t_start).to_value("day")
        start_tdb, end_tdb = float(t_start.tdb.jd), float(t_end.tdb.jd)
        start_iso, end_iso = t_start.isot, t_end.isot
    if not span > 0:
        raise EclipseInputError(f"end date {end_iso[:16]} is not after start date "
                                f"{start_iso[:16]}")
    if span > MAX_RANGE_YEARS * YEAR_D:
        raise EclipseInputError(f"date range of {span / YEAR_D:.1f} years is longer than the "
                                f"{MAX_RANGE_YEARS:g} years allowed (ephemeris errors grow with "
                                "every epoch); split it or shorten it")
    if not (0.5 <= opts.coverage <= 0.995):
        raise EclipseInputError(f"coverage {opts.coverage} must lie between 0.5 and 0.995")
    if opts.filter_curve is not None:
        lam, resp = _check_filter(opts.filter_curve)
        band_desc = {"filter": True, "min_um": float(lam[0]), "max_um": float(lam[-1])}
    else:
        check_band(*opts.band)
        lam, resp = tophat_band(*opts.band)
        band_desc = {"center_um": float(opts.band[0]), "width_um": float(opts.band[1])}
    # BJD_TDB of the range ends: TDB of the UTC dates; the <= 8.3 min barycentric shift is
    # covered because events are kept when their window overlaps the range +- 1 day.
    start_bjd = start_tdb - 1.0
    end_bjd = end_tdb + 1.0

    records, to_convert = [], []
    for name, ok, errors, warns, s, target in _as_items(items):
        rec = {"name": name, "ok": ok, "errors": list(errors), "warnings": list(warns)}
        if not ok or s is None:
            rec["ok"] = False
            if not rec["errors"]:
                rec["errors"].append("no posterior samples for this target")
            rec["events"] = []
            records.append(rec)
            continue
        try:
            body, extra = _target_record(s, target, opts, start_bjd, end_bjd, lam, resp)
        except Exception as exc:  # noqa: BLE001 - contain one target's failure to that target
            rec.update(ok=False, events=[])
            rec["errors"].append(f"occultation prediction failed for this target: {describe_failure(exc)}")
            records.append(rec)
            continue
        rec["warnings"].extend(extra)
        rec.update(body)
        radec = _radec(s, target)
        if radec is None and rec["events"]:
            rec["warnings"].append("ra_deg/dec_deg missing: windows given in BJD_TDB only "
                                   "(UTC needs the target direction)")
        # Keep only events whose window overlaps the requested range itself.
        lo_r, hi_r = start_bjd + 1.0, end_bjd - 1.0
        rec["events"] = [ev for ev in rec["events"]
                         if ev["window_bjd_tdb"][-1][1] >= lo_r - 0.01
                         and ev["window_bjd_tdb"][0][0] <= hi_r + 0.01]
        if radec is not None:
            to_convert.append((rec, radec))
        records.append(rec)

    try:
        notices = _add_utc(to_convert, opts.location)
    except Exception:  # noqa: BLE001 - find the target(s) whose times cannot be converted
        notices = []
        for rec, radec in to_convert:
            try:
                notices += [n for n in _add_utc([(rec, radec)], opts.location) if n not in notices]
            except Exception as exc:  # noqa: BLE001
                rec.update(ok=False, events=[])
                rec["errors"].append("occultation times could not be converted to UTC: "
                                     f"{describe_failure(exc)}")
    return {
        "start_utc": start_iso, "end_utc": end_iso, "coverage": opts.coverage,
        "band": band_desc, "bond_albedo": opts.bond_albedo,
        "redistribution": opts.redistribution, "geometric_albedo": opts.geometric_albedo,
        "caution": CAUTION, "notices": notices, "targets": records,
    }


def _add_utc(to_convert, location) -> list[str]:
    """Add ``window_utc`` and ``mid_utc`` to every event in one astropy call."""
    times, ras, decs, slots = [], [], [], []
    for rec, (ra, dec) in to_convert:
        for ev in rec["events"]:
            flat = [ev["mid_bjd_tdb"]["q50"]] + [t for w in ev["window_bjd_tdb"] for t in w]
            slots.append((ev, len(flat)))
            times.extend(flat)
            ras.extend([ra] * len(flat))
            decs.extend([dec] * len(flat))
    if not times:
        return []
    iso, notice = bjd_tdb_to_utc(times, ras, decs, location)
    pos = 0
    for ev, n in slots:
        vals = list(iso[pos:pos + n])
        pos += n
        ev["mid_utc"] = vals[0]
        ev["window_utc"] = [[vals[1 + 2 * j], vals[2 + 2 * j]] for j in range((n - 1) // 2)]
    return [notice] if notice else []


