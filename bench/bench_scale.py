"""Benchmark: catalogue scale. assess + eclipses + rv in chunks, serial vs a 2-process pool.

Each mode runs in a fresh Python process so its peak memory (resident set, this process plus its
workers) is measured on its own. Chunks keep only the JSON records, so memory stays bounded whatever
the catalogue size. Default: 60 rows x 20,000 samples (RV test with 200 simulated data sets);
``--full``: 10,000 rows (hours on a 2-core machine with the RV stage; add ``--no-rv`` for the
assessment and occultation stages alone). Prints times, the speed-up and peak memory; checks that
both modes give identical records.

``--plan``: the whole ``rhofollow plan`` command on a synthetic catalogue of ``--rows`` rows (written
to a temporary CSV with the columns of examples/hts_candidates.csv) at the demo site over ``--nights``
evenings, run under ``/usr/bin/time -v``: prints its wall and CPU time, the time per row and the
peak memory (the proportional set size summed over the command's process and its worker processes,
sampled from ``/proc`` every 0.2 s; ``/usr/bin/time`` gives the largest single process's resident set). Several sizes (``--rows 200,1000``) also print the peak memory's growth per
row between the smallest and the largest and its straight-line extrapolation to 10,000 rows.
"""
from __future__ import annotations

import argparse
import hashlib
import json
import os
import resource
import subprocess
import sys
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent


def _chunk_records(args):
    """assess -> eclipses -> rv for one chunk; returns only the records (samples are dropped)."""
    targets, samples, sims, with_rv = args
    from rhofollow.stages.assess import assess_catalogue
    from rhofollow.stages.occultations import predict_occultations
    from rhofollow.io.instruments import read_instrument

    a = assess_catalogue(targets, n_samples=samples, seed=7)
    occ = predict_occultations(a, "2027-01-01", "2027-12-31")["targets"]
    rv = []
    if with_rv:
        from rhofollow.stages.rv import plan_rv

        spec = read_instrument(ROOT / "site_configs/instruments/aq_vel.toml")
        rv = plan_rv(a, spec, seed=7, n_null=sims, n_alt=min(400, sims))
    return [x.record for x in a], occ, rv


def run_mode(rows, samples, sims, workers, with_rv, chunk=20):
    sys.path.insert(0, str(HERE))
    from bench_assess import synthetic_rows

    targets = synthetic_rows(rows, seed=3)
    for t in targets:  # the RV stage needs a magnitude
        from rhofollow.core.types import Measurement
        t.values.setdefault("vmag", Measurement(10.5))
    jobs = [(targets[i:i + chunk], samples, sims, with_rv) for i in range(0, rows, chunk)]
    t0 = time.perf_counter()
    if workers <= 1:
        parts = [_chunk_records(j) for j in jobs]
    else:
        with ProcessPoolExecutor(max_workers=workers) as pool:
            parts = list(pool.map(_chunk_records, jobs))
    dt = time.perf_counter() - t0
    digest = hashlib.sha256(json.dumps(parts, sort_keys=True, default=str).encode()).hexdigest()[:16]
    peak_mb = (resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
               + resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss) / 1024
    print(json.dumps({"seconds": dt, "digest": digest, "peak_mb": peak_mb}))


def write_catalogue(path, rows, seed=3):
    """The synthetic rows of bench_assess as a catalogue CSV (value and ``_err`` columns, vmag)."""
    import csv

    sys.path.insert(0, str(HERE))
    from bench_assess import synthetic_rows

    targets = synthetic_rows(rows, seed=seed)
    cols = sorted({c for t in targets for c in t.values})
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["name", "vmag"] + [x for c in cols for x in (c, c + "_err")])
        for t in targets:
            row = [t.name, "10.5"]
            for c in cols:
                m = t.values.get(c)
                row += ["", ""] if m is None else [repr(m.value), repr(m.err) if m.has_error else ""]
            w.writerow(row)


class _TreePeak:
    """The largest summed memory (MiB) of a process and all its descendants, sampled every 0.2 s.

    ``/usr/bin/time -v`` reports the largest *single* process; with worker processes the machine holds
    their sum, which this sampler measures (from ``/proc/PID/task/*/children`` and the proportional set
    size ``Pss`` of ``/proc/PID/smaps_rollup``, so pages the processes share are counted once).
    """

    def __init__(self, pid):
        import threading

        self.pid, self.peak_mib, self._halt = pid, 0.0, threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def start(self):
        self._thread.start()

    def stop(self):
        self._halt.set()
        self._thread.join()

    def _tree(self, pid):
        out, todo = [], [pid]
        while todo:
            p = todo.pop()
            out.append(p)
            for task in Path(f"/proc/{p}/task").glob("*/children"):
                try:
                    todo += [int(c) for c in task.read_text().split()]
                except OSError:
                    pass
        return out

    def _rss_kib(self, pid):
        """Proportional set size (shared library pages split between the processes that map them)."""
        try:
            for line in Path(f"/proc/{pid}/smaps_rollup").read_text().splitlines():
                if line.startswith("Pss:"):
                    return int(line.split()[1])
        except OSError:
            pass
        return 0

    def _run(self):
        while not self._halt.wait(0.2):
            total = sum(self._rss_kib(p) for p in self._tree(self.pid))
            self.peak_mib = max(self.peak_mib, total / 1024)


def run_plan(rows, samples, sims, nights, workers=None):
    """``rhofollow plan`` under /usr/bin/time -v: (wall s, peak MiB, exit status, CPU s)."""
    import re
    import tempfile

    with tempfile.TemporaryDirectory() as d:
        cat = Path(d) / "bench_catalogue.csv"
        write_catalogue(cat, rows)
        code = "import sys; from rhofollow.cli import main; sys.exit(main())"
        cmd = ["/usr/bin/time", "-v", sys.executable, "-c", code, "plan", str(cat),
               "--site", str(ROOT / "site_configs" / "alto_quemado.toml"), "--start", "2027-01-05",
               "--end", f"2027-01-{4 + nights:02d}", "--out", str(Path(d) / "report"), "--samples",
               str(samples), "--sims", str(sims), "--plot-targets", "10"]
        if workers is not None:
            cmd += ["--workers", str(workers)]
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
        tree = _TreePeak(proc.pid)
        tree.start()
        stderr = proc.communicate()[1]
        tree.stop()
        p = subprocess.CompletedProcess(cmd, proc.returncode, "", stderr)
    peak = float(re.search(r"Maximum resident set size \(kbytes\): (\d+)", p.stderr).group(1)) / 1024
    wall = re.search(r"Elapsed \(wall clock\) time \(h:mm:ss or m:ss\): ([\d:.]+)", p.stderr).group(1)
    secs = 0.0
    for part in wall.split(":"):
        secs = secs * 60 + float(part)
    cpu = sum(float(re.search(rf"{k} time \(seconds\): ([\d.]+)", p.stderr).group(1)) for k in ("User", "System"))
    return secs, peak, p.returncode, cpu, tree.peak_mib


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--plan", action="store_true", help="time the whole plan command (see module doc)")
    ap.add_argument("--nights", type=int, default=7, help="--plan: evenings planned (1-27)")
    ap.add_argument("--workers", type=int, default=None,
                    help="--plan: processes (default: the plan command's own default, one per core)")
    ap.add_argument("--full", action="store_true")
    ap.add_argument("--rows", help="rows (--plan: one or more, comma-separated)")
    ap.add_argument("--samples", type=int, default=20000)
    ap.add_argument("--sims", type=int, default=200)
    ap.add_argument("--no-rv", action="store_true")
    ap.add_argument("--_mode", type=int, help=argparse.SUPPRESS)
    a = ap.parse_args()
    sizes = [int(x) for x in a.rows.split(",")] if a.rows else [10000 if a.full else 60]
    rows = sizes[0]
    if a.plan:
        peaks = {}
        for n in sizes:
            secs, peak, rc, cpu, tree = run_plan(n, a.samples, a.sims, a.nights, a.workers)
            peaks[n] = tree
            print(f"rhofollow plan: {n} rows x {a.samples} samples, {a.sims} RV simulations, {a.nights} "
                  f"evenings, {a.workers or 'default'} worker(s): {secs:.1f} s wall, {cpu:.1f} s CPU ({secs / n:.2f} s wall "
                  f"and {cpu / n:.2f} s CPU per row), peak memory {tree:.0f} MiB summed over the process and "
                  f"its workers (PSS; largest single process {peak:.0f} MiB RSS, /usr/bin/time -v), "
                  f"exit status {rc}; load average {os.getloadavg()[0]:.1f}", flush=True)
        if len(peaks) > 1:
            lo, hi = min(peaks), max(peaks)
            per_row = (peaks[hi] - peaks[lo]) / (hi - lo)
            print(f"peak memory grows {per_row * 1024:.0f} KiB per row from {lo} to {hi} rows; straight line "
                  f"to 10,000 rows: {peaks[hi] + per_row * (10000 - hi):.0f} MiB")
        return
    if a._mode is not None:
        run_mode(rows, a.samples, a.sims, a._mode, not a.no_rv)
        return
    res = {}
    for w in (1, 2):
        cmd = [sys.executable, __file__, "--rows", str(rows), "--samples", str(a.samples), "--sims",
               str(a.sims), "--_mode", str(w)] + (["--no-rv"] if a.no_rv else [])
        out = subprocess.run(cmd, capture_output=True, text=True, check=True).stdout.strip().splitlines()[-1]
        res[w] = json.loads(out)
    stages = "assess + eclipses" + ("" if a.no_rv else f" + rv ({a.sims} simulated sets)")
    print(f"{rows} rows x {a.samples} samples, {stages}")
    print(f"serial:     {res[1]['seconds']:8.1f} s, peak memory {res[1]['peak_mb']:7.0f} MiB")
    print(f"2 workers:  {res[2]['seconds']:8.1f} s, peak memory {res[2]['peak_mb']:7.0f} MiB (all processes)")
    print(f"speed-up:   {res[1]['seconds'] / res[2]['seconds']:.2f}x; identical records: "
          f"{res[1]['digest'] == res[2]['digest']}")


if __name__ == "__main__":
    main()
