"""Benchmark: RV time-to-confirm (simulated eccentric-vs-circular LRT) for many targets.

1. The vectorised path (rhofollow.physics.rvconfirm.epochs_to_confirm with the Fisher start) on
   200 synthetic targets with --full (12 by default): total time and cost per target.
2. Same work, two ways, on a few targets: the power at one N from D simulated data sets, once with
   the vectorised profiled grid and once with a plain per-data-set loop of scipy.optimize fits
   (circular: linear least squares; eccentric: scipy.optimize.least_squares over
   (gamma, K, sqrt(e) cos w, sqrt(e) sin w) from four starts). Prints both times and the ratio.

Run: .venv/bin/python bench/bench_rv.py [--full]
"""
from __future__ import annotations

import argparse
import time

import numpy as np
from scipy.optimize import least_squares

from rhofollow.physics import rvconfirm as rc
from rhofollow.physics.rv import circular_shape, rv_shape


def synthetic_targets(n, rng, n_samples=2000):
    out = []
    for _ in range(n):
        e = np.clip(rng.beta(1.2, 4.0, n_samples) * rng.uniform(0.5, 1.5), 0, 0.9)
        om = rng.uniform(0, 2 * np.pi, n_samples)
        k = np.exp(rng.normal(np.log(rng.uniform(5, 60)), 0.2, n_samples))
        out.append((e, om, k, rng.uniform(2, 8)))
    return out


def naive_power(e, om, k, sigma, n_epochs, n_alt, n_null, fap, seed):
    """Per-data-set loop of scipy.optimize fits (the plain baseline)."""
    rng = np.random.default_rng(seed)
    ph = rng.random(n_epochs)
    circ = circular_shape(ph)
    x = np.column_stack([np.ones(n_epochs), circ])

    def dchi(y):
        c = np.linalg.lstsq(x, y, rcond=None)
        chi_c = np.sum((y - x @ c[0]) ** 2)
        best = np.inf

        def res(p):
            ee = min(p[2] ** 2 + p[3] ** 2, 0.95)
            return y - p[0] - p[1] * rv_shape(ph, ee, np.arctan2(p[3], p[2]))

        for w0 in (0.0, 0.5 * np.pi, np.pi, 1.5 * np.pi):
            p0 = [c[0][0], c[0][1], np.sqrt(0.2) * np.cos(w0), np.sqrt(0.2) * np.sin(w0)]
            r = least_squares(res, p0, bounds=([-np.inf, -np.inf, -0.97, -0.97], [np.inf, np.inf, 0.97, 0.97]))
            best = min(best, 2 * r.cost)
        return max(chi_c - best, 0.0)

    idx = rng.integers(0, len(e), n_alt)
    d_alt = [dchi((k[i] * rv_shape(ph, e[i], om[i]) + sigma * rng.standard_normal(n_epochs)) / sigma) for i in idx]
    idx0 = rng.integers(0, len(e), n_null)
    d_null = [dchi((k[i] * circ + sigma * rng.standard_normal(n_epochs)) / sigma) for i in idx0]
    thr = np.quantile(d_null, 1 - fap)
    return float(np.mean(np.array(d_alt) > thr))


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--full", action="store_true",
                    help="200 targets; baseline on 5 targets x 300 data sets (tens of minutes on a busy machine)")
    ap.add_argument("--seed", type=int, default=1)
    a = ap.parse_args()
    n_targets, n_base = (200, 5) if a.full else (12, 1)
    rng = np.random.default_rng(a.seed)
    targets = synthetic_targets(n_targets, rng)
    grid = rc.ecc_grid()

    t = time.perf_counter()
    ns = []
    for i, (e, om, k, s) in enumerate(targets):
        nf = rc.fisher_epochs_to_confirm(e, om, k, s, seed=i)
        r = rc.epochs_to_confirm(e, om, k, s, start=nf, seed=i, grid=grid)
        ns.append(r["n"])
    dt = time.perf_counter() - t
    reach = [n for n in ns if n is not None]
    print(f"time-to-confirm, vectorised: {n_targets} targets in {dt:.2f} s = {dt / n_targets * 1e3:.0f} ms per "
          f"target (n_alt 400, n_null 2000, grid {grid.size} points); reachable {len(reach)}/{n_targets}, "
          f"median N {np.median(reach) if reach else float('nan'):.0f}")

    n_alt, n_null, n_ep = (100, 200, 20) if a.full else (20, 40, 20)
    tv = tb = 0.0
    for i, (e, om, k, s) in enumerate(targets[:n_base]):
        t = time.perf_counter()
        rc.power_at(e, om, k, s, n_ep, 0.05, seed=i, n_alt=n_alt, n_null=n_null, n_batches=1, grid=grid)
        tv += time.perf_counter() - t
        t = time.perf_counter()
        naive_power(e, om, k, s, n_ep, n_alt, n_null, 0.05, seed=i)
        tb += time.perf_counter() - t
    print(f"power at N={n_ep} from {n_alt + n_null} data sets, {n_base} targets: vectorised {tv:.3f} s, "
          f"scipy.optimize loop {tb:.2f} s, ratio {tb / tv:.0f}x")
    print(f"  per target: vectorised {tv / n_base * 1e3:.1f} ms, loop {tb / n_base:.2f} s")


if __name__ == "__main__":
    main()
