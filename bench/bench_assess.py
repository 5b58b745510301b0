"""Benchmark: the assessment of many catalogue rows, against a plain per-sample Python loop.

Default: 200 rows x 20,000 samples (serial and 2 workers); ``--full``: 1,000 rows x 20,000 samples.
The baseline evaluates the same duration-route likelihood sample by sample with the math module (no
numpy, no adaptation) on a few rows and is scaled to the same number of samples. Prints both times and
the ratio. Not part of the test run.
"""
from __future__ import annotations

import argparse
import math
import random
import time

import numpy as np

from rhofollow.core.types import Measurement as M, Target
from rhofollow.stages.assess_many import assess_parallel
from rhofollow.physics.priors import parse_prior
from rhofollow.physics.transit import ars_from_rho, eccentric_durations


def synthetic_rows(n: int, seed: int = 1) -> list[Target]:
    """Invented candidates with a mix of routes and eccentricities (durations or a/R*; four star routes)."""
    rng = np.random.default_rng(seed)
    out = []
    for i in range(n):
        P = float(np.exp(rng.uniform(np.log(1.5), np.log(40))))
        e = float(rng.beta(0.867, 3.03)) * 0.9
        w = float(rng.uniform(0, 2 * np.pi))
        b = float(rng.uniform(0, 0.8))
        k = float(rng.uniform(0.03, 0.15))
        rho = float(rng.uniform(0.3, 3.0))
        a = float(ars_from_rho(rho, P))
        if a * (1 - e) < 2:
            e = 0.0
        t14, t23 = (float(x) * 24 for x in eccentric_durations(a, b, k, P, e, w))
        v = {"period_d": M(P, 1e-5, 1e-5), "t0_bjd": M(2461000 + rng.uniform(0, 50), 1e-3, 1e-3),
             "ra_deg": M(rng.uniform(0, 360)), "dec_deg": M(rng.uniform(-80, 30))}
        if i % 3:
            v["t14_h"] = M(t14, 0.01 * t14, 0.01 * t14)
            v["b"] = M(b, 0.05, 0.05)
            v["depth_ppm"] = M(k * k * 1e6, 0.02 * k * k * 1e6, 0.02 * k * k * 1e6)
        else:
            g = (1 + e * math.sin(w)) / math.sqrt(1 - e * e)
            v["a_rs"] = M(a * g, 0.03 * a * g, 0.03 * a * g)
            v["rp_rs"] = M(k, 0.01 * k, 0.01 * k)
        if i % 2:
            v["rho_star_cgs"] = M(rho, 0.06 * rho, 0.06 * rho)
            v["mstar_msun"] = M(1.0, 0.05, 0.05)
        else:
            v["teff_k"] = M(5800, 80, 80)
            v["logg_cgs"] = M(4.44 + math.log10(rho / 1.41) / 3, 0.08, 0.08)
            v["feh_dex"] = M(0.0, 0.08, 0.08)
        out.append(Target(f"BENCH-{i:05d}", i + 1, "bench", v))
    return out


def baseline_scalar(t: Target, n: int, seed: int) -> float:
    """Plain per-sample loop: prior draw, star draw, eccentric durations with math, likelihood weight."""
    rnd = random.Random(seed)
    prior = parse_prior("kipping13")
    G, DAY = 6.6743e-11, 86400.0
    v = t.values
    P = v["period_d"].value
    wsum = 0.0
    for _ in range(n):
        e = float(prior.ppf(rnd.random()))
        w = 2 * math.pi * rnd.random()
        rho = 1.4 * (1 + 0.06 * rnd.gauss(0, 1))
        k = 0.1
        b = (1 + k) * rnd.random()
        a = (rho * 1e3 * G * (P * DAY) ** 2 / (3 * math.pi)) ** (1 / 3)
        fac = (1 - e * e) / (1 + e * math.sin(w))
        cosi = b / (a * fac)
        if cosi >= 1:
            continue
        sini = math.sqrt(1 - cosi * cosi)
        x = math.sqrt(max((1 + k) ** 2 - b * b, 0)) / (a * sini)
        t14 = P / math.pi * math.asin(min(x, 1.0)) * math.sqrt(1 - e * e) / (1 + e * math.sin(w)) * 24
        obs = v["t14_h"].value if "t14_h" in v else 3.0
        wsum += math.exp(-0.5 * ((t14 - obs) / (0.01 * obs)) ** 2) * (1 + e * math.sin(w)) / (1 - e * e)
    return wsum


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--full", action="store_true", help="1,000 rows x 20,000 samples")
    ap.add_argument("--rows", type=int, default=None)
    ap.add_argument("--samples", type=int, default=20000)
    args = ap.parse_args()
    rows = args.rows or (1000 if args.full else 200)
    targets = synthetic_rows(rows)
    prior = parse_prior("kipping13")
    assess_parallel(targets[:3], n_samples=2000, prior=prior, seed=0)  # warm-up (imports, caches)

    t0 = time.perf_counter()
    res = assess_parallel(targets, n_samples=args.samples, prior=prior, seed=1, workers=1)
    t_serial = time.perf_counter() - t0
    n_ok = sum(r.ok for r in res)
    ess = np.median([r.record["ess"] for r in res if r.ok])
    evals = sum(r.samples.n for r in res if r.ok)

    t0 = time.perf_counter()
    res2 = assess_parallel(targets, n_samples=args.samples, prior=prior, seed=1, workers=2)
    t_two = time.perf_counter() - t0
    same = all(a.record == b.record for a, b in zip(res, res2))

    sub = [t for t in targets if "t14_h" in t.values][:3]
    n_base = 20000
    t0 = time.perf_counter()
    for i, t in enumerate(sub):
        baseline_scalar(t, n_base, i)
    t_base = (time.perf_counter() - t0) / (len(sub) * n_base)  # seconds per sample evaluation
    t_base_total = t_base * args.samples * rows  # one plain pass per row, no adaptation, one hypothesis

    print(f"rows: {rows}, samples per row: {args.samples}, assessed ok: {n_ok}, median ESS: {ess:.0f}")
    print(f"rhofollow assess, serial:     {t_serial:8.2f} s  ({1e3 * t_serial / rows:.1f} ms per row)")
    print(f"rhofollow assess, 2 workers:  {t_two:8.2f} s  (identical results: {same})")
    print(f"plain per-sample loop (one hypothesis, one pass, scaled from {len(sub)} rows x {n_base}): "
          f"{t_base_total:8.2f} s")
    print(f"ratio plain loop / rhofollow serial: {t_base_total / t_serial:.1f}x "
          f"(rhofollow also runs 4 hypotheses and adaptive rounds; {evals} weighted samples kept)")


if __name__ == "__main__":
    main()
