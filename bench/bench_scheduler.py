"""Benchmark: the exact scheduler against the greedy baseline, and a nightly plan for 500 targets.

Part 1 - random single-night instances (fixed occultation-like windows and flexible RV-like visits
with phase-dependent value): total value and time of the exact solver (weighted interval DP when
all tasks are fixed, scipy.optimize.milp otherwise) and of the greedy baseline (highest value
first), run in the same process on the same instances.

Part 2 - a nightly plan for N targets (default 500) on a synthetic visibility grid (5-minute
steps over a 9-hour night, each target up for a random part of it): time of
:func:`rhofollow.planning.night.plan_night` with the exact solver and with the greedy baseline.

    .venv/bin/python bench/bench_scheduler.py          # short run (< 2 min)
    .venv/bin/python bench/bench_scheduler.py --full   # larger instances
"""
from __future__ import annotations

import argparse
import time

import numpy as np

from rhofollow.planning.milp import DEFAULT_TIME_LIMIT_S
from rhofollow.planning.night import plan_night, science_entry
from rhofollow.planning.scheduler import FixedTask, FlexibleTask, schedule
from rhofollow.planning.tasks import VisGrid, jd_to_iso

JD0 = 2461385.5 + 1 / 24.0


def random_tasks(rng, n_fixed, n_flex, night_h=9.0):
    """Invented instance: windows of 1-5 h, visits of 0.2-1 h allowed in a 1-6 h slot."""
    tasks = []
    for i in range(n_fixed):
        s = rng.uniform(0, night_h - 1)
        tasks.append(FixedTask(f"occ{i}", s, min(night_h, s + rng.uniform(1, 5)), rng.uniform(0.05, 1)))
    for i in range(n_flex):
        d = rng.uniform(0.2, 1.0)
        a = rng.uniform(0, night_h - d)
        b = min(night_h - d, a + rng.uniform(1, 6))
        v0, ph, per = rng.uniform(0.02, 0.5), rng.uniform(0, 1), rng.uniform(1, 10) * 24
        tasks.append(FlexibleTask(f"rv{i}", d, ((a, b),),
                                  lambda s, v0=v0, ph=ph, per=per: v0 * (0.25 + 0.75 * np.cos(
                                      np.pi * ((s / per - ph) % 1.0)) ** 2), step=1 / 6))
    return tasks


def part1(sizes, n_rep, seed):
    print("Part 1: exact scheduler vs greedy baseline (same instances, same run)")
    print("greedy = highest value first; density = highest value per hour first (both baselines)")
    print(f"{'fixed':>6} {'flex':>5} {'reps':>4} | {'exact':>7} {'greedy':>7} {'density':>7} {'gain':>6} |"
          f" {'exact s':>8} {'greedy s':>8} {'time ratio':>10}")
    rng = np.random.default_rng(seed)
    for n_fixed, n_flex in sizes:
        ve = vg = vd = te = tg = 0.0
        for _ in range(n_rep):
            tasks = random_tasks(rng, n_fixed, n_flex)
            t = time.perf_counter()
            ex = schedule(tasks, overhead=1 / 6, horizon=(0, 9))
            te += time.perf_counter() - t
            t = time.perf_counter()
            gr = schedule(tasks, overhead=1 / 6, horizon=(0, 9), method="greedy")
            tg += time.perf_counter() - t
            gd = schedule(tasks, overhead=1 / 6, horizon=(0, 9), method="greedy", order="density")
            for g in (gr, gd):
                assert ex.value >= g.value * (1 - 1e-7) - 1e-9  # HiGHS tolerance on near-ties
            ve += ex.value
            vg += gr.value
            vd += gd.value
        print(f"{n_fixed:>6} {n_flex:>5} {n_rep:>4} | {ve / n_rep:>7.3f} {vg / n_rep:>7.3f} {vd / n_rep:>7.3f} "
              f"{100 * (ve / max(vg, vd) - 1):>5.1f}% | {te / n_rep:>8.4f} {tg / n_rep:>8.4f} {te / tg:>9.1f}x")


def synthetic_night(rng, n):
    """Science dicts and a VisGrid for n invented targets on a 9-hour, 5-minute grid."""
    t = JD0 + np.arange(109) * 5 / 1440
    names = [f"HTS-{1000 + i}" for i in range(n)]
    rise = rng.uniform(-4, 8, n)
    up = rng.uniform(2, 9, n)
    hours = (t - t[0]) * 24
    obs = (hours[None, :] >= rise[:, None]) & (hours[None, :] <= (rise + up)[:, None])
    x = 1.0 + 0.8 * ((hours[None, :] - (rise + up / 2)[:, None]) / 6) ** 2
    sci = []
    for i, name in enumerate(names):
        occ = None
        if rng.random() < 0.3:
            w0 = t[0] + rng.uniform(0, 7) / 24
            occ = {"p_occultation": rng.uniform(0.5, 1), "occ_duration_h": rng.uniform(1, 3),
                   "events": [{"epoch": 10, "window_utc": [[jd_to_iso(w0),
                                                            jd_to_iso(w0 + rng.uniform(1, 3) / 24)]]}]}
        n_ep = int(rng.integers(3, 40))
        rv = {"n_epochs_confirm_ecc": n_ep, "hours_confirm_ecc": n_ep * rng.uniform(0.2, 0.9),
              "best_phases": [rng.uniform(0, 1), rng.uniform(0, 1)]}
        sci.append(science_entry(name, evidence=rng.uniform(0.1, 1), occultation=occ, rv=rv,
                                 t0_bjd=JD0 - rng.uniform(0, 5), period_d=rng.uniform(1, 20)))
    return sci, VisGrid(t, names, obs, x)


def part2(n, seed, time_limit):
    print(f"\nPart 2: nightly plan for {n} targets (synthetic visibility, 9-h night, 5-min grid)")
    rng = np.random.default_rng(seed)
    sci, vis = synthetic_night(rng, n)
    kw = dict(site="Alto Quemado Observatory", night_start_jd=vis.t_jd[0], night_end_jd=vis.t_jd[-1],
              overhead_h=10 / 60)
    t = time.perf_counter()
    ex = plan_night(sci, vis, time_limit=time_limit, **kw)
    te = time.perf_counter() - t
    t = time.perf_counter()
    gr = plan_night(sci, vis, method="greedy", **kw)
    tg = time.perf_counter() - t
    print(f"exact ({ex.schedule.method}, {ex.schedule.status}): {len(ex.blocks)} blocks, value "
          f"{ex.schedule.value:.3f}, {te:.2f} s")
    print(f"greedy baseline: {len(gr.blocks)} blocks, value {gr.schedule.value:.3f}, {tg:.2f} s")
    print(f"value gain {100 * (ex.schedule.value / gr.schedule.value - 1):.1f}%, time ratio exact/greedy "
          f"{te / tg:.1f}x")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--full", action="store_true", help="larger instances and more repetitions")
    ap.add_argument("--targets", type=int, default=500, help="targets in the nightly plan (default 500)")
    ap.add_argument("--seed", type=int, default=7)
    ap.add_argument("--time-limit", type=float, default=DEFAULT_TIME_LIMIT_S,
                    help=f"MILP time limit per solve (s; default the planners' {DEFAULT_TIME_LIMIT_S:g})")
    a = ap.parse_args()
    if a.full:
        sizes, reps = [(200, 0), (2000, 0), (10, 20), (20, 60), (30, 150)], 5
    else:
        sizes, reps = [(100, 0), (1000, 0), (8, 12), (15, 40)], 3
    part1(sizes, reps, a.seed)
    part2(a.targets if not a.full else max(a.targets, 1000), a.seed, a.time_limit)


if __name__ == "__main__":
    main()
