"""Observing tasks built from the science records (plain dicts) and visibility arrays.

Inputs are the JSON-like records of the occultation and RV steps and a :class:`VisGrid` (target x
time observability and airmass on a regular UTC grid), so everything here runs on plain data and
is tested without the upstream modules. Times are Julian Dates in UTC (``jd``) at the boundary and
hours since ``vis.t_jd[0]`` inside the scheduler.

Every block's value follows the value model of :mod:`rhofollow.planning.values` (occultation
windows, partial windows, RV visits; its constants are :class:`~rhofollow.planning.values.ValueModel`),
and an occultation block is offered only when it passes the S/N funding rule of
:mod:`rhofollow.planning.funding`. A target whose record says ``reliable: false`` has its values
down-weighted (``ValueModel.unreliable_weight``); the tasks say so (``meta["reliable"]``).

A target whose tasks cannot be built (an unexpected failure in its record) gets no task and a
"skipped" entry with the reason; the other targets are planned as usual.

A record whose ``request`` (:mod:`.rvrequest`: budget or gain-per-hour threshold) says it is not
requested gets no RV task; a requested one counts its requested visits as ``n_epochs_confirm_ecc``.

A fully decided target (E = 0) or an impossible confirmation (``n_epochs_confirm_ecc`` missing or
infinite) gets no task; the reason is recorded in the "skipped" list.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rhofollow.core.timescales import iso_to_jd, jd_to_iso  # noqa: F401  (their home; importable from here)
from rhofollow.planning.funding import funding_refusal, mid_time_cdf, whole_catch_probability
from rhofollow.planning.scheduler import FixedTask, FlexibleTask
from rhofollow.planning.values import ValueModel, airmass_factor, ecc_evidence, phase_weight, record_number
from rhofollow.planning.visgrid import VisGrid

# VisGrid (in .visgrid) and ValueModel, airmass_factor, phase_weight, ecc_evidence (in .values) stay
# importable from here, where the planners and tests have always imported them.
__all__ = ["VisGrid", "ValueModel", "iso_to_jd", "jd_to_iso", "airmass_factor", "phase_weight",
           "ecc_evidence", "occultation_tasks", "rv_task", "visible_windows", "Skip"]


def _failure(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


@dataclass(frozen=True)
class Skip:
    """A task not offered to the scheduler, with the reason in words."""

    name: str
    reason: str

    def to_dict(self) -> dict:
        """The skipped task as JSON-ready data.

        Returns
        -------
        dict
            ``{"name", "reason"}`` (strings).
        """
        return {"name": self.name, "reason": self.reason}


def occultation_tasks(record: dict, evidence: float, vis: VisGrid,
                      model: ValueModel = ValueModel()) -> tuple[list[FixedTask], list[Skip]]:
    """Fixed tasks for the occultation windows of one target that fall inside the grid.

    Parameters
    ----------
    record : dict
        Occultation record: ``name``, ``p_occultation``, ``occ_duration_h`` (hours, number or
        quantile object), ``events`` with ``epoch`` and ``window_utc`` ``[[start, end], ...]``
        (ISO UTC strings or JD UTC floats) and optional ``window_mass`` (one share per window).
    evidence : float
        Evidence ``E`` for an eccentric orbit (probability, 0..1; :mod:`.values`).
    vis : VisGrid
        Visibility of the night; a block must be observable at every grid point it covers.
    model : ValueModel
        Value constants (baselines and setup in hours, the S/N funding threshold).

    Returns
    -------
    tasks : list of FixedTask
        Blocks in hours since ``vis.t_jd[0]``, valued by :mod:`.values` (dimensionless).
    skipped : list of Skip
        Windows in the night that cannot be observed, carry no value or are not funded (or why
        this target's tasks could not be built).
    """
    try:
        return _occultation_tasks(record, evidence * model.reliability_weight(record), vis, model)
    except Exception as exc:  # noqa: BLE001 - one target's failure stays with that target
        return [], [Skip(f"{record.get('name', '?')} occ",
                         f"occultation blocks could not be built: {_failure(exc)}")]


def _occultation_tasks(record, evidence, vis, model):
    name = record["name"]
    p_occ = record_number(record.get("p_occultation"), 1.0)
    t_occ = record_number(record.get("occ_duration_h"))
    tasks, skipped = [], []
    lo, hi = vis.t_jd[0], vis.t_jd[-1]
    base_d = model.baseline_h / 24.0
    for ev in record.get("events") or []:
        wins = ev.get("window_utc") or []
        mass = ev.get("window_mass") or [1.0 / max(len(wins), 1)] * len(wins)
        for k, (w0, w1) in enumerate(wins):
            j0, j1 = iso_to_jd(w0) - base_d - model.lead_h / 24.0, iso_to_jd(w1) + base_d
            if j1 < lo or j0 > hi:
                continue
            label = f"{name} occ E{ev.get('epoch', '?')}" + (f" w{k + 1}" if len(wins) > 1 else "")
            fits = j0 >= lo - 1e-9 and j1 <= hi + 1e-9
            frac = vis.fraction_observable(name, j0, j1) if fits else 0.0
            if not fits or frac < 1.0:
                why = (f"the {(j1 - j0) * 24:.1f} h block (window, baselines and setup) does not fit "
                       "inside the night" if not fits else
                       f"window observable only {100 * frac:.0f}% of the time")
                part = _partial_task(record, ev, k, label, evidence, vis, model, t_occ, p_occ,
                                     float(mass[k]), (w0, w1))
                if part is None:
                    skipped.append(Skip(label, why))
                elif isinstance(part, str):
                    skipped.append(Skip(label, f"{part} (observable part of a window: {why})"))
                else:
                    tasks.append(part)
                continue
            xmax = float(vis.airmass_max(name, j0, j1))
            t_block = (j1 - j0) * 24.0
            eff = min(1.0, t_occ / t_block) if np.isfinite(t_occ) and t_occ > 0 else 1.0
            value = p_occ * float(mass[k]) * evidence * float(airmass_factor(xmax, model.kappa)) * eff
            if not value > 0:
                skipped.append(Skip(label, "no value (eccentricity evidence or occurrence is zero)"))
                continue
            p_catch = p_occ * whole_catch_probability(record, ev, k, float(mass[k]))
            why = funding_refusal(record, p_catch, model)
            if why:
                skipped.append(Skip(label, why))
                continue
            tasks.append(FixedTask(label, float(vis.hours(j0)), float(vis.hours(j1)), value,
                                   kind="occultation",
                                   meta={"target": name, "epoch": ev.get("epoch"), "airmass_max": xmax,
                                         "window_utc": [jd_to_iso(iso_to_jd(w0)), jd_to_iso(iso_to_jd(w1))],
                                         "baseline_h": model.baseline_h,
                                         "reliable": record.get("reliable") is not False,
                                         "occ_snr": record.get("occ_snr"), "p_catch": round(p_catch, 4)}))
    return tasks, skipped


def _partial_task(record, ev, k, label, evidence, vis, model, t_occ, p_occ, mass, win):
    """A block on the longest observable stretch of a window that does not fit whole, or None.

    Returns the reason (a string) instead when the stretch could be observed but the event's
    expected S/N × catch probability stays below ``model.min_occ_snr``.

    The chance of catching the whole occultation with baselines is the posterior probability that
    the mid-time lies in ``[r0 + L + B + T/2, r1 - B - T/2]`` (stretch ``[r0, r1]``, setup ``L``,
    baseline ``B`` = ``model.partial_baseline_h``, duration ``T``), read off the event's
    mid-time quantiles. Offered only when that chance is at least ``model.min_catch``.
    """
    if not (np.isfinite(t_occ) and t_occ > 0) or not ev.get("window_bjd_tdb"):
        return None
    try:
        offset = float(ev["window_bjd_tdb"][k][0]) - iso_to_jd(win[0])  # BJD_TDB - JD_UTC
    except (IndexError, KeyError, TypeError, ValueError):
        return None
    w0, w1 = iso_to_jd(win[0]), iso_to_jd(win[1])
    obs = vis.observable[vis.row(record["name"])]
    inside = obs & (vis.t_jd >= w0 - 1e-9) & (vis.t_jd <= w1 + 1e-9)
    best = None
    for a, b in _runs(inside):
        if best is None or b - a > best[1] - best[0]:
            best = (a, b)
    if best is None:
        return None
    r0, r1 = vis.t_jd[best[0]], vis.t_jd[best[1]]
    need = (model.lead_h + 2 * model.partial_baseline_h + t_occ) / 24.0
    if r1 - r0 < need:
        return None
    m_lo = r0 + (model.lead_h + model.partial_baseline_h + 0.5 * t_occ) / 24.0
    m_hi = r1 - (model.partial_baseline_h + 0.5 * t_occ) / 24.0
    p_catch = float(np.diff(mid_time_cdf(ev, np.array([m_lo, m_hi]) + offset))[0])
    if not (np.isfinite(p_catch) and p_catch >= model.min_catch):
        return None
    why = funding_refusal(record, p_occ * p_catch, model)
    if why:
        return why
    xmax = float(vis.airmass_max(record["name"], r0, r1))
    eff = min(1.0, t_occ / ((r1 - r0) * 24.0))
    value = p_occ * mass * p_catch * evidence * float(airmass_factor(xmax, model.kappa)) * eff
    if not value > 0:
        return None
    return FixedTask(label + " partial", float(vis.hours(r0)), float(vis.hours(r1)), value,
                     kind="occultation",
                     meta={"target": record["name"], "epoch": ev.get("epoch"), "airmass_max": xmax,
                           "window_utc": [jd_to_iso(w0), jd_to_iso(w1)], "baseline_h": model.partial_baseline_h,
                           "p_catch": round(p_catch, 4), "partial": True,
                           "occ_snr": record.get("occ_snr")})


def _runs(mask):
    """(first, last) index pairs of the True runs of a boolean array."""
    m = np.concatenate([[False], np.asarray(mask, bool), [False]])
    d = np.diff(m.astype(np.int8))
    return list(zip(np.flatnonzero(d == 1), np.flatnonzero(d == -1) - 1))


def visible_windows(observable: np.ndarray, t_h: np.ndarray, duration_h: float) -> list[tuple]:
    """Allowed start intervals (hours) for a block of ``duration_h`` inside the observable runs.

    A start ``t_h[i]`` is allowed when every grid point in ``[t_h[i], t_h[i] + duration_h]`` is
    observable and the block ends inside the grid.

    Parameters
    ----------
    observable : bool array (N,)
        Observability of the target at the grid times.
    t_h : array (N,)
        Grid times (hours), regularly spaced.
    duration_h : float
        Block length (hours).

    Returns
    -------
    list of (earliest, latest)
        Allowed start intervals (hours, same origin as ``t_h``), in time order; empty when the
        block fits nowhere.
    """
    obs = np.asarray(observable, dtype=bool)
    n = obs.size
    if n == 0:
        return []
    step = t_h[1] - t_h[0] if n > 1 else 1.0
    k = int(math.ceil(duration_h / step - 1e-9))
    if k >= n:
        return []
    c = np.concatenate([[0], np.cumsum(~obs)])
    ok = np.zeros(n, dtype=bool)
    ok[: n - k] = (c[k + 1: n + 1] - c[: n - k]) == 0
    # the block may end between grid points: the last allowed start is end-of-run - duration
    out = []
    idx = np.nonzero(ok)[0]
    if idx.size == 0:
        return out
    breaks = np.nonzero(np.diff(idx) > 1)[0]
    for a, b in zip(np.r_[idx[0], idx[breaks + 1]], np.r_[idx[breaks], idx[-1]]):
        # extend the latest start to the end of the observable run (run end is grid point b + k
        # or further)
        run_end = b + k
        while run_end + 1 < n and obs[run_end + 1]:
            run_end += 1
        latest = min(t_h[run_end] - duration_h, t_h[-1] - duration_h)
        out.append((float(t_h[a]), float(max(latest, t_h[b]))))
    return out


def rv_task(record: dict, evidence: float, vis: VisGrid, t0_bjd: float, period_d: float,
            bjd_minus_jd: float = 0.0, n_done: int = 0,
            model: ValueModel = ValueModel()) -> tuple[FlexibleTask | None, Skip | None]:
    """One flexible RV visit of a target in the night (or the reason there is none).

    Parameters
    ----------
    record : dict
        RV record: ``name``, ``n_epochs_confirm_ecc``, ``hours_confirm_ecc`` (hours),
        ``best_phases`` (orbital phases 0..1, 0 = transit), optional ``visit_h`` (hours).
    evidence : float
        Evidence ``E`` for an eccentric orbit (probability, 0..1; :mod:`.values`).
    vis : VisGrid
        Visibility of the night.
    t0_bjd, period_d : float
        Transit epoch (BJD_TDB, days) and period (days) for the orbital phase.
    bjd_minus_jd : float
        BJD_TDB - JD_UTC for the target during the night (days; barycentric + TT-UTC correction).
    n_done : int
        Visits already obtained.
    model : ValueModel
        Value constants (phase weight, airmass penalty, start grid step in hours).

    Returns
    -------
    task : FlexibleTask or None
        The visit (duration and windows in hours since ``vis.t_jd[0]``, value a function of the
        start time, dimensionless); None when there is none.
    skip : Skip or None
        The reason there is no visit; None when there is one.
    """
    try:
        return _rv_task(record, evidence * model.reliability_weight(record), vis, t0_bjd, period_d,
                        bjd_minus_jd, n_done, model)
    except Exception as exc:  # noqa: BLE001 - one target's failure stays with that target
        return None, Skip(f"{record.get('name', '?')} rv", f"RV visit could not be built: {_failure(exc)}")


def _rv_task(record, evidence, vis, t0_bjd, period_d, bjd_minus_jd, n_done, model):
    name = record["name"]
    req = record.get("request")
    if isinstance(req, dict) and not req.get("requested", True):
        return None, Skip(f"{name} rv", f"no RV visits requested: {req.get('reason', 'not requested')}")
    n_need = record_number(record.get("n_epochs_confirm_ecc"))
    if isinstance(req, dict) and req.get("visits"):
        n_need = float(req["visits"])
    hours = record_number(record.get("hours_confirm_ecc"))
    if not (np.isfinite(n_need) and n_need > 0):
        return None, Skip(f"{name} rv", "eccentricity cannot be confirmed with RVs (no finite epoch count)")
    visit_h = record_number(record.get("visit_h"))
    if not (np.isfinite(visit_h) and visit_h > 0):
        visit_h = hours / n_need if np.isfinite(hours) and hours > 0 else math.nan
    if not (np.isfinite(visit_h) and visit_h > 0):
        return None, Skip(f"{name} rv", "no RV visit length (hours_confirm_ecc missing)")
    if not evidence > 0:
        return None, Skip(f"{name} rv", "no value (no evidence for eccentricity)")
    if not (np.isfinite(t0_bjd) and np.isfinite(period_d) and period_d > 0):
        return None, Skip(f"{name} rv", "no finite transit epoch and period for the orbital phase")
    n_rem = max(1.0, n_need - n_done)
    row = vis.row(name)
    t_h = vis.hours(vis.t_jd)
    wins = visible_windows(vis.observable[row], t_h, visit_h)
    if not wins:
        return None, Skip(f"{name} rv", f"not observable for a {visit_h:.2f} h visit tonight")
    best = list(record.get("best_phases") or [])
    jd_ref = vis.t_jd[0]

    def value(starts_h, _d=visit_h):
        starts_h = np.asarray(starts_h, dtype=float)
        mid_jd = jd_ref + (starts_h + 0.5 * _d) / 24.0
        phase = ((mid_jd + bjd_minus_jd - t0_bjd) / period_d) % 1.0
        j0 = jd_ref + starts_h / 24.0
        xmax = vis.airmass_max(name, j0, j0 + _d / 24.0)
        w = phase_weight(phase, best, model.phase_sigma, model.phase_floor)
        v = evidence * w * airmass_factor(xmax, model.kappa) / n_rem
        return np.where(np.isfinite(v), v, 0.0)

    def phase_of(start_h, _d=visit_h):
        mid_jd = jd_ref + (start_h + 0.5 * _d) / 24.0
        return float(((mid_jd + bjd_minus_jd - t0_bjd) / period_d) % 1.0)

    task = FlexibleTask(f"{name} rv", visit_h, tuple(wins), value, step=model.step_h, kind="rv",
                        meta={"target": name, "phase_of": phase_of, "n_remaining": n_rem,
                              "best_phases": best, "reliable": record.get("reliable") is not False})
    return task, None
