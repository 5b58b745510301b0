"""Benchmark: the assess -> occultations -> RV stages in this process against a dask cluster.

Baseline and rhofollow in the same run: ``run_stages`` serial (one process) and on a
``distributed.LocalCluster`` of two single-thread worker processes (or on ``--address`` of a real
cluster), alternated pair by pair (serial, dask, serial, dask, ...) so that drift in the machine's
load hits both alike. Prints each mode's per-stage median, the ratio serial/dask per stage and in
total, and checks that the records are byte-identical. The stages of a chunk run one after the
other in the process that holds the chunk, so the per-stage seconds are summed over the processes
(work, not wall time); ``total`` is the wall time of the call.

Also the CPU seconds of each mode (this process's ``time.process_time`` for serial; the workers'
CPU seconds, read with psutil on each worker, plus this process's for dask) and CPU/wall: about 1.0
for serial, about the number of workers when the cluster runs in parallel. On a machine shared
with other work the wall ratio understates the speed-up; CPU/wall and the CPU ratio show whether
the workers ran at once and how much extra work the cluster added.

A real cluster: start ``dask scheduler`` on one machine and ``dask worker tcp://HOST:8786
--nthreads 1`` on each worker machine (rhofollow installed on every one), then pass
``--address tcp://HOST:8786`` here or ``--dask tcp://HOST:8786`` to ``rhofollow plan``.

Run: python bench/bench_dask.py [--samples 8000] [--sims 2000] [--repeat 3] [--address ADDR]
"""
from __future__ import annotations

import argparse
import json
import os
import statistics
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
STAGES = ("assess_s", "occultations_s", "rv_s")


def _cpu_seconds() -> float:
    """CPU seconds (user + system) of this process (run on each dask worker)."""
    import psutil

    t = psutil.Process().cpu_times()
    return t.user + t.system


def _dump(st) -> str:
    return json.dumps({"assess": [a.record for a in st.assessments], "occ": st.occultations["targets"],
                       "rv": st.rv}, sort_keys=True, default=str)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=8000)
    ap.add_argument("--sims", type=int, default=2000)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--workers", type=int, default=2, help="local worker processes (without --address)")
    ap.add_argument("--address", help="scheduler of an existing cluster instead of a LocalCluster")
    a = ap.parse_args()

    from rhofollow.io.catalogue import read_catalogue
    from rhofollow.pipeline import PipelineOptions, run_stages
    from rhofollow.planning.site import load_site

    targets = read_catalogue(ROOT / "examples" / "hts_candidates.csv", require_coords=True).targets
    site = load_site(ROOT / "site_configs" / "alto_quemado.toml")
    span = ("2026-12-10T12:00:00", "2027-01-10T12:00:00")
    base = dict(samples=a.samples, seed=20261202, sims=a.sims)

    def worker_cpu(address):
        if address is None:
            return 0.0
        from distributed import Client

        with Client(address, set_as_default=False) as c:
            return sum(c.run(_cpu_seconds).values())

    def run(address):
        w0, c0 = worker_cpu(address), time.process_time()
        t = time.perf_counter()
        st = run_stages(targets, site, *span, PipelineOptions(dask_address=address, **base))
        wall = time.perf_counter() - t
        cpu = time.process_time() - c0 + worker_cpu(address) - w0
        return dict(st.timings, total_s=wall, cpu_s=cpu), _dump(st)

    cluster = None
    address = a.address
    if address is None:
        import distributed

        cluster = distributed.LocalCluster(n_workers=a.workers, threads_per_worker=1, processes=True,
                                           dashboard_address=None, silence_logs=50)
        address = cluster.scheduler_address
    try:
        run(address)  # warm-up: worker imports, astropy tables
        serial, remote, same = [], [], True
        for _ in range(a.repeat):
            ts, ds = run(None)
            tr, dr = run(address)
            serial.append(ts)
            remote.append(tr)
            same &= ds == dr
    finally:
        if cluster is not None:
            cluster.close()
    where = address if a.address else f"LocalCluster({a.workers} worker processes x 1 thread)"
    print(f"{len(targets)} targets x {a.samples:,} samples, {a.sims:,} RV simulations; "
          f"{a.repeat} pairs; dask on {where}")
    print(f"{'stage':<14}{'serial s':>10}{'dask s':>10}{'serial/dask':>13}")
    for key in STAGES + ("total_s",):
        s = statistics.median(t[key] for t in serial)
        r = statistics.median(t[key] for t in remote)
        ratio = statistics.median(x[key] / y[key] for x, y in zip(serial, remote))
        print(f"{key[:-2]:<14}{s:>10.2f}{r:>10.2f}{ratio:>12.2f}x")
    for label, runs in (("serial", serial), ("dask", remote)):
        cpu = statistics.median(t["cpu_s"] for t in runs)
        par = statistics.median(t["cpu_s"] / t["total_s"] for t in runs)
        print(f"{label:<7} CPU {cpu:8.2f} s, CPU/wall {par:.2f}")
    print(f"CPU serial/dask (work the cluster adds): "
          f"{statistics.median(x['cpu_s'] / y['cpu_s'] for x, y in zip(serial, remote)):.2f}")
    print("load average at the end (1, 5, 15 min):", " ".join(f"{x:.1f}" for x in os.getloadavg()))
    print("records byte-identical to serial:", "yes" if same else "NO")


if __name__ == "__main__":
    main()
