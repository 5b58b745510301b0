"""Occultation predictions from posterior samples: timing, occurrence, duration, depth and the
observing windows of every event in a date range (library API, no printing).

For each target the weighted samples (e, omega, P, T0, a/R*, i, k, Teff, R*) give, per sample:
the exact transit-to-occultation offset (physics.kepler), the light-travel delay, whether the
occultation happens, its exact T14 (physics.occultation) and its depth (physics.thermal). Events
of epoch n are t_ref + n P per sample, summarised by physics.windows. Times are BJD_TDB inside;
windows are also given in UTC at the observer, with the barycentric light-travel correction for
the target direction applied through astropy (offline: IERS tables never download).

The steps live in :mod:`rhofollow.stages.occultation_options` (options, date range, band) and
:mod:`rhofollow.stages.occultation_record` (one target's record in BJD_TDB); this module runs them over
every target and adds UTC in one batch. Their public names stay importable from here.
"""
from __future__ import annotations

import numpy as np

from rhofollow.core.samples import SampleSet
from rhofollow.core.timescales import TABLES_NOTICE, beyond_tables
from rhofollow.core.timescales import bjd_tdb_to_utc  # the time helpers' home (importable from here)
from rhofollow.stages.occultation_options import (MAX_RANGE_YEARS, EclipseInputError, EclipseOptions,
                                                  band_response, check_band, check_range, parse_date)
from rhofollow.stages.occultation_record import target_record as _target_record
from rhofollow.stages.records import CAUTION  # one caution text for every output

__all__ = ["CAUTION", "MAX_RANGE_YEARS", "EclipseInputError", "EclipseOptions", "parse_date", "describe_failure",
           "check_band", "bjd_tdb_to_utc", "predict_occultations"]


def describe_failure(exc: BaseException) -> str:
    """One line naming an unexpected exception (its type and first message line).

    Parameters
    ----------
    exc : BaseException
        The exception.

    Returns
    -------
    str
        ``"Type: first line"``, or the type alone for an empty message.
    """
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
    start_tdb, end_tdb, start_iso, end_iso, end_jd = check_range(start, end)
    if not (0.5 <= opts.coverage <= 0.995):
        raise EclipseInputError(f"coverage {opts.coverage} must lie between 0.5 and 0.995")
    lam, resp, band_desc = band_response(opts)
    # BJD_TDB of the range ends: TDB of the UTC dates; the <= 8.3 min barycentric shift is
    # covered because events are kept when their window overlaps the range +- 1 day.
    start_bjd = start_tdb - 1.0
    end_bjd = end_tdb + 1.0

    records, to_convert = [], []
    for item in _as_items(items):
        rec, radec = _item_record(item, opts, start_bjd, end_bjd, lam, resp)
        if radec is not None:
            to_convert.append((rec, radec))
        records.append(rec)
    notices = _convert_all(to_convert, opts.location)
    if TABLES_NOTICE not in notices and beyond_tables(end_jd):
        # the range itself is past the tables (every planner's visibility of it is extrapolated)
        notices.append(TABLES_NOTICE)
    return {
        "start_utc": start_iso, "end_utc": end_iso, "coverage": opts.coverage,
        "band": band_desc, "bond_albedo": opts.bond_albedo,
        "redistribution": opts.redistribution, "geometric_albedo": opts.geometric_albedo,
        "caution": CAUTION, "notices": notices, "targets": records,
    }


def _item_record(item, opts, start_bjd, end_bjd, lam, resp):
    """(record of one item, its (ra, dec) in degrees when its events need UTC, else None)."""
    name, ok, errors, warns, s, target = item
    rec = {"name": name, "ok": ok, "errors": list(errors), "warnings": list(warns)}
    if not ok or s is None:
        rec["ok"] = False
        if not rec["errors"]:
            rec["errors"].append("no posterior samples for this target")
        rec["events"] = []
        return rec, None
    try:
        body, extra = _target_record(s, target, opts, start_bjd, end_bjd, lam, resp)
    except Exception as exc:  # noqa: BLE001 - contain one target's failure to that target
        rec.update(ok=False, events=[])
        rec["errors"].append(f"occultation prediction failed for this target: {describe_failure(exc)}")
        return rec, None
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
    return rec, radec


def _convert_all(to_convert, location) -> list[str]:
    """UTC for every event of every target in one batch; a target whose times fail alone fails."""
    try:
        return _add_utc(to_convert, location)
    except Exception:  # noqa: BLE001 - find the target(s) whose times cannot be converted
        notices = []
        for rec, radec in to_convert:
            try:
                notices += [n for n in _add_utc([(rec, radec)], location) if n not in notices]
            except Exception as exc:  # noqa: BLE001
                rec.update(ok=False, events=[])
                rec["errors"].append("occultation times could not be converted to UTC: "
                                     f"{describe_failure(exc)}")
        return notices


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
