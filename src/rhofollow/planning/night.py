"""The nightly plan: build tasks for one night, choose blocks exactly, report them.

:func:`plan_night` is pure: it takes per-target science dicts and a :class:`~.tasks.VisGrid`
(visibility on the night's grid, computed by :mod:`rhofollow.planning.visibility`) and returns a
:class:`NightPlan` whose :meth:`NightPlan.to_dict` is the ``night`` JSON contract::

    {"site", "night_start_utc", "night_end_utc",
     "blocks": [{"name", "kind", "start_utc", "end_utc", "value", "airmass_max", ...}],
     "skipped": [{"name", "reason"}], "cautions": [...], ...}

A science dict per target (plain data; see :func:`science_entry`)::

    {"name", "evidence" (0..1), "occultation": occultation record or None,
     "rv": RV record or None, "t0_bjd" (BJD_TDB), "period_d" (days),
     "bjd_minus_jd" (days, BJD_TDB - JD_UTC during the night), "n_done" (RV visits obtained)}
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .scheduler import Schedule, schedule
from .tasks import ValueModel, VisGrid, jd_to_iso, occultation_tasks, rv_task

__all__ = ["NightPlan", "plan_night", "science_entry", "CAUTION"]

#: The caution every plan carries.
CAUTION = ("Plans are advisory: Sun avoidance, weather and wind limits, dome rules and the site's "
           "operations rules override any schedule this tool makes.")


def science_entry(name: str, *, evidence: float, occultation: dict | None = None, rv: dict | None = None,
                  t0_bjd: float = np.nan, period_d: float = np.nan, bjd_minus_jd: float = 0.0,
                  n_done: int = 0) -> dict:
    """A per-target science dict for :func:`plan_night` (see the module docstring; units there)."""
    return {"name": name, "evidence": float(evidence), "occultation": occultation, "rv": rv,
            "t0_bjd": float(t0_bjd), "period_d": float(period_d), "bjd_minus_jd": float(bjd_minus_jd),
            "n_done": int(n_done)}


@dataclass
class NightPlan:
    """A chosen night's blocks plus what was left out and why.

    ``schedule`` is in hours since ``vis.t_jd[0]``; ``blocks`` and ``skipped`` are JSON-ready.
    """

    site: str
    night_start_jd: float
    night_end_jd: float
    blocks: list
    skipped: list
    schedule: Schedule
    overhead_h: float
    cautions: list = field(default_factory=lambda: [CAUTION])

    def to_dict(self) -> dict:
        """The ``night`` JSON contract."""
        return {"site": self.site,
                "night_start_utc": jd_to_iso(self.night_start_jd),
                "night_end_utc": jd_to_iso(self.night_end_jd),
                "blocks": self.blocks, "skipped": self.skipped,
                "total_value": self.schedule.value, "method": self.schedule.method,
                "solver_status": self.schedule.status, "overhead_h": self.overhead_h,
                "cautions": list(self.cautions)}


def plan_night(science: list[dict], vis: VisGrid, *, site: str, night_start_jd: float,
               night_end_jd: float, overhead_h: float = 0.0, model: ValueModel = ValueModel(),
               method: str = "auto", time_limit: float | None = 60.0) -> NightPlan:
    """Choose the night's blocks (exact: DP for windows only, MILP as soon as RV visits compete).

    Parameters
    ----------
    science : list of dict
        One science dict per target (module docstring).
    vis : VisGrid
        Visibility on the night's grid; grid times outside [night_start_jd, night_end_jd] must be
        marked unobservable by the caller (the visibility engine does).
    site : str
        Site name for the report.
    night_start_jd, night_end_jd : float
        Night limits (JD UTC).
    overhead_h : float
        Setup / slew gap between consecutive blocks (hours).
    model : ValueModel
        Value constants.
    method : str
        Scheduler method ("auto", "dp", "milp", "greedy"); "greedy" only for comparisons.
    """
    tasks, skipped = [], []
    for s in science:
        name = s["name"]
        n_before = len(tasks)
        occ = s.get("occultation")
        if occ:
            t, sk = occultation_tasks(dict(occ, name=name), s["evidence"], vis, model)
            tasks += t
            skipped += [{"name": name, "reason": f"{k.name}: {k.reason}"} for k in sk]
        rv = s.get("rv")
        if rv and np.isfinite(s.get("period_d", np.nan)) and np.isfinite(s.get("t0_bjd", np.nan)):
            t, sk = rv_task(dict(rv, name=name), s["evidence"], vis, s["t0_bjd"], s["period_d"],
                            s.get("bjd_minus_jd", 0.0), s.get("n_done", 0), model)
            if t is not None:
                tasks.append(t)
            else:
                skipped.append({"name": name, "reason": f"{sk.name}: {sk.reason}"})
        if len(tasks) == n_before and not any(k["name"] == name for k in skipped):
            skipped.append({"name": name, "reason": "no occultation window or RV visit tonight"})
    horizon = (float(vis.hours(night_start_jd)), float(vis.hours(night_end_jd)))
    sched = schedule(tasks, overhead=overhead_h, horizon=horizon, method=method,
                     **({"time_limit": time_limit} if method in ("auto", "milp") and
                        any(t.kind == "rv" for t in tasks) else {}))
    chosen = {b.task for b in sched.blocks}
    for i, t in enumerate(tasks):
        if i not in chosen:
            skipped.append({"name": t.meta.get("target", t.name),
                            "reason": f"{t.name}: conflicts with higher-value blocks"})
    blocks = []
    t_ref = vis.t_jd[0]
    for b in sched.blocks:
        target = b.meta.get("target", b.name)
        j0, j1 = t_ref + b.start / 24.0, t_ref + b.end / 24.0
        rec = {"name": target, "kind": b.kind, "start_utc": jd_to_iso(j0), "end_utc": jd_to_iso(j1),
               "value": round(float(b.value), 6),
               "airmass_max": round(float(vis.airmass_max(target, j0, j1)), 4),
               "task": b.name, "start_jd": j0, "end_jd": j1}
        if b.kind == "occultation":
            rec["epoch"] = b.meta.get("epoch")
            rec["window_utc"] = b.meta.get("window_utc")
        elif "phase_of" in b.meta:
            rec["phase"] = round(b.meta["phase_of"](b.start), 4)
        blocks.append(rec)
    return NightPlan(site, night_start_jd, night_end_jd, blocks, skipped, sched, overhead_h)
