"""Benchmark: writing the per-target sample files of a report (``samples/<stem>.ecsv`` / ``.fits``).

The demo catalogue's 25 targets are assessed at 20,000 samples (not timed) and their sets put in a
sample spool, as ``plan`` holds them. Then, in the same run, each writer writes the 25 files into a
fresh folder (wall time and this process's CPU time; the best of ``--repeat`` rounds, the writers
alternated within a round so that a change of the machine's load hits all of them):

* ``ecsv, old loop``: the loop of ``report/folder.py`` before ``--sample-format`` (one process:
  ``SampleSet.to_ecsv_text`` then an atomic write, target by target);
* ``ecsv`` and ``fits`` through :func:`rhofollow.report.sample_files.write_sample_files` with 1
  and 2 workers (a process pool reading the sets from the spool);
* ``astropy ecsv`` (baseline, on ``--astropy`` targets only, scaled to 25): ``Table.write(...,
  format="ascii.ecsv")`` of ``SampleSet.to_table``, astropy's general writer.

The pool's CPU time is in its worker processes, so only wall time is compared for 2 workers.
Every file of every writer is checked: the same bytes for 1 and 2 workers, and the FITS and ECSV
files read back by astropy to the same table bit for bit. Prints the times, sizes and ratios.
Usage: python bench/bench_samples.py [--repeat N] [--samples N] [--astropy K]
"""
from __future__ import annotations

import argparse
import io
import os
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np
from astropy.table import Table

from rhofollow.core.samples import SampleSet
from rhofollow.io.atomic import atomic_write_bytes
from rhofollow.io.demo_data import demo_file
from rhofollow.io.safety import file_stem
from rhofollow.pipeline.spool import SampleSpool
from rhofollow.report.sample_files import write_sample_files


def _assessed(n_samples: int, spool: SampleSpool) -> list:
    """(name, spooled samples) of the demo catalogue's targets."""
    from rhofollow.io.catalogue import read_catalogue
    from rhofollow.physics.priors import DEFAULT_PRIOR, parse_prior
    from rhofollow.stages.assess_many import assess_stream

    targets = read_catalogue(demo_file("examples/hts_candidates.csv")).targets
    out = []
    for part in assess_stream(targets, n_samples=n_samples, prior=parse_prior(DEFAULT_PRIOR), seed=20261202):
        out += [(a.name, spool.put(a.samples)) for a in part if a.ok and a.samples is not None]
    return out


def _old_loop(items, d: Path) -> None:
    """The report's sample loop before --sample-format (serial ECSV)."""
    d.mkdir(parents=True)
    for name, s in items:
        atomic_write_bytes(d / f"{file_stem(name)}.ecsv", s.to_ecsv_text().encode("utf-8"))


def _astropy(items, d: Path) -> None:
    """Baseline: astropy's own ECSV writer."""
    d.mkdir(parents=True)
    for name, s in items:
        buf = io.StringIO()
        s.to_table().write(buf, format="ascii.ecsv")
        atomic_write_bytes(d / f"{file_stem(name)}.ecsv", buf.getvalue().encode("utf-8"))


def _timed(fn, root: Path, label: str):
    d = root / label.replace(" ", "_").replace(",", "")
    shutil.rmtree(d, ignore_errors=True)
    w, c = time.perf_counter(), time.process_time()
    fn(d)
    return time.perf_counter() - w, time.process_time() - c, d


def _check(dirs: dict) -> None:
    """Same bytes for 1 and 2 workers; FITS and ECSV tables equal bit for bit."""
    for fmt in ("ecsv", "fits"):
        for p in sorted(dirs[f"{fmt} 1 worker"].iterdir()):
            assert p.read_bytes() == (dirs[f"{fmt} 2 workers"] / p.name).read_bytes(), p.name
    for p in sorted(dirs["ecsv 1 worker"].iterdir()):
        assert p.read_bytes() == (dirs["ecsv, old loop"] / p.name).read_bytes(), p.name
        a = Table.read(p, format="ascii.ecsv")
        b = Table.read(dirs["fits 1 worker"] / (p.stem + ".fits"))
        for c in a.colnames:
            np.testing.assert_array_equal(np.asarray(a[c], dtype=float).view(np.int64),
                                          np.asarray(b[c], dtype=float).view(np.int64))
        assert SampleSet.from_table(b).name == a.meta["name"]


def main() -> None:
    """Run the benchmark (see the module notes)."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--samples", type=int, default=20000)
    ap.add_argument("--astropy", type=int, default=2, help="targets for astropy's writer (scaled to all)")
    args = ap.parse_args()
    root = Path(tempfile.mkdtemp(prefix="bench-samples-"))
    spool = SampleSpool(root)
    try:
        t = time.perf_counter()
        items = _assessed(args.samples, spool)
        rows = sum(s.n for _, s in items)
        print(f"{len(items)} targets x {args.samples} samples assessed in {time.perf_counter() - t:.1f} s "
              f"(not timed below; {rows} rows in all: the sampler draws more where the ESS asks for it); "
              f"cpus {os.cpu_count()}, load {os.getloadavg()[0]:.1f}")
        writers = {"ecsv, old loop": lambda d: _old_loop(items, d)}
        for fmt in ("ecsv", "fits"):
            for w in (1, 2):
                writers[f"{fmt} {w} worker{'s' if w > 1 else ''}"] = \
                    (lambda d, fmt=fmt, w=w: write_sample_files(items, d, fmt, workers=w))
        best: dict = {}
        for _ in range(args.repeat):
            for label, fn in writers.items():
                wall, cpu, d = _timed(fn, root, label)
                if label not in best or wall < best[label][0]:
                    best[label] = (wall, cpu, d)
        _check({k: v[2] for k, v in best.items()})
        k = max(1, min(args.astropy, len(items)))
        wall, cpu, _ = _timed(lambda d: _astropy(items[:k], d), root, "astropy ecsv")
        scale = len(items) / k
        best["astropy ecsv (scaled)"] = (wall * scale, cpu * scale, None)
        old = best["ecsv, old loop"][0]
        print(f"{'writer':24s} {'wall s':>8s} {'cpu s':>8s} {'MB':>8s} {'old/this':>9s}")
        for label, (wall, cpu, d) in best.items():
            mb = sum(p.stat().st_size for p in d.iterdir()) / 1e6 if d is not None else float("nan")
            cpu_txt = f"{cpu:8.2f}" if "2 workers" not in label else "  (pool)"
            print(f"{label:24s} {wall:8.2f} {cpu_txt} {mb:8.1f} {old / wall:9.2f}")
        print(f"per target: ecsv {1e3 * old / len(items):.0f} ms, fits "
              f"{1e3 * best['fits 1 worker'][0] / len(items):.1f} ms (1 worker); files checked: same bytes for 1 "
              "and 2 workers, FITS = ECSV tables bit for bit")
    finally:
        spool.close()
        shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    main()
