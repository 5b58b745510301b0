"""Observing tasks built from the science records (plain dicts) and visibility arrays.

Inputs are the JSON-like records of the occultation and RV steps and a :class:`VisGrid` (target x
time observability and airmass on a regular UTC grid), so everything here runs on plain data and
is tested without the upstream modules. Times are Julian Dates in UTC (``jd``) at the boundary and
hours since ``vis.t_jd[0]`` inside the scheduler.

Task values (dimensionless; "expected progress towards settling the eccentricity")
-----------------------------------------------------------------------------------
Let ``E = P(e > e_min | data)`` be the posterior evidence for an eccentric orbit (weighted
fraction of the eccentricity samples above ``e_min``, default 0.1) and
``A(X) = exp(-kappa (X_max - 1))`` the airmass penalty with ``X_max`` the highest airmass during the
block (``kappa`` = 0.5 by default: A = 1 at the zenith, 0.61 at airmass 2).

* Occultation window (fixed task): the block is the timing window widened by a baseline
  ``B`` on each side and preceded by the instrument setup ``L``, ``T_block = T_window + 2 B + L``.

      V_occ = P_occ * w_k * E * A(X_max) * min(1, T_occ / T_block)

  ``P_occ`` is the probability that the occultation occurs (``p_occultation``), ``w_k`` the share of
  the event's timing posterior inside this window when the record gives it (``window_mass``;
  otherwise split evenly between the event's windows), ``T_occ`` the expected occultation
  duration (``occ_duration_h``). The last factor is the evidence per unit of block duration,
  normalised by the eclipse's own length: a tightly predicted occultation is worth more than
  the same event buried in a long window.

  When the whole block does not fit in the night (or is not observable throughout), the longest
  observable stretch ``[r0, r1]`` of the window is offered instead, with ``T_block = r1 - r0``
  and one more factor, the chance of catching the complete occultation with baselines ``B'``:

      p_catch = F(r1 - B' - T_occ/2) - F(r0 + L + B' + T_occ/2)

  where ``F`` is the mid-time CDF interpolated linearly between the event's mid-time quantiles
  (q025 ... q975, BJD_TDB); offered only if ``p_catch >= 0.1``.

* RV visit (flexible task, start on a grid inside the target's visible slots):

      V_rv(t) = E * W(phi(t)) * A(X_max(t)) / N_rem

  ``N_rem = max(1, n_epochs_confirm_ecc - n_done)`` is how far the target is from a confirmed
  eccentricity (each visit brings it ``1/N_rem`` of the way), and ``W`` the phase weight at the
  orbital phase ``phi`` of the visit's middle (0 = transit, from BJD_TDB):
  ``W = w_0 + (1 - w_0) max_j exp(-d_j^2 / (2 sigma^2))`` with ``d_j`` the circular phase distance
  to the informative phase ``best_phases[j]`` (``w_0`` = 0.25, ``sigma`` = 0.08 by default; W = 1
  when no informative phase is given). The visit lasts ``hours_confirm_ecc / n_epochs_confirm_ecc``
  (overheads included upstream) unless the record gives ``visit_h``.

Targets whose quantiles are unreliable (the occultation or RV record says ``reliable: false``: an
effective sample size below :data:`rhofollow.core.samples.RELIABLE_ESS`) are not planned as if their
numbers were known: every value above is multiplied by ``unreliable_weight`` (0.5 by default,
a chosen down-weighting, common practice, no source), so such a target wins a slot only against a
reliable one worth less than half as much. The tasks say so (``meta["reliable"]``).

A target whose tasks cannot be built (an unexpected failure in its record) gets no task and a
"skipped" entry with the reason; the other targets are planned as usual.

A record whose ``request`` (:mod:`.rvrequest`: budget or gain-per-hour threshold) says it is not
requested gets no RV task; a requested one counts its requested visits as ``n_epochs_confirm_ecc``.

A fully decided target (E = 0) or an impossible confirmation (``n_epochs_confirm_ecc`` missing or
infinite) gets no task; the reason is recorded in the "skipped" list.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from rhofollow.core.timescales import iso_to_jd, jd_to_iso  # noqa: F401  (their home; importable from here)
from rhofollow.planning.scheduler import FixedTask, FlexibleTask

__all__ = ["VisGrid", "ValueModel", "iso_to_jd", "jd_to_iso", "airmass_factor", "phase_weight",
           "ecc_evidence", "occultation_tasks", "rv_task", "visible_windows", "Skip"]

@dataclass
class VisGrid:
    """Observability of targets on a regular time grid of one night (or any span).

    Attributes
    ----------
    t_jd : array (N,)
        Grid times, Julian Date UTC, regularly spaced.
    names : list of str (T,)
        Target names, rows of the arrays.
    observable : bool array (T, N)
        True where every constraint (altitude / airmass, night, Moon, horizon) holds.
    airmass : float array (T, N)
        Airmass (inf or nan below the horizon).
    """

    t_jd: np.ndarray
    names: list
    observable: np.ndarray
    airmass: np.ndarray

    def __post_init__(self):
        self.t_jd = np.asarray(self.t_jd, dtype=float)
        self.observable = np.atleast_2d(np.asarray(self.observable, dtype=bool))
        self.airmass = np.atleast_2d(np.asarray(self.airmass, dtype=float))
        shape = (len(self.names), self.t_jd.size)
        if self.observable.shape != shape or self.airmass.shape != shape:
            raise ValueError(f"visibility arrays must have shape {shape} (targets, times)")
        self._row = {n: i for i, n in enumerate(self.names)}

    @property
    def step_h(self) -> float:
        """Grid spacing in hours."""
        return float((self.t_jd[1] - self.t_jd[0]) * 24.0) if self.t_jd.size > 1 else 0.0

    def hours(self, jd) -> np.ndarray:
        """JD UTC -> hours since the first grid time."""
        return (np.asarray(jd, dtype=float) - self.t_jd[0]) * 24.0

    def row(self, name: str) -> int:
        """Row of a target (KeyError with the name if absent)."""
        return self._row[name]

    def fraction_observable(self, name: str, jd0: float, jd1: float) -> float:
        """Fraction of the grid points bracketing [jd0, jd1] where the target is observable.

        The grid points used run from the last one at or before ``jd0`` to the first one at or
        after ``jd1`` (conservative: both ends of the interval are bracketed); 0 outside the grid.
        """
        t = self.t_jd
        if t.size == 0 or jd1 < t[0] - 1e-9 or jd0 > t[-1] + 1e-9:
            return 0.0
        i0 = max(int(np.searchsorted(t, jd0 + 1e-9, side="right")) - 1, 0)
        i1 = min(int(np.searchsorted(t, jd1 - 1e-9, side="left")), t.size - 1)
        return float(self.observable[self.row(name), i0:i1 + 1].mean())

    def airmass_max(self, name: str, jd0, jd1, n: int = 9) -> np.ndarray:
        """Highest airmass over [jd0, jd1] (arrays broadcast), by interpolation at ``n`` points."""
        jd0, jd1 = np.broadcast_arrays(np.asarray(jd0, float), np.asarray(jd1, float))
        f = np.linspace(0.0, 1.0, n)
        pts = jd0[..., None] + (jd1 - jd0)[..., None] * f
        x = self.airmass[self.row(name)]
        x = np.where(np.isfinite(x), x, 1e3)
        return np.interp(pts, self.t_jd, x).max(axis=-1)


@dataclass(frozen=True)
class ValueModel:
    """Tunable constants of the task values (see the module docstring).

    Attributes
    ----------
    kappa : float
        Airmass penalty rate (per unit airmass).
    e_min : float
        Eccentricity above which an orbit counts as eccentric.
    phase_sigma : float
        Width of the phase weight (orbital phase units, 0..1).
    phase_floor : float
        Phase weight far from every informative phase.
    baseline_h : float
        Out-of-occultation baseline added on each side of an occultation window (hours); 0 when
        the windows already include their baselines (as :mod:`rhofollow.stages.occultations` windows do).
    lead_h : float
        Instrument setup added before an occultation block (hours; the photometer's overhead).
    partial_baseline_h : float
        Baseline wanted on each side of the occultation itself when only part of a window can be
        observed (hours).
    min_catch : float
        Smallest chance of catching the whole occultation for which a partial block is offered.
    step_h : float
        Spacing of candidate RV start times (hours).
    unreliable_weight : float
        Factor on every task value of a target whose record says ``reliable: false`` (0..1).
    min_occ_snr : float
        Smallest expected S/N × catch probability for which an occultation window is funded:
        ``occ_snr`` (the record's S/N of one fully observed event) times the probability that the
        block catches the whole event (the event happens and its mid-time falls where the block
        covers it and its baselines). Windows below it, or without an S/N (no depth, magnitude or
        photometer precision model), are left out with the reason. Records without an ``occ_snr``
        key (built by hand, not by the occultation stage) are not checked.
    """

    kappa: float = 0.5
    e_min: float = 0.1
    phase_sigma: float = 0.08
    phase_floor: float = 0.25
    baseline_h: float = 1.0
    lead_h: float = 0.0
    partial_baseline_h: float = 1.0
    min_catch: float = 0.1
    step_h: float = 1.0 / 6.0
    unreliable_weight: float = 0.5
    min_occ_snr: float = 3.0

    def reliability_weight(self, record: dict) -> float:
        """``unreliable_weight`` for a record marked ``reliable: false``, else 1."""
        return float(self.unreliable_weight) if record.get("reliable") is False else 1.0


def _failure(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


@dataclass(frozen=True)
class Skip:
    """A task not offered to the scheduler, with the reason in words."""

    name: str
    reason: str

    def to_dict(self) -> dict:
        return {"name": self.name, "reason": self.reason}


def airmass_factor(x, kappa: float = 0.5) -> np.ndarray:
    """Airmass penalty ``exp(-kappa (X - 1))`` (X >= 1 dimensionless; 0 for non-finite X)."""
    x = np.asarray(x, dtype=float)
    with np.errstate(over="ignore", invalid="ignore"):
        out = np.exp(-kappa * (np.maximum(x, 1.0) - 1.0))
    return np.where(np.isfinite(x), out, 0.0)


def phase_weight(phase, best_phases, sigma: float = 0.08, floor: float = 0.25) -> np.ndarray:
    """Weight in [floor, 1] of an RV epoch at orbital ``phase`` (0..1, 0 = transit).

    ``floor + (1 - floor) * max_j exp(-d_j^2 / (2 sigma^2))`` with ``d_j`` the circular phase
    distance to ``best_phases[j]``; 1 everywhere when ``best_phases`` is empty.
    """
    phase = np.asarray(phase, dtype=float)
    bp = np.asarray([p for p in (best_phases or []) if p is not None and np.isfinite(p)], dtype=float)
    if bp.size == 0:
        return np.ones_like(phase)
    d = np.abs(((phase[..., None] - bp) + 0.5) % 1.0 - 0.5)
    return floor + (1.0 - floor) * np.exp(-0.5 * (d / sigma) ** 2).max(axis=-1)


def ecc_evidence(e, weights=None, e_min: float = 0.1) -> float:
    """Posterior probability that the eccentricity exceeds ``e_min`` (weighted samples)."""
    e = np.asarray(e, dtype=float)
    if e.size == 0:
        return 0.0
    w = np.ones_like(e) if weights is None else np.asarray(weights, dtype=float)
    s = w.sum()
    return float(np.sum(w * (e > e_min)) / s) if s > 0 else 0.0


def _num(x, default=math.nan) -> float:
    """A float from a number or a quantile object (its median)."""
    if isinstance(x, dict):
        x = x.get("q50", default)
    try:
        return float(x) if x is not None else default
    except (TypeError, ValueError):
        return default


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
        ``E`` of the module docstring (0..1).
    vis : VisGrid
        Visibility of the night; a block must be observable at every grid point it covers.

    Returns
    -------
    tasks, skipped
        Tasks in hours since ``vis.t_jd[0]``; ``skipped`` explains windows in the night that
        cannot be observed or carry no value (or why this target's tasks could not be built).
    """
    try:
        return _occultation_tasks(record, evidence * model.reliability_weight(record), vis, model)
    except Exception as exc:  # noqa: BLE001 - one target's failure stays with that target
        return [], [Skip(f"{record.get('name', '?')} occ",
                         f"occultation blocks could not be built: {_failure(exc)}")]


def _occultation_tasks(record, evidence, vis, model):
    name = record["name"]
    p_occ = _num(record.get("p_occultation"), 1.0)
    t_occ = _num(record.get("occ_duration_h"))
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
            p_catch = p_occ * _whole_catch(record, ev, k, float(mass[k]))
            why = _undetectable(record, p_catch, model)
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


def _whole_catch(record: dict, ev: dict, k: int, mass: float) -> float:
    """Probability that the event's mid-time lies where window ``k`` holds the whole event.

    The window is the credible region widened by ``window_pad_h`` (half the duration plus the
    baseline) on each side, so the mid-time must fall inside the window shrunk by that pad; read
    off the event's mid-time quantiles. Falls back to the window's probability share ``mass``
    when the record lacks the BJD window or the pad.
    """
    pad = _num(record.get("window_pad_h")) / 24.0
    try:
        w0, w1 = (float(x) for x in ev["window_bjd_tdb"][k])
    except (IndexError, KeyError, TypeError, ValueError):
        return mass
    if not np.isfinite(pad):
        return mass
    p = float(np.diff(_mid_cdf(ev, np.array([w0 + pad, w1 - pad])))[0]) if w1 - w0 > 2 * pad else 0.0
    return p if np.isfinite(p) else mass


def _undetectable(record: dict, p_catch: float, model: ValueModel) -> str:
    """The reason an occultation block is not funded ("" when it passes ``model.min_occ_snr``)."""
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


def _mid_cdf(ev: dict, x_bjd) -> np.ndarray:
    """Piecewise-linear CDF of the event's mid-time from its quantiles (tails clamped)."""
    q = ev.get("mid_bjd_tdb") or {}
    keys = ["q025", "q16", "q50", "q84", "q975"]
    xs = np.array([_num(q.get(k)) for k in keys])
    if not np.all(np.isfinite(xs)) or np.any(np.diff(xs) < 0):
        return np.full(np.shape(x_bjd), np.nan)
    return np.interp(x_bjd, xs, [0.025, 0.16, 0.5, 0.84, 0.975], left=0.0, right=1.0)


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
    p_catch = float(np.diff(_mid_cdf(ev, np.array([m_lo, m_hi]) + offset))[0])
    if not (np.isfinite(p_catch) and p_catch >= model.min_catch):
        return None
    why = _undetectable(record, p_occ * p_catch, model)
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
        ``E`` of the module docstring.
    vis : VisGrid
    t0_bjd, period_d : float
        Transit epoch (BJD_TDB) and period (days) for the orbital phase.
    bjd_minus_jd : float
        BJD_TDB - JD_UTC for the target during the night (days; barycentric + TT-UTC correction).
    n_done : int
        Visits already obtained.
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
    n_need = _num(record.get("n_epochs_confirm_ecc"))
    if isinstance(req, dict) and req.get("visits"):
        n_need = float(req["visits"])
    hours = _num(record.get("hours_confirm_ecc"))
    if not (np.isfinite(n_need) and n_need > 0):
        return None, Skip(f"{name} rv", "eccentricity cannot be confirmed with RVs (no finite epoch count)")
    visit_h = _num(record.get("visit_h"))
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
