"""Benchmark: RV time-to-confirm at reachable epochs (feasible phases) for 200 targets over a semester.

Work: 200 invented targets with --full (40 by default) (posterior of 1,000 draws each: e, omega, K; period 1.5-15 d; V 9-13),
180 nights of a semester. Each target is observable for a window each night that grows and shrinks
over the semester (a target rising earlier night after night, up to 8 h, some nights lost to the
window closing), with candidate visit starts every 10 min; the orbital phases of those starts form
the target's :class:`rhofollow.physics.rvreach.EpochPool` (built directly here: the visibility
engine is benchmarked in bench_visibility.py). Instrument: the demo spectrograph
(site_configs/instruments/aq_vel.toml), loss fraction 0.25, FAP 1 %, power 80 %.

1. Feasible phases (what ``campaign``/``plan`` run per target, planning/rvreach.py): Fisher
   non-centrality at the reachable phases, the exposure choice, then the simulated power curve
   (``power_curve_at_pool``, 400 + 2,000 data sets per visit count, the whole visit ladder) and the
   visits to reach the power.
2. (a) Uniform phases (physics/rvconfirm.py, as the RV stage runs it): the exposure choice at
   uniform phases, the Fisher start and the galloping / bisection search of ``epochs_to_confirm``
   (400 + 2,000 data sets per evaluated N), same targets.
3. (b) A per-data-set loop of scipy.optimize fits (circular: linear least squares; eccentric:
   ``scipy.optimize.least_squares`` over (gamma, K, sqrt(e) cos w, sqrt(e) sin w) from four starts)
   on a subset of targets and data sets at the same epochs; its time per data set is extrapolated
   to the data sets one feasible-phase target simulates (ladder length x 2,400), stated.

(c) The feasible-phase power curves again with ``method="direct"`` (every visit count from scratch,
   as before the running sums) on a subset: the time, and whether the powers are identical.

All are timed in the same run, in CPU time (``time.process_time``, one BLAS thread as the
executor runs each worker: the machine may be shared, and CPU time is what a loaded machine
distorts least); the ratios are printed. Goal: <= 0.5 s per target.

Run: .venv/bin/python bench/bench_rvreach.py [--full]
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
from scipy.optimize import least_squares
from threadpoolctl import threadpool_limits

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

from rhofollow.io.instruments import read_instrument  # noqa: E402
from rhofollow.physics import rvconfirm as rc  # noqa: E402
from rhofollow.physics import rvreach  # noqa: E402
from rhofollow.physics.rv import circular_shape, rv_shape  # noqa: E402

N_NIGHTS = 180
LOSS = 0.25
FAP, POWER = 0.01, 0.8
N_ALT, N_NULL = 400, 2000
MAX_PHASES = 400        # reachable phases in the Fisher exposure choice (as planning/rvreach.py)


def synthetic_targets(n, rng, n_samples=1000):
    """Invented posteriors, hosts and reachable phases per night."""
    out = []
    nights = np.arange(N_NIGHTS)
    for _ in range(n):
        e = np.clip(rng.beta(1.2, 4.0, n_samples) * rng.uniform(0.5, 1.5), 0, 0.9)
        om = rng.uniform(0, 2 * np.pi, n_samples)
        k = np.exp(rng.normal(np.log(rng.uniform(5, 60)), 0.2, n_samples))
        period = rng.uniform(1.5, 15.0)
        t0 = rng.uniform(0, period)
        # observable window per night: centre drifts 4 min/night, length up to 8 h, shrinking
        # towards the ends of the target's season (some nights closed)
        peak = rng.uniform(-60, N_NIGHTS + 60)
        length_h = np.clip(8.0 - 0.08 * np.abs(nights - peak), 0.0, 8.0)
        start_h = 20.0 + rng.uniform(-2, 2) - 4.0 / 60.0 * (nights - peak) - 0.5 * length_h
        pool_nights = []
        for d, (s0, ln) in enumerate(zip(start_h, length_h)):
            if ln < 0.5:
                continue
            t_h = s0 + np.arange(0.0, ln - 0.5 + 1e-9, 1.0 / 6.0)
            t_d = d + t_h / 24.0
            pool_nights.append(((t_d - t0) / period) % 1.0)
        out.append({"e": e, "omega": om, "k": k, "vmag": rng.uniform(9.0, 13.0),
                    "jitter": rng.uniform(1.0, 4.0), "pool": rvreach.EpochPool(pool_nights)})
    return out


def feasible(t, inst, seed, method="running"):
    """Time-to-confirm at the reachable epochs (the planning/rvreach.py sequence); returns (visits,
    ladder length, power curve)."""
    pool = t["pool"]
    if pool.n_nights < rvreach.N_MIN:
        return None, 0, None
    ph = pool.phases
    if ph.size > MAX_PHASES:
        ph = ph[np.linspace(0, ph.size - 1, MAX_PHASES).astype(int)]
    lam = rvreach.fisher_noncentrality_at(t["e"], t["omega"], t["k"], ph)
    pick = rvreach.choose_exposure(lam, None, t["vmag"], t["jitter"], inst, n_cap=pool.n_nights, loss=LOSS,
                                   fap=FAP, power=POWER)
    ladder = rvreach.visit_ladder(pool.n_nights)
    curve = rvreach.power_curve_at_pool(t["e"], t["omega"], t["k"], pick["sigma_ms"], pool, ladder, loss=LOSS,
                                        fap=FAP, seed=seed, n_alt=N_ALT, n_null=N_NULL, power=POWER,
                                        method=method)
    return rvreach.visits_for_power(curve, POWER), len(ladder), curve


def uniform(t, inst, seed, grid):
    """Time-to-confirm at uniform phases (the stages/rv.py sequence)."""
    pick = rvreach.choose_exposure_uniform(t["e"], t["omega"], t["k"], None, t["vmag"], t["jitter"], inst,
                                           fap=FAP, power=POWER, seed=seed)
    s = pick["sigma_ms"]
    nf = rc.fisher_epochs_to_confirm(t["e"], t["omega"], t["k"], s, fap=FAP, power=POWER, seed=seed)
    r = rc.epochs_to_confirm(t["e"], t["omega"], t["k"], s, fap=FAP, power=POWER, start=nf, seed=seed,
                             n_alt=N_ALT, n_null=N_NULL, grid=grid)
    return r["n"]


def fit_loop(t, sigma, n_visits, n_sets, rng):
    """Per-data-set scipy.optimize fits at one reachable epoch set; returns (seconds, data sets)."""
    ph = t["pool"].draw(1, n_visits, rng)[0]
    x = np.column_stack([np.ones(n_visits), circular_shape(ph)])

    def dchi(y):
        c = np.linalg.lstsq(x, y, rcond=None)[0]
        chi_c = np.sum((y - x @ c) ** 2)

        def res(p):
            ee = min(p[2] ** 2 + p[3] ** 2, 0.95)
            return y - p[0] - p[1] * rv_shape(ph, ee, np.arctan2(p[3], p[2]))

        best = np.inf
        for w0 in (0.0, 0.5 * np.pi, np.pi, 1.5 * np.pi):
            p0 = [c[0], c[1], np.sqrt(0.2) * np.cos(w0), np.sqrt(0.2) * np.sin(w0)]
            r = least_squares(res, p0, bounds=([-np.inf, -np.inf, -0.97, -0.97], [np.inf, np.inf, 0.97, 0.97]))
            best = min(best, 2 * r.cost)
        return max(chi_c - best, 0.0)

    t0 = time.process_time()
    for j in range(n_sets):
        i = rng.integers(0, t["e"].size)
        shape = rv_shape(ph, t["e"][i], t["omega"][i]) if j % 2 == 0 else circular_shape(ph)
        dchi((t["k"][i] * shape + sigma * rng.standard_normal(n_visits)) / sigma)
    return time.process_time() - t0, n_sets


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--full", action="store_true",
                    help="200 targets (the issue's size; about 15 min on a busy machine) and the fit loop on "
                         "5 targets x 100 data sets (default: 40 targets, fit loop on 2 x 30)")
    ap.add_argument("--targets", type=int, default=None, help="number of targets (overrides the default)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--direct", type=int, default=None, metavar="N",
                    help="targets recomputed with the direct method (default 10 with --full, else 4)")
    a = ap.parse_args()
    with threadpool_limits(1):
        _run(a)


def _run(a):
    n_loop, n_sets = (5, 100) if a.full else (2, 30)
    a.targets = a.targets or (200 if a.full else 40)
    n_uni = a.targets
    n_direct = a.direct if a.direct is not None else (10 if a.full else 4)
    rng = np.random.default_rng(a.seed)
    inst = read_instrument(ROOT / "site_configs" / "instruments" / "aq_vel.toml")
    t_build = time.process_time()
    targets = synthetic_targets(a.targets, rng)
    t_build = time.process_time() - t_build
    grid = rc.ecc_grid()

    t = time.process_time()
    res = [feasible(tg, inst, seed=i) for i, tg in enumerate(targets)]
    t_feas = time.process_time() - t
    ns = [r[0] for r in res]
    ladder_len = np.mean([r[1] for r in res if r[1]])
    reach = [n for n in ns if n is not None]
    m = [tg["pool"].n_nights for tg in targets]
    print(f"feasible phases: {a.targets} targets x {N_NIGHTS} nights (median {np.median(m):.0f} reachable "
          f"nights; pools built in {t_build:.2f} s, not counted) in {t_feas:.1f} s = "
          f"{t_feas / a.targets:.3f} s CPU per target (goal <= 0.5 s); confirmable {len(reach)}/{a.targets}, "
          f"median {np.median(reach) if reach else float('nan'):.0f} visits; ladder {ladder_len:.1f} visit "
          f"counts x {N_ALT + N_NULL} data sets")

    t = time.process_time()
    nu = [uniform(tg, inst, seed=i, grid=grid) for i, tg in enumerate(targets[:n_uni])]
    t_uni = time.process_time() - t
    both = [(f, u) for f, u in zip(ns[:n_uni], nu) if f is not None and u is not None]
    more = np.mean([f >= u for f, u in both]) if both else float("nan")
    print(f"(a) uniform phases (rvconfirm.epochs_to_confirm), {n_uni} targets: {t_uni:.1f} s = "
          f"{t_uni / n_uni:.3f} s per target; feasible / uniform time ratio "
          f"{(t_feas / a.targets) / (t_uni / n_uni):.2f} (CPU); visits: median "
          f"{np.median([u for u in nu if u is not None]) if any(u is not None for u in nu) else float('nan'):.0f} "
          f"uniform, feasible >= uniform for {100 * more:.0f} % of the {len(both)} targets confirmable both ways")

    tl = nl = 0.0
    for i, tg in enumerate(targets[:n_loop]):
        sig = rvreach.choose_exposure(
            rvreach.fisher_noncentrality_at(tg["e"], tg["omega"], tg["k"], tg["pool"].phases[:MAX_PHASES]),
            None, tg["vmag"], tg["jitter"], inst, n_cap=tg["pool"].n_nights, loss=LOSS)["sigma_ms"]
        dt_, n_ = fit_loop(tg, sig, min(20, tg["pool"].n_nights), n_sets, np.random.default_rng(100 + i))
        tl += dt_
        nl += n_
    per_set = tl / nl
    per_target_loop = per_set * ladder_len * (N_ALT + N_NULL)
    print(f"(b) scipy.optimize fit loop: {nl:.0f} data sets at 20 visits on {n_loop} targets in {tl:.1f} s = "
          f"{per_set * 1e3:.1f} ms per data set; extrapolated to one feasible-phase target "
          f"({ladder_len:.1f} x {N_ALT + N_NULL} data sets): {per_target_loop:.0f} s per target; ratio "
          f"{per_target_loop / (t_feas / a.targets):.0f}x (CPU)")

    t = time.process_time()
    direct = [feasible(tg, inst, seed=i, method="direct") for i, tg in enumerate(targets[:n_direct])]
    t_dir = time.process_time() - t
    same = sum(d[2] is None and r[2] is None or (d[2] is not None and r[2] is not None
                                                  and d[2]["power"] == r[2]["power"] and d[0] == r[0])
               for d, r in zip(direct, res))
    t = time.process_time()
    for i, tg in enumerate(targets[:n_direct]):
        feasible(tg, inst, seed=i)
    t_run = time.process_time() - t
    print(f"(c) direct sums (every visit count from scratch), {n_direct} targets: {t_dir:.1f} s = "
          f"{t_dir / n_direct:.3f} s per target against {t_run / n_direct:.3f} s with running sums "
          f"(ratio {t_dir / t_run:.1f}x, CPU); identical powers and visits for {same}/{n_direct} targets")


if __name__ == "__main__":
    main()
