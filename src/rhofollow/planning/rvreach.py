"""RV time-to-confirm at the epochs the site can observe in the date range, with the exposure per
visit chosen from the instrument's precision model and the overheads itemised once.

:func:`reachable_rv` takes the RV records of :func:`rhofollow.stages.rv.plan_rv` (uniform-phase
answer), the posterior samples, the campaign's per-night visibility (:class:`.campaign.NightVis`)
and the site's loss fraction, and rewrites each record's planning keys in place:

``exposure_s, sigma_rv_ms, visit_h, overheads (itemised per visit), n_epochs_confirm_ecc (visits to
request), hours_confirm_ecc, power_at_n`` and ``confirm_reachable`` = ``{"phase_model":
"reachable", "n_nights_reachable", "loss_fraction", "power_curve": [{"n", "power"}], "visits",
"hours", "power_target", "confirmable", "exposure_reason"}`` (and ``visits_in_hand`` when RVs are
in hand). The uniform-phase numbers stay under ``uniform_phase`` (``n_epochs_confirm_ecc``,
``hours_confirm_ecc``, ``exposure_s``).

RVs in hand (``epochs_in_hand``, e.g. the ledger's measured RVs, :func:`epochs_from_ledger`) enter
every simulated data set at their own phases and errors (jitter added), never lost; the visit
counts of the curve, and so the visits requested, are the new visits on top of them. Their nights
leave the science dict's ``n_done`` (the planners subtract the rest: visits logged as done
without a measured RV yet).

Visit cost, itemised once (:func:`visit_overheads`): exposure + the spectrograph's
``overhead_min`` (pointing/slew, acquisition, read-out: the instrument file's own definition). The
site's ``slew_minutes`` and ``setup_minutes`` are *not* added again to an RV visit: they stay the
gap the scheduler keeps between consecutive blocks and count in the hours of occultation blocks,
which have no pointing overhead of their own.

Observatory safety limits and site operations rules override any plan made from these numbers.
"""
from __future__ import annotations

import numpy as np

from rhofollow.physics import rvreach
from rhofollow.planning.tasks import rv_task

__all__ = ["visit_overheads", "night_phases", "epoch_pool", "reachable_rv", "epochs_from_ledger",
           "DEFAULT_LOSS_FRACTION"]

#: Loss fraction used when the site file gives none (weather and technical losses; common
#: practice, no source): see ``[overheads] loss_fraction`` in :mod:`.site`.
from rhofollow.planning.site import DEFAULT_LOSS_FRACTION  # noqa: E402

_MAX_POSTERIOR = 1000   # posterior draws used per target (weighted resampling)
_MAX_PHASES = 400       # reachable phases used in the Fisher exposure choice


def visit_overheads(exposure_s: float, inst) -> dict:
    """Itemised cost of one RV visit: exposure plus the spectrograph's own overhead.

    Parameters
    ----------
    exposure_s : float, exposure time of the visit, seconds
    inst : :class:`rhofollow.io.instruments.Spectrograph`, its ``overhead_s`` (pointing,
        acquisition and read-out, seconds) is used

    Returns
    -------
    dict: ``exposure_s`` (s, rounded to 0.1), ``instrument_overhead_s`` (s), ``site_slew_setup_s``
    (0 s: covered by the instrument overhead) and ``visit_h`` = (exposure + overhead) / 3600 (hours)
    """
    o = float(inst.overhead_s)
    return {"exposure_s": round(float(exposure_s), 1), "instrument_overhead_s": o, "site_slew_setup_s": 0.0,
            "visit_h": (float(exposure_s) + o) / 3600.0}


def night_phases(night, name: str, visit_h: float, t0_bjd: float, period_d: float,
                 bjd_minus_jd: float, step_h: float) -> np.ndarray:
    """Orbital phases (0..1, of the visit middle) of the candidate visit starts of one night.

    The candidates are those the campaign would consider: the starts of
    :func:`rhofollow.planning.tasks.rv_task` inside the night's limits (every grid point of the
    visit observable).

    Parameters
    ----------
    night : :class:`rhofollow.planning.campaign.NightVis`, the night's visibility and limits (JD)
    name : str, target name
    visit_h : float, duration of one visit, hours
    t0_bjd : float, mid-transit epoch, BJD_TDB (days)
    period_d : float, orbital period, days
    bjd_minus_jd : float, BJD_TDB - JD_UTC during the night, days
    step_h : float, step of the candidate start grid, hours

    Returns
    -------
    ndarray, orbital phases (t - t0) / P mod 1 (cycles, 0 = mid-transit); empty when none
    """
    rec = {"name": name, "n_epochs_confirm_ecc": 1, "visit_h": visit_h, "best_phases": []}
    from rhofollow.planning.tasks import ValueModel

    task, _ = rv_task(rec, 1.0, night.vis, t0_bjd, period_d, bjd_minus_jd, 0, ValueModel(step_h=step_h))
    if task is None:
        return np.zeros(0)
    h0, h1 = night.vis.hours(night.start_jd), night.vis.hours(night.end_jd)
    st = task.starts()
    st = st[(st >= h0 - 1e-9) & (st + task.duration <= h1 + 1e-9)]
    mid = night.vis.t_jd[0] + (st + 0.5 * visit_h) / 24.0
    return ((mid + bjd_minus_jd - t0_bjd) / period_d) % 1.0


def epoch_pool(nights, entry: dict, visit_h: float, step_h: float = 1.0 / 6.0) -> rvreach.EpochPool:
    """The reachable epochs of one science entry over the nights of the range.

    Parameters
    ----------
    nights : list of :class:`rhofollow.planning.campaign.NightVis`
    entry : dict, science entry with ``name``, ``t0_bjd`` (BJD_TDB), ``period_d`` (days) and
        optionally ``bjd_minus_jd`` (BJD_TDB - JD_UTC, days, default 0)
    visit_h : float, duration of one visit, hours
    step_h : float, step of the candidate start grid, hours (default 10 minutes)

    Returns
    -------
    :class:`rhofollow.physics.rvreach.EpochPool`, phases (cycles) per night (empty nights dropped)
    """
    return rvreach.EpochPool([night_phases(n, entry["name"], visit_h, entry["t0_bjd"], entry["period_d"],
                                           entry.get("bjd_minus_jd", 0.0), step_h) for n in nights])


def _subsample(s, k, seed, name):
    from rhofollow.stages.rv import _rng

    rng = _rng(seed, name, "reach-sub")
    n = min(_MAX_POSTERIOR, s.n)
    w = s.weights / s.weights.sum()
    cw = np.cumsum(w)
    cw[-1] = 1.0
    idx = np.searchsorted(cw, (rng.random() + np.arange(n)) / n)
    return s.e[idx], s.omega[idx], np.asarray(k)[idx]


def reachable_rv(assessments, science: list[dict], nights, inst, *, loss_fraction: float,
                 fap: float = 0.01, power: float = 0.8, seed: int = 0, n_alt: int = 400, n_null: int = 2000,
                 relation: str = "auto", progress=None, epochs_in_hand: dict | None = None, workers: int = 1,
                 dask_address: str | None = None) -> None:
    """Time-to-confirm at reachable epochs for every science entry with an RV record (in place).

    The posterior draws of each target (mass and K, then the weighted resample) are made here; the
    power curves run through :func:`rhofollow.core.executor.dispatch` (this process, a process pool
    or a dask cluster), each target with only its draws and its own rows of the nights' visibility,
    so every mode gives the same records.

    Parameters
    ----------
    assessments : objects with ``name`` and ``samples`` (:class:`rhofollow.core.samples.SampleSet`)
    science : science dicts (:func:`rhofollow.planning.night.science_from_records`); their ``rv``
        records are updated (the same dicts as the RV stage's records)
    nights : list of :class:`rhofollow.planning.campaign.NightVis` (the date range)
    inst : the spectrograph (:class:`rhofollow.io.instruments.Spectrograph`)
    loss_fraction : probability that a requested visit is lost (site file)
    fap, power : the test's false-alarm probability and the power wanted
    seed : run seed (per-target draws depend on seed and name only)
    n_alt, n_null : simulated data sets per visit count
    relation : mass-radius relation (the RV stage's)
    progress : optional callable, once per target
    epochs_in_hand : target name -> (BJD_TDB (days), RV errors (m/s)) of the RVs already measured
        (:func:`epochs_from_ledger`), or None. They enter the power curve (:func:`_in_hand`), so the
        visits to request are those on top of them.
    workers, dask_address : where the power curves run (as ``plan --workers`` / ``--dask``)

    Returns
    -------
    None (the records are updated in place)
    """
    from rhofollow.core.executor import dispatch

    samples = {a.name: a.samples for a in assessments if getattr(a, "samples", None) is not None}
    hand = epochs_in_hand or {}
    todo = []
    for i, entry in enumerate(science):
        rec = entry.get("rv")
        if rec and rec.get("ok", True) and samples.get(entry["name"]) is not None and "sigma_rv_ms" in rec \
                and np.isfinite(entry.get("period_d", np.nan)) and np.isfinite(entry.get("t0_bjd", np.nan)):
            todo.append(i)
        elif progress is not None:
            progress()
    settings = (inst, loss_fraction, fap, power, seed, n_alt, n_null)

    def make_job(part):
        return ([_reach_job(i, science[i], samples[science[i]["name"]], nights, seed, relation,
                            hand.get(science[i]["name"])) for i in part], settings)

    for done in dispatch(_reach_chunk, todo, workers=workers, dask_address=dask_address, make_job=make_job):
        for i, rec, n_done in done:
            entry = science[i]
            if rec is not entry["rv"]:  # from another process: the stage's dict keeps its identity
                entry["rv"].clear()
                entry["rv"].update(rec)
            if n_done is not None:
                entry["n_done"] = n_done
            if progress is not None:
                progress()


def _target_nights(nights, name: str) -> list:
    """The nights with only ``name``'s row of their visibility (what one target's curve needs)."""
    from rhofollow.planning.campaign import NightVis
    from rhofollow.planning.visgrid import VisGrid

    out = []
    for n in nights:
        v = n.vis
        rows = [v.row(name)] if name in v.names else []
        out.append(NightVis(n.date, VisGrid(v.t_jd, [name] if rows else [], v.observable[rows], v.airmass[rows]),
                            n.start_jd, n.end_jd))
    return out


def _reach_job(i, entry, s, nights, seed, relation, in_hand):
    """One target's job for :func:`_reach_chunk`: its draws (or the error they raised) and its nights."""
    from rhofollow.stages.rv import _rng, planet_mass_and_k

    name = entry["name"]
    small = {key: entry[key] for key in ("name", "t0_bjd", "period_d", "bjd_minus_jd", "n_done") if key in entry}
    try:
        _mp, k, _used = planet_mass_and_k(s, _rng(seed, name, "mass"), relation)
        draws = _subsample(s, k, seed, name) + (float(s.meta.get("vmag")),)
    except Exception as exc:  # noqa: BLE001 - reported with the target by _reach_chunk
        draws = exc
    return i, entry["rv"], small, draws, _target_nights(nights, name), in_hand


def _reach_chunk(jobs, settings):
    """The reachable-epoch answers of a chunk of targets: ``[(index, rv record, n_done)]``.

    Parameters
    ----------
    jobs : list of :func:`_reach_job` tuples
    settings : (spectrograph, loss fraction, fap, power, seed, n_alt, n_null)

    Returns
    -------
    list of tuples (index in the science list, the updated record, the entry's ``n_done`` or None)
    """
    inst, loss, fap, power, seed, n_alt, n_null = settings
    out = []
    for i, rec, entry, draws, nights, in_hand in jobs:
        try:
            if isinstance(draws, Exception):
                raise draws
            _one(rec, entry, draws, nights, inst, loss, fap, power, seed, n_alt, n_null, in_hand)
        except Exception as exc:  # noqa: BLE001 - one target's failure stays with that target
            rec.setdefault("warnings", []).append(
                f"time-to-confirm at reachable epochs failed ({type(exc).__name__}: {exc}); "
                "the uniform-phase answer is kept")
        out.append((i, rec, entry.get("n_done")))
    return out


def _one(rec, entry, draws, nights, inst, loss, fap, power, seed, n_alt, n_null, in_hand=None):
    from rhofollow.stages.rv import _rng

    name = entry["name"]
    e, om, kk, vmag = draws
    rec.setdefault("uniform_phase", {key: rec.get(key) for key in ("n_epochs_confirm_ecc", "hours_confirm_ecc",
                                                          "exposure_s", "sigma_rv_ms", "visit_h", "power_at_n")})
    # exposure: fewest hours on the Fisher estimate at the reachable phases of the shortest visit
    short = visit_overheads(inst.exposure_min_s, inst)["visit_h"]
    pool0 = epoch_pool(nights, entry, short)
    if pool0.n_nights == 0:
        _not_confirmable(rec, 0, loss, power, "not observable for an RV visit on any night of the range")
        return
    ph = pool0.phases
    if ph.size > _MAX_PHASES:
        ph = ph[np.linspace(0, ph.size - 1, _MAX_PHASES).astype(int)]
    lam = rvreach.fisher_noncentrality_at(e, om, kk, ph)
    pick = rvreach.choose_exposure(lam, None, vmag, rec["jitter_ms"], inst, n_cap=pool0.n_nights, loss=loss,
                                   fap=fap, power=power)
    cost = visit_overheads(pick["exposure_s"], inst)
    pool = epoch_pool(nights, entry, cost["visit_h"])
    rec.update(exposure_s=cost["exposure_s"], sigma_rv_ms=pick["sigma_ms"], visit_h=cost["visit_h"],
               overheads=cost)
    m = pool.n_nights
    prior = _in_hand(entry, rec, in_hand)
    n_min = rvreach.N_MIN if prior is None else max(1, rvreach.N_MIN - prior[0].size)
    if m < n_min:
        _not_confirmable(rec, m, loss, power, f"only {m} night(s) of the range allow a visit "
                         f"(at least {n_min} visits are needed)")
        rec["confirm_reachable"]["exposure_reason"] = pick["reason"]
        return
    curve = rvreach.power_curve_at_pool(e, om, kk, pick["sigma_ms"], pool, rvreach.visit_ladder(m, n_min),
                                        loss=loss, fap=fap, seed=_rng(seed, name, "reach-lrt"), n_alt=n_alt,
                                        n_null=n_null, power=power, prior_phases=None if prior is None else prior[0],
                                        prior_sigma=None if prior is None else prior[1])
    n = rvreach.visits_for_power(curve, power)
    pts = [{"n": a, "power": round(b, 4)} for a, b in zip(curve["n"], curve["power"])]
    hours = None if n is None else n * cost["visit_h"]
    rec["confirm_reachable"] = {
        "phase_model": "reachable", "n_nights_reachable": m, "loss_fraction": loss, "power_target": power,
        "power_curve": pts, "visits": n, "hours": hours, "confirmable": n is not None,
        "exposure_reason": pick["reason"], "n_fisher": pick["n_fisher"]}
    if prior is not None:
        rec["confirm_reachable"]["visits_in_hand"] = int(prior[0].size)
    rec["n_epochs_confirm_ecc"] = n
    rec["hours_confirm_ecc"] = hours
    i = curve["n"].index(n) if n is not None else len(curve["n"]) - 1
    rec["power_at_n"] = curve["power"][i]
    rec["lrt_threshold"] = curve["threshold"][i]
    if n is None:
        rec["confirm_reachable"]["note"] = (
            f"not confirmable in this range: {m} reachable visits give power {curve['power'][-1]:.2f} "
            f"< {power:.2f}")
        _warn(rec, rec["confirm_reachable"]["note"])


def _in_hand(entry, rec, in_hand):
    """Phases and errors (jitter added in quadrature, m/s) of the RVs in hand, or None.

    The science dict's ``n_done`` (visits done, which the planners subtract from the visits
    needed) loses the nights of these RVs: they are counted in the power curve instead, and the
    visits it gives are already those on top of them.
    """
    if in_hand is None:
        return None
    bjd, err = (np.atleast_1d(np.asarray(a, float)) for a in in_hand)
    ok = np.isfinite(bjd) & np.isfinite(err) & (err > 0)
    if not ok.any():
        return None
    bjd, err = bjd[ok], err[ok]
    phases = ((bjd - entry["t0_bjd"]) / entry["period_d"]) % 1.0
    sigma = np.sqrt(err ** 2 + float(rec.get("jitter_ms") or 0.0) ** 2)
    nights = len({int(b + 0.5) for b in bjd})
    entry["n_done"] = max(0, int(entry.get("n_done", 0)) - nights)
    return phases, sigma


def epochs_from_ledger(path, names) -> dict:
    """The RVs in hand per target from a campaign ledger: name -> (BJD_TDB (days), errors (m/s)).

    Parameters
    ----------
    path : the ledger file (SQLite, :class:`rhofollow.io.ledger.Ledger`), or None
    names : target names

    Returns
    -------
    dict (targets without RVs left out; empty without a ledger)
    """
    if not path:
        return {}
    from rhofollow.io.ledger import Ledger

    lg = Ledger(path)
    out = {}
    for name in names:
        ms = lg.rv_measurements(name)
        if ms:
            out[name] = (np.array([m.bjd_tdb for m in ms]), np.array([m.rv_err_ms for m in ms]))
    return out


def _not_confirmable(rec, m, loss, power, why):
    rec["confirm_reachable"] = {"phase_model": "reachable", "n_nights_reachable": m, "loss_fraction": loss,
                                "power_target": power, "power_curve": [], "visits": None, "hours": None,
                                "confirmable": False, "note": f"not confirmable in this range: {why}"}
    rec["n_epochs_confirm_ecc"] = None
    rec["hours_confirm_ecc"] = None
    rec["power_at_n"] = 0.0
    _warn(rec, rec["confirm_reachable"]["note"])


def _warn(rec, text):
    ws = rec.setdefault("warnings", [])
    if text not in ws:
        ws.append(text)
