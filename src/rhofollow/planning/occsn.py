"""Occultation windows that can pay off: expected S/N of the event and the chance a window catches it.

For each occultation window of a target (:mod:`rhofollow.eclipses` events):

* the expected S/N of the event from the photometer's precision model: scatter per minute of data
  ``s(V) = precision_ref_ppm 10^(0.2 (V - V_ref))`` (photon-noise scaling with the star's flux),
  depth error ``sigma_d = s sqrt(1/T_in + 1/T_out)`` with ``T_in`` the occultation duration and
  ``T_out`` the two baselines (minutes; the difference of two means, common practice, no source),
  and ``S/N = depth / sigma_d`` at the median depth and duration;
* the catch probability ``p_occultation x P(mid-time in this window's region)``, read off the event's
  mid-time quantiles (piecewise-linear CDF, as in :mod:`.tasks`);
* the window is funded (offered to the planners) when ``S/N x catch >= MIN_SN_CATCH`` (3: a 3-sigma
  event expected; common practice, no source). Windows left out are listed with the reason; a target
  without a computed depth (for example no Teff) or without a V magnitude gets no window.

:func:`screen_occultations` works on the science dicts (copies of the occultation records: the
records themselves keep every window for the report).
"""
from __future__ import annotations

import math

import numpy as np

from .tasks import _mid_cdf, _num

__all__ = ["MIN_SN_CATCH", "occultation_snr", "screen_occultations"]

#: Smallest expected S/N x catch probability of a funded occultation window.
MIN_SN_CATCH = 3.0


def occultation_snr(depth_ppm, vmag, precision_ref_ppm, vmag_ref, duration_h, baseline_h):
    """Expected S/N of one occultation (see the module docstring; ppm, mag, hours)."""
    depth = np.asarray(depth_ppm, float)
    s = np.asarray(precision_ref_ppm, float) * 10.0 ** (0.2 * (np.asarray(vmag, float) - vmag_ref))
    t_in = 60.0 * np.asarray(duration_h, float)
    t_out = 2.0 * 60.0 * np.asarray(baseline_h, float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return depth / (s * np.sqrt(1.0 / t_in + 1.0 / t_out))


def screen_occultations(assessments, science: list[dict], phot, min_value: float = MIN_SN_CATCH) -> list[str]:
    """Keep only the occultation windows whose expected S/N x catch probability passes ``min_value``.

    Each science dict's ``occultation`` becomes a copy with the funded windows only (``None`` when
    none is funded); its events carry ``snr`` and ``window_p_catch``; ``occ_screen`` in the science
    dict lists ``{"epoch", "window_utc", "snr", "p_catch", "reason"}`` for every window left out, and
    ``occ_notes`` one sentence per target. Returns run-level notices (none when every photometer
    number is known).
    """
    if phot is None or not math.isfinite(getattr(phot, "precision_ref_ppm", math.nan)) \
            or not math.isfinite(getattr(phot, "vmag_ref", math.nan)):
        return ["the photometer has no precision model (precision_ref_ppm, vmag_ref): occultation windows "
                "are not screened by S/N"]
    vm = {a.name: (a.samples.meta.get("vmag") if getattr(a, "samples", None) is not None else None)
          for a in assessments}
    for entry in science:
        occ = entry.get("occultation")
        if not occ:
            continue
        depth = _num(occ.get("depth_ppm"))
        dur = _num(occ.get("occ_duration_h"))
        v = vm.get(entry["name"])
        v = float(v) if v is not None and np.isfinite(v) else math.nan
        p_occ = _num(occ.get("p_occultation"), 1.0)
        why_all = None
        if not np.isfinite(depth):
            why_all = "occultation depth not computed (needs Teff and the planet's size)"
        elif not np.isfinite(v):
            why_all = "no V magnitude: the photometric precision is unknown"
        elif not (np.isfinite(dur) and dur > 0):
            why_all = "occultation duration not computed"
        snr = math.nan if why_all else float(occultation_snr(depth, v, phot.precision_ref_ppm, phot.vmag_ref,
                                                             dur, phot.baseline_h))
        left, events = [], []
        for ev in occ.get("events") or []:
            regions = ev.get("region_bjd_tdb") or []
            wins = ev.get("window_utc") or []
            keep = []
            for k, w in enumerate(wins):
                if k < len(regions):
                    a, b = regions[k]
                    pc = float(np.diff(_mid_cdf(ev, np.array([a, b])))[0])
                    pc = p_occ * pc if np.isfinite(pc) else p_occ / max(len(wins), 1)
                else:
                    pc = p_occ / max(len(wins), 1)
                if why_all:
                    reason = why_all
                elif snr * pc < min_value:
                    reason = (f"expected S/N {snr:.1f} x catch probability {pc:.2f} = {snr * pc:.2f} "
                              f"< {min_value:g}")
                else:
                    keep.append((k, pc))
                    continue
                left.append({"epoch": ev.get("epoch"), "window_utc": w, "snr": None if why_all else round(snr, 2),
                             "p_catch": round(pc, 4), "reason": reason})
            if keep:
                idx = [k for k, _ in keep]
                e2 = dict(ev)
                for key in ("window_utc", "window_bjd_tdb", "region_bjd_tdb", "window_mass"):
                    if isinstance(ev.get(key), list) and len(ev[key]) == len(wins):
                        e2[key] = [ev[key][k] for k in idx]
                e2["snr"] = round(snr, 2)
                e2["window_p_catch"] = [round(pc, 4) for _, pc in keep]
                events.append(e2)
        entry["occ_screen"] = left
        entry["occ_snr"] = None if why_all else round(snr, 2)
        if left:
            n_all = len(left) + sum(len(e["window_utc"]) for e in events)
            entry["occ_notes"] = [f"{len(left)} of {n_all} occultation window(s) not funded: "
                                  + (why_all or f"expected S/N {snr:.1f} x catch probability below {min_value:g}")]
        entry["occultation"] = dict(occ, events=events) if events else None
    return []
