"""Benchmark: writing a report folder (tables, sample files, figures) of the demo's ``plan`` run.

The bundled demo (25 invented targets, 8,000 samples, 500 RV simulations, 60 evenings at the invented
site) runs through the pipeline once (not timed). Then, in the same run and alternated round by round,
:func:`rhofollow.report.folder.write_report_files` writes the whole folder into a fresh directory:

* baseline: one process, ECSV sample files (how every report was written before the figure pool);
* rhofollow with 2 workers and ECSV (the demo's default: ``auto`` is ECSV up to 200 targets): the
  sample files and the 40 per-target figures rendered by a process pool, the run-level figures
  drawn meanwhile in the main process;
* rhofollow with 2 workers and FITS sample files.

The stage times (tables, samples, figures) come from the report's own progress calls. Every mode's
PNG files are checked to be byte-identical to the baseline's. Prints the best of ``--repeat`` rounds
and the ratios. Usage: python bench/bench_report.py [--repeat N]
"""
from __future__ import annotations

import argparse
import datetime as dt
import os
import tempfile
import time
from pathlib import Path


def _run_demo():
    from rhofollow.cli.options import DEMO_DAYS, demo_paths
    from rhofollow.core.defaults import QUICK_SAMPLES, QUICK_SIMS
    from rhofollow.cli.common import load_catalogue
    from rhofollow.pipeline import PipelineOptions, run_pipeline
    from rhofollow.planning.site import load_site

    cat_path, site_path = demo_paths()
    cat, site = load_catalogue(cat_path, require_coords=True), load_site(site_path)
    start = dt.date(2027, 1, 5)
    opts = PipelineOptions(samples=QUICK_SAMPLES, seed=20261202, workers=2, sims=QUICK_SIMS)
    return run_pipeline(cat.targets, site, start, start + dt.timedelta(days=DEMO_DAYS), opts, catalogue=cat)


def _write(result, workers, fmt):
    """Write the folder once; (stage seconds, total seconds, {png name: bytes})."""
    from rhofollow.report.folder import write_report_files

    marks = []

    def progress(label, total):
        marks.append((label, time.perf_counter()))
        return lambda k=1: None

    result.options.workers = workers
    with tempfile.TemporaryDirectory() as d:
        t0 = time.perf_counter()
        write_report_files(result, d, plot_targets=10, progress=progress, sample_format=fmt)
        t1 = time.perf_counter()
        pngs = {p.name: p.read_bytes() for p in (Path(d) / "plots").glob("*.png")}
    stages, prev = {}, ("tables", t0)
    for label, t in marks + [("end", t1)]:
        stages[prev[0]] = stages.get(prev[0], 0.0) + t - prev[1]
        prev = (label, t)
    return stages, t1 - t0, pngs


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=2)
    a = ap.parse_args()
    result = _run_demo()
    modes = [("baseline: 1 process, ECSV", 1, "ecsv"), ("rhofollow: 2 workers, ECSV", 2, "ecsv"),
             ("rhofollow: 2 workers, FITS", 2, "fits")]
    best = {m[0]: None for m in modes}
    ref = None
    for _ in range(a.repeat):
        for label, w, fmt in modes:
            stages, total, pngs = _write(result, w, fmt)
            if ref is None:
                ref = pngs
            assert pngs == ref, f"{label}: figures differ from the baseline's"
            if best[label] is None or total < best[label][1]:
                best[label] = (stages, total)
    n_png = len(ref)
    print(f"report folder of the demo (25 targets x 8,000 samples, {n_png} figures), best of {a.repeat}; "
          f"load average {os.getloadavg()[0]:.1f}; figures byte-identical in every mode")
    base = best[modes[0][0]][1]
    for label, _, _ in modes:
        stages, total = best[label]
        parts = ", ".join(f"{k} {v:.2f} s" for k, v in stages.items())
        print(f"  {label:30s} {total:6.2f} s ({parts}); {base / total:.2f}x the baseline")


if __name__ == "__main__":
    main()
