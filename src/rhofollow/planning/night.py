"""The nightly plan: build tasks for one night, choose blocks exactly, report them.

:func:`plan_night` is pure: it takes per-target science dicts and a :class:`~.tasks.VisGrid`
(visibility on the night's grid, computed by :mod:`rhofollow.planning.visibility`) and returns a
:class:`NightPlan` whose :meth:`NightPlan.to_dict` is the ``night`` JSON contract::

    {"site", "night_start_utc", "night_end_utc",
     "blocks": [{"name", "kind", "start_utc", "end_utc", "value", "airmass_max", ...}],
     "skipped": [{"name", "reason"}], "cautions": [...], ...}

A science dict per target (plain data; see :func:`science_entry`)::

    {"name", "evidence" (0..1: W = B/(1+B) of the posterior-to-prior odds B of e > 0.1, as in the
     ranking), "occultation": occultation record or None,
     "rv": RV record or None, "t0_bjd" (BJD_TDB), "period_d" (days),
     "bjd_minus_jd" (days, BJD_TDB - JD_UTC during the night), "n_done" (RV visits obtained)}
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from rhofollow.core.timescales import bjd_minus_jd  # noqa: F401  (its home; importable from here)
from rhofollow.planning.milp import DEFAULT_TIME_LIMIT_S
from rhofollow.planning.scheduler import Schedule, schedule
from rhofollow.planning.tasks import ValueModel, VisGrid, ecc_evidence, jd_to_iso, occultation_tasks, rv_task

__all__ = ["NightPlan", "plan_night", "science_entry", "science_from_records", "night_visibility",
           "bjd_minus_jd", "CAUTION"]

#: The caution every plan carries.
from rhofollow.stages.records import CAUTION  # noqa: E402  (one caution text for every output)


def science_entry(name: str, *, evidence: float, occultation: dict | None = None, rv: dict | None = None,
                  t0_bjd: float = np.nan, period_d: float = np.nan, bjd_minus_jd: float = 0.0,
                  n_done: int = 0) -> dict:
    """A per-target science dict for :func:`plan_night` and :func:`~.campaign.plan_campaign`.

    Parameters
    ----------
    name : str
        Target name.
    evidence : float
        Evidence ``E`` for an eccentric orbit (0..1; :mod:`.values`).
    occultation, rv : dict or None
        The target's occultation and RV records.
    t0_bjd : float
        Transit epoch (BJD_TDB, days).
    period_d : float
        Orbital period (days).
    bjd_minus_jd : float
        BJD_TDB - JD_UTC during the night (days).
    n_done : int
        RV visits already obtained.

    Returns
    -------
    dict
        The science dict (module docstring), numbers as plain floats in the units above.
    """
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
        """The ``night`` JSON contract (module docstring).

        Returns
        -------
        dict
            JSON-ready plan: times in UTC, values dimensionless, the overhead in hours.
        """
        return {"site": self.site,
                "night_start_utc": jd_to_iso(self.night_start_jd),
                "night_end_utc": jd_to_iso(self.night_end_jd),
                "blocks": self.blocks, "skipped": self.skipped,
                "total_value": self.schedule.value, "method": self.schedule.method,
                "solver_status": self.schedule.status, "solver_note": self.schedule.note,
                "overhead_h": self.overhead_h,
                "cautions": list(self.cautions)}


def _what(task_name: str, target: str) -> str:
    """'HTS-1 occ E12 w2' -> 'occultation E12 w2', 'HTS-1 rv' -> 'RV visit'."""
    rest = task_name[len(target):].strip() if task_name.startswith(target) else task_name
    if rest.startswith("occ"):
        return "occultation" + rest[3:]
    return "RV visit" if rest == "rv" else rest


def plan_night(science: list[dict], vis: VisGrid, *, site: str, night_start_jd: float,
               night_end_jd: float, overhead_h: float = 0.0, model: ValueModel = ValueModel(),
               method: str = "auto", time_limit: float | None = DEFAULT_TIME_LIMIT_S) -> NightPlan:
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
    time_limit : float or None
        MILP time limit (seconds), used when RV visits compete (the MILP accepts its default
        relative gap, :data:`rhofollow.planning.milp.DEFAULT_MIP_REL_GAP`).

    Returns
    -------
    NightPlan
        The chosen blocks (UTC, values dimensionless) and the tasks left out with the reason.
    """
    tasks, skipped = [], []
    for s in science:
        name = s["name"]
        n_before = len(tasks)
        occ = s.get("occultation")
        if occ:
            t, sk = occultation_tasks(dict(occ, name=name), s["evidence"], vis, model)
            tasks += t
            skipped += [{"name": name, "reason": f"{_what(k.name, name)}: {k.reason}"} for k in sk]
        rv = s.get("rv")
        if rv and np.isfinite(s.get("period_d", np.nan)) and np.isfinite(s.get("t0_bjd", np.nan)):
            t, sk = rv_task(dict(rv, name=name), s["evidence"], vis, s["t0_bjd"], s["period_d"],
                            s.get("bjd_minus_jd", 0.0), s.get("n_done", 0), model)
            if t is not None:
                tasks.append(t)
            else:
                skipped.append({"name": name, "reason": f"{_what(sk.name, name)}: {sk.reason}"})
        if len(tasks) == n_before and not any(k["name"] == name for k in skipped):
            skipped.append({"name": name, "reason": "no occultation window or RV visit tonight"})
    horizon = (float(vis.hours(night_start_jd)), float(vis.hours(night_end_jd)))
    sched = schedule(tasks, overhead=overhead_h, horizon=horizon, method=method,
                     **({"time_limit": time_limit} if method in ("auto", "milp") and
                        any(t.kind == "rv" for t in tasks) else {}))
    chosen = {b.task for b in sched.blocks}
    for i, t in enumerate(tasks):
        if i not in chosen:
            target = t.meta.get("target", t.name)
            skipped.append({"name": target,
                            "reason": f"{_what(t.name, target)}: overlaps blocks of higher total value"})
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
            if b.meta.get("partial"):
                rec["partial"] = True
                rec["p_catch"] = b.meta["p_catch"]
        elif "phase_of" in b.meta:
            rec["phase"] = round(b.meta["phase_of"](b.start), 4)
        blocks.append(rec)
    return NightPlan(site, night_start_jd, night_end_jd, blocks, skipped, sched, overhead_h)


# ------------------------------------------------------------------------------------------
# glue from the upstream records (assessment, occultation, RV) to science dicts and visibility


def _radec(a) -> tuple[float, float]:
    t = getattr(a, "target", None)
    ra = t.value("ra_deg") if t is not None else np.nan
    dec = t.value("dec_deg") if t is not None else np.nan
    s = getattr(a, "samples", None)
    if (not np.isfinite(ra) or not np.isfinite(dec)) and s is not None:
        ra, dec = float(s.meta.get("ra_deg", np.nan)), float(s.meta.get("dec_deg", np.nan))
    return float(ra), float(dec)


def _data_weight(rec: dict, s, e_min: float) -> float:
    """Evidence E of a target: W = B/(1+B) of the posterior-to-prior odds of e > e_min, the same W
    the ranking uses (:func:`rhofollow.stages.assess.data_weight`). At e_min = 0.1 it is the record's
    (:func:`rhofollow.stages.assess.record_data_weight`); at another threshold it is computed from the samples and the prior named in
    their metadata (the run's prior, with the transit-probability factor when the run used it)."""
    from rhofollow.stages.assess import data_weight, record_data_weight
    from rhofollow.physics.priors import parse_prior

    if e_min == 0.1 and any(rec.get(k) is not None for k in ("p_ecc_gt_0p1", "ecc_data_weight")):
        return record_data_weight(rec)
    p = ecc_evidence(s.e, s.weights, e_min)
    prior = parse_prior(s.meta.get("prior"))
    p0 = prior.prob_above(e_min, transit_prob=bool(s.meta.get("transit_prob", True)))
    return data_weight(p, p0, s.ess)


def science_from_records(assessments, occ_records: list[dict] | None, rv_records: list[dict] | None,
                         e_min: float = 0.1, n_done: dict | None = None) -> tuple[list[dict], list[dict]]:
    """Science dicts (with ``ra_deg``, ``dec_deg``) for the targets that can be planned.

    Parameters
    ----------
    assessments : objects with ``name, ok, errors, samples, target, record``
        (:func:`rhofollow.stages.assess.assess_catalogue`).
    occ_records : list of dict or None
        ``targets`` of :func:`rhofollow.stages.occultations.predict_occultations`.
    rv_records : list of dict or None
        Records of :func:`rhofollow.stages.rv.plan_rv`.
    e_min : float
        Eccentricity threshold of the evidence ``E`` = W = B/(1+B), B the posterior-to-prior odds of
        e > e_min (the ranking's W; the record's ``ecc_data_weight`` at 0.1, else from the samples).
    n_done : dict or None
        Target name -> RV visits already obtained.

    Returns
    -------
    entries, skipped
        ``skipped`` holds ``{"name", "reason"}`` for targets without samples or coordinates.
    """
    occ = {r["name"]: r for r in (occ_records or [])}
    rvs = {r["name"]: r for r in (rv_records or [])}
    entries, skipped = [], []
    for a in assessments:
        s = a.samples
        if not a.ok or s is None:
            why = "; ".join(a.errors) or "no posterior samples"
            skipped.append({"name": a.name, "reason": f"not assessed: {why}"})
            continue
        ra, dec = _radec(a)
        if not (np.isfinite(ra) and np.isfinite(dec)):
            skipped.append({"name": a.name, "reason": "ra_deg/dec_deg missing: cannot be scheduled"})
            continue
        rec = getattr(a, "record", None) or {}
        ev = _data_weight(rec, s, e_min)
        o = occ.get(a.name)
        o = o if o and o.get("ok", True) and o.get("events") else None
        r = rvs.get(a.name)
        r = r if r and r.get("ok", True) else None
        w = s.weights
        e = science_entry(a.name, evidence=ev, occultation=o, rv=r,
                          t0_bjd=float(np.sum(w * s.t0)), period_d=float(np.sum(w * s.period)),
                          n_done=(n_done or {}).get(a.name, 0))
        e["ra_deg"], e["dec_deg"] = ra, dec
        entries.append(e)
    return entries, skipped


def night_visibility(engine, night, entries: list[dict], location=None) -> VisGrid:
    """VisGrid of the targets on the night's grid (and ``bjd_minus_jd`` filled in the entries).

    Parameters
    ----------
    engine : rhofollow.planning.visibility.VisibilityEngine
        The site's visibility engine.
    night : NightGrid
        A night of that engine (``times_jd`` from dusk to dawn, JD UTC).
    entries : list of dict
        Science dicts with ``ra_deg``, ``dec_deg`` (ICRS, degrees).
    location : astropy.coordinates.EarthLocation or None
        Site for the barycentric correction (default: the engine's site).

    Returns
    -------
    VisGrid
        Observability and airmass of the entries on the night's grid (JD, UTC).
    """
    t = night.times_jd
    names = [e["name"] for e in entries]
    if not entries or t.size == 0:
        return VisGrid(t, names, np.zeros((len(names), t.size), bool), np.full((len(names), t.size), np.inf))
    ra = np.array([e["ra_deg"] for e in entries])
    dec = np.array([e["dec_deg"] for e in entries])
    obs = engine.observable_mask(ra, dec, t)
    x = engine.airmass(ra, dec, t)
    loc = location if location is not None else engine.site.location
    corr = bjd_minus_jd(ra, dec, float(t[t.size // 2]), loc)
    for e, c in zip(entries, corr):
        e["bjd_minus_jd"] = float(c)
    return VisGrid(t, names, obs, x)
