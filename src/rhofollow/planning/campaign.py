"""The campaign plan: every observable occultation window and the RV visits to place, per target.

:func:`plan_campaign` is pure: it takes the per-target science dicts of :mod:`.night` and one
:class:`NightVis` per night (visibility on that night's grid) and returns a :class:`CampaignPlan`
whose :meth:`CampaignPlan.to_dict` is the ``campaign`` JSON contract::

    {"site", "start", "end",
     "targets": [{"name", "occultation_windows": [...], "rv_visits": [...],
                  "hours": {"<instrument>": h}, ...}],
     "hours_total": {"<instrument>": h}, "rv_request": {...} or null,
     "scheduler": {"time_limit_s", "mip_rel_gap", "nights_scheduled", "max_gap", "nights_not_optimal"},
     "cautions": [...]}

RV visits are placed one per night: visit ``k`` of a target aims at informative phase
``best_phases[k mod m]`` and takes the not yet used night whose best start (on the candidate grid
inside the visible slots) has the highest value at that phase (value formula of
:mod:`.values`). Hours per instrument: an RV visit costs its exposure plus the spectrograph's own
overhead (pointing, acquisition, read-out; itemised in the RV record's ``overheads``), counted once;
an occultation block costs its length (baselines included) plus the site's slew + setup. A record
with a ``request`` (:mod:`.rvrequest`) gets the requested visits only (none when not requested).
Finally each night's items are scheduled together with the exact scheduler
(:func:`.scheduler.schedule`): RV visits may move inside their visible slots (valued at their
target phase) to fit around each other and the occultation windows; items that still cannot share
the night with more valuable ones are flagged ``"clash": true`` (they stay in the list at their own
best time: the observer decides). A night with RV visits is a MILP solved within
:data:`TIME_LIMIT_S` seconds at relative gap :data:`MIP_REL_GAP` (0: proven optimal); a night of
windows only is the exact interval DP. ``scheduler`` reports those limits and the largest relative
gap reached (``max_gap``), and names any night the time limit stopped short of the optimum.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from rhofollow.planning.night import CAUTION
from rhofollow.planning.campaign_export import TABLE_FORMATS, hours_table, to_ical
from rhofollow.planning.milp import DEFAULT_MIP_REL_GAP, DEFAULT_TIME_LIMIT_S
from rhofollow.planning.scheduler import FixedTask, FlexibleTask, Schedule, schedule
from rhofollow.planning.tasks import VisGrid, jd_to_iso, occultation_tasks, rv_task
from rhofollow.planning.values import ValueModel, phase_weight

__all__ = ["NightVis", "range_nights", "CampaignPlan", "plan_campaign", "scheduler_summary", "hours_table", "to_ical",
           "TABLE_FORMATS", "TIME_LIMIT_S", "MIP_REL_GAP"]

# hours_table, to_ical and TABLE_FORMATS live in .campaign_export; importable from here as before.
#: Solver time limit per night (seconds) when RV visits compete (the MILP; see
#: :data:`rhofollow.planning.milp.DEFAULT_TIME_LIMIT_S`).
TIME_LIMIT_S = DEFAULT_TIME_LIMIT_S
#: Relative optimality gap accepted per night (1 %): each night's schedule is proven within it
#: unless the time limit stops the solver (then ``scheduler.nights_not_optimal`` names the night
#: and the gap reached).
MIP_REL_GAP = DEFAULT_MIP_REL_GAP


@dataclass
class NightVis:
    """Visibility of one night: local ``date`` (YYYY-MM-DD, evening), grid, limits (JD UTC)."""

    date: str
    vis: VisGrid
    start_jd: float
    end_jd: float


def range_nights(engine, grids, science: list[dict], advance=None) -> list[NightVis]:
    """The visibility of every night of a date range, in order, for the science targets.

    Parameters
    ----------
    engine : :class:`~rhofollow.planning.visibility.VisibilityEngine`
        The site's visibility engine.
    grids : list of night grids
        The nights (``engine.nights(start, end)`` without the nights that have no dark time).
    science : list of dict
        The science records; :func:`~rhofollow.planning.night.night_visibility` stores each
        target's BJD - JD offset (days) of the night it saw last in them.
    advance : callable, optional
        Called with no argument after each night (a progress bar).

    Returns
    -------
    list of NightVis
        One per night: local evening date, visibility grid, night limits (JD UTC).
    """
    from rhofollow.planning.night import night_visibility

    nights = []
    for g in grids:
        nights.append(NightVis(str(g.date), night_visibility(engine, g, science), g.start_jd, g.end_jd))
        if advance is not None:
            advance()
    return nights


@dataclass
class CampaignPlan:
    """Per-target windows, visits and hours; ``to_dict`` gives the JSON contract."""

    site: str
    start: str
    end: str
    targets: list
    instruments: dict
    cautions: list = field(default_factory=lambda: [CAUTION])
    rv_request: dict | None = None
    scheduler: dict = field(default_factory=lambda: scheduler_summary({}))

    @property
    def hours_total(self) -> dict:
        """Hours per instrument summed over targets."""
        tot = {name: 0.0 for name in self.instruments.values()}
        for t in self.targets:
            for k, v in t["hours"].items():
                tot[k] = tot.get(k, 0.0) + v
        return {k: round(v, 3) for k, v in tot.items()}

    def to_dict(self) -> dict:
        """The ``campaign`` JSON contract (module docstring).

        Returns
        -------
        dict
            JSON-ready plan: times in UTC, hours in hours, values dimensionless.
        """
        return {"site": self.site, "start": self.start, "end": self.end, "targets": self.targets,
                "hours_total": self.hours_total, "instruments": dict(self.instruments),
                "rv_request": self.rv_request, "scheduler": dict(self.scheduler),
                "cautions": list(self.cautions)}


def _rv_night_options(entry: dict, night: NightVis, model: ValueModel):
    """(task, starts, phases, airmass factor * evidence / N_rem part) for one night, or None."""
    t, _ = rv_task(dict(entry["rv"], name=entry["name"]), entry["evidence"], night.vis,
                   entry["t0_bjd"], entry["period_d"], entry.get("bjd_minus_jd", 0.0),
                   entry.get("n_done", 0), model)
    if t is None:
        return None
    h0, h1 = night.vis.hours(night.start_jd), night.vis.hours(night.end_jd)
    st = t.starts()
    st = st[(st >= h0 - 1e-9) & (st + t.duration <= h1 + 1e-9)]
    if st.size == 0:
        return None
    phases = np.array([t.meta["phase_of"](s) for s in st])
    # value without the phase weight: evaluate the full value with no informative phase
    flat = rv_task(dict(entry["rv"], name=entry["name"], best_phases=[]), entry["evidence"], night.vis,
                   entry["t0_bjd"], entry["period_d"], entry.get("bjd_minus_jd", 0.0),
                   entry.get("n_done", 0), model)[0]
    base = flat.values_at(st)
    return t, st, phases, base, flat


def _resolve_night(night: NightVis, items: list, overhead_h: float, model: ValueModel) -> Schedule:
    """Schedule one night's chosen items exactly; update RV visit times, flag clashes (in place).

    Returns the night's schedule (its ``status`` and relative ``gap`` go into the plan's
    ``scheduler`` summary).
    """
    j_ref = night.vis.t_jd[0]
    tasks = []
    for k, (_item, j0, j1, val, fx) in enumerate(items):
        if fx is None:
            tasks.append(FixedTask(f"i{k}", (j0 - j_ref) * 24.0, (j1 - j_ref) * 24.0, max(val, 1e-12)))
            continue
        task, flat, tp = fx

        def value(st, task=task, flat=flat, tp=tp):
            st = np.asarray(st, dtype=float)
            if tp is None:
                return flat.values_at(st)
            ph = np.array([task.meta["phase_of"](x) for x in st])
            return flat.values_at(st) * phase_weight(ph, [tp], model.phase_sigma, model.phase_floor)

        tasks.append(FlexibleTask(f"i{k}", task.duration, task.windows, value, step=task.step, kind="rv",
                                  meta={"phase_of": task.meta["phase_of"]}))
    horizon = (float(night.vis.hours(night.start_jd)), float(night.vis.hours(night.end_jd)))
    limits = {}
    if any(isinstance(t, FlexibleTask) for t in tasks):  # the MILP; windows only: the exact DP
        limits = {"time_limit": TIME_LIMIT_S, "mip_rel_gap": MIP_REL_GAP}
    sched = schedule(tasks, overhead=overhead_h, horizon=horizon, **limits)
    chosen = {b.task: b for b in sched.blocks}
    for k, (item, *_rest) in enumerate(items):
        b = chosen.get(k)
        item["clash"] = b is None
        if b is not None and isinstance(tasks[k], FlexibleTask):
            j0, j1 = j_ref + b.start / 24.0, j_ref + b.end / 24.0
            name = item.get("_target")
            item.update(start_utc=jd_to_iso(j0), end_utc=jd_to_iso(j1),
                        phase=round(tasks[k].meta["phase_of"](b.start), 4), value=round(b.value, 6))
            if name is not None:
                item["airmass_max"] = round(float(night.vis.airmass_max(name, j0, j1)), 4)
    return sched


def scheduler_summary(solved: dict) -> dict:
    """How the nights' items were scheduled: the limits given to the solver and what it reached.

    Parameters
    ----------
    solved : dict
        Night date (YYYY-MM-DD) -> :class:`~.scheduler.Schedule` of each night whose items were
        scheduled together (nights with a single item need no solver and are not listed).

    Returns
    -------
    dict
        ``time_limit_s`` (seconds per night), ``mip_rel_gap`` (relative gap accepted,
        dimensionless), ``nights_scheduled`` (count), ``max_gap`` (largest relative gap reached,
        dimensionless; 0 when every night is proven optimal, null when the solver gave none) and
        ``nights_not_optimal`` (``{"night", "status", "gap"}`` of each night that stopped short).
    """
    gaps = [float(s.gap) for s in solved.values()]
    return {"time_limit_s": TIME_LIMIT_S, "mip_rel_gap": MIP_REL_GAP, "nights_scheduled": len(solved),
            "max_gap": (max(gaps) if all(np.isfinite(gaps)) else None) if gaps else 0.0,
            "nights_not_optimal": [{"night": d, "status": s.status,
                                    "gap": float(s.gap) if np.isfinite(s.gap) else None}
                                   for d, s in solved.items() if s.status != "optimal"]}


def plan_campaign(science: list[dict], nights: list[NightVis], *, site: str, overhead_h: float = 0.0,
                  instruments: dict | None = None, model: ValueModel = ValueModel(),
                  rv_request: dict | None = None) -> CampaignPlan:
    """Windows, RV visits and hours per instrument for every target over the nights given.

    Parameters
    ----------
    science : list of dict
        Per-target science dicts (:func:`rhofollow.planning.night.science_entry`).
    nights : list of NightVis
        One entry per night of the campaign, in date order.
    site : str
        Site name for the report.
    overhead_h : float
        Slew + setup per block (hours), counted in the hours.
    instruments : dict
        ``{"occultation": name, "rv": name}``: instrument names the hours are booked on.
    model : ValueModel
        Value constants (:mod:`.values`).
    rv_request : dict or None
        The run-level RV request (:func:`rhofollow.planning.rvrequest.plan_rv_requests`), carried
        into the JSON; a record's own ``request`` decides how many of its visits are placed.

    Returns
    -------
    CampaignPlan
        Per-target windows and visits (UTC), hours per instrument (hours) and the notes; its
        ``scheduler`` says how each night's items were scheduled (time limit in seconds, the
        relative gap accepted and reached, dimensionless).
    """
    inst = {"occultation": "photometer", "rv": "spectrograph"}
    inst.update(instruments or {})
    out = []
    per_night: dict[int, list] = {}
    for entry in science:
        rec = {"name": entry["name"], "ok": True, "occultation_windows": [], "rv_visits": [], "hours": {},
               "rv_visits_needed": None, "n_windows_unobservable": 0, "notes": []}
        occ_h, left = _place_occultations(entry, nights, overhead_h, model, rec, per_night)
        rv_h = _place_rv_visits(entry, nights, model, rec, per_night)
        _close_record(rec, left, occ_h, rv_h, inst)
        out.append(rec)
    # each night's items together: the exact scheduler re-times the RV visits inside their slots
    # so that they fit around each other and the occultation windows; what still cannot fit is
    # flagged as a clash (kept at its own best time)
    solved = {}
    for ni, items in per_night.items():
        if len(items) < 2:
            continue
        solved[nights[ni].date] = _resolve_night(nights[ni], items, overhead_h, model)
    for rec in out:
        for v in rec["rv_visits"]:
            v.pop("_target", None)
        rec["rv_visits"].sort(key=lambda x: x["start_utc"])
    return CampaignPlan(site, nights[0].date if nights else "", nights[-1].date if nights else "",
                        out, inst, rv_request=rv_request, scheduler=scheduler_summary(solved))


def _place_occultations(entry: dict, nights: list[NightVis], overhead_h: float, model: ValueModel,
                        rec: dict, per_night: dict) -> tuple[float, dict]:
    """Every observable occultation window of one target, into ``rec`` and ``per_night``.

    Returns the hours booked (blocks plus overhead) and the count of windows left per
    "not funded" reason.
    """
    name = entry["name"]
    occ_h = 0.0
    left: dict[str, int] = {}
    if not entry.get("occultation"):
        return occ_h, left
    for ni, night in enumerate(nights):
        tasks, skipped = occultation_tasks(dict(entry["occultation"], name=name),
                                           entry["evidence"], night.vis, model)
        rec["n_windows_unobservable"] += len(skipped)
        for sk in skipped:
            if sk.reason.startswith("not funded"):
                left.setdefault(sk.reason, 0)
                left[sk.reason] += 1
        for t in tasks:
            j0 = night.vis.t_jd[0] + t.start / 24.0
            j1 = night.vis.t_jd[0] + t.end / 24.0
            if j0 < night.start_jd - 1e-9 or j1 > night.end_jd + 1e-9:
                rec["n_windows_unobservable"] += 1
                continue
            w = {"night": night.date, "epoch": t.meta["epoch"], "start_utc": jd_to_iso(j0),
                 "end_utc": jd_to_iso(j1), "window_utc": t.meta["window_utc"],
                 "baseline_h": t.meta["baseline_h"], "value": round(t.value, 6),
                 "airmass_max": round(t.meta["airmass_max"], 4), "clash": False,
                 "partial": bool(t.meta.get("partial", False))}
            if t.meta.get("partial"):
                w["p_catch"] = t.meta["p_catch"]
            if t.meta.get("occ_snr") is not None:
                w["snr"] = t.meta["occ_snr"]
            rec["occultation_windows"].append(w)
            per_night.setdefault(ni, []).append((w, j0, j1, t.value, None))
            occ_h += (j1 - j0) * 24.0 + overhead_h
    return occ_h, left


def _visits_to_place(entry: dict, rec: dict) -> int | None:
    """How many RV visits to place for one target (None: none, with the reason in ``rec``)."""
    rv = entry["rv"]
    n_need = rv.get("n_epochs_confirm_ecc")
    req = rv.get("request")
    if req is not None:
        n_need = req["visits"] if req.get("requested") else None
        rec["rv_request"] = {k: req[k] for k in ("visits", "hours", "power", "expected_confirmations",
                                                 "basis", "requested", "reason")}
    try:
        n_rem = int(np.ceil(max(0.0, float(n_need) - entry.get("n_done", 0))))
    except (TypeError, ValueError, OverflowError):
        n_rem = -1
    rec["rv_visits_needed"] = n_rem if n_rem >= 0 else None
    if req is not None and not req.get("requested"):
        rec["notes"].append(f"no RV visits requested: {req['reason']}")
    elif n_rem < 0:
        rec["notes"].append("eccentricity cannot be confirmed with RVs (no finite epoch count)")
    elif not entry["evidence"] > 0:
        rec["notes"].append("no RV visits: no evidence for eccentricity")
    else:
        return n_rem
    return None


def _place_rv_visits(entry: dict, nights: list[NightVis], model: ValueModel, rec: dict,
                     per_night: dict) -> float:
    """One target's RV visits, one per night at its best start for the visit's target phase.

    Visit ``k`` aims at ``best_phases[k mod m]`` and takes the not yet used night whose best start
    has the highest value at that phase. Returns the hours booked (exposure plus overhead).
    """
    rv = entry.get("rv")
    if not (rv and np.isfinite(entry.get("period_d", np.nan)) and np.isfinite(entry.get("t0_bjd", np.nan))):
        return 0.0
    n_rem = _visits_to_place(entry, rec)
    if n_rem is None:
        return 0.0
    name = entry["name"]
    rv_h = 0.0
    opts = {ni: _rv_night_options(entry, n, model) for ni, n in enumerate(nights)}
    opts = {k: v for k, v in opts.items() if v is not None}
    best = [p for p in (rv.get("best_phases") or []) if p is not None] or [None]
    used = set()
    for k in range(n_rem):
        target_phase = best[k % len(best)]
        pick = None
        for ni, (task, st, ph, base, flat) in opts.items():
            if ni in used:
                continue
            w = base * (phase_weight(ph, [target_phase], model.phase_sigma, model.phase_floor)
                        if target_phase is not None else 1.0)
            j = int(np.argmax(w))
            if pick is None or w[j] > pick[0] + 1e-12:
                pick = (float(w[j]), ni, float(st[j]), float(ph[j]), task, flat)
        if pick is None:
            rec["notes"].append(f"only {k} of {n_rem} RV visits fit in the nights given")
            break
        val, ni, s, ph, task, flat = pick
        used.add(ni)
        night = nights[ni]
        j0 = night.vis.t_jd[0] + s / 24.0
        j1 = j0 + task.duration / 24.0
        v = {"night": night.date, "start_utc": jd_to_iso(j0), "end_utc": jd_to_iso(j1),
             "phase": round(ph, 4), "target_phase": target_phase, "value": round(val, 6),
             "airmass_max": round(float(night.vis.airmass_max(name, j0, j1)), 4),
             "clash": False, "_target": name}
        if rv.get("overheads"):
            v["exposure_s"] = rv["overheads"]["exposure_s"]
            v["overhead_s"] = rv["overheads"]["instrument_overhead_s"]
        rec["rv_visits"].append(v)
        per_night.setdefault(ni, []).append((v, j0, j1, val, (task, flat, target_phase)))
        rv_h += task.duration   # exposure + instrument overhead: the visit's whole cost
    rec["rv_visits"].sort(key=lambda x: x["start_utc"])
    return rv_h


def _close_record(rec: dict, left: dict, occ_h: float, rv_h: float, inst: dict) -> None:
    """Notes on the windows left for want of signal (one per reason, with the count), hours."""
    rec["occultation_windows_not_funded"] = sum(left.values())
    for reason, n in left.items():
        rec["notes"].append(f"{n} occultation window{'s' if n > 1 else ''} {reason}")
    if occ_h:
        rec["hours"][inst["occultation"]] = round(occ_h, 3)
    if rv_h:
        rec["hours"][inst["rv"]] = round(rv_h, 3)
    if not rec["occultation_windows"] and not rec["rv_visits"]:
        rec["notes"].append("nothing observable in the campaign")
