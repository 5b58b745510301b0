"""Benchmark: semester visibility with rhofollow's VisibilityEngine vs astroplan's own functions.

Work: N targets (random over the sky, fixed seed) x every night of a semester at 5-minute
resolution, from the end of evening nautical twilight to the start of morning twilight, at the
demo site, with the constraints altitude >= 30 deg, Sun below -12 deg and Moon separation >= 30 deg.
For each night both sides find the night boundaries, evaluate the constraints on the grid and
answer "ever observable" and "always observable" per target.

* rhofollow: ``VisibilityEngine.nights`` + ``observable_mask`` (any / all per target), all
  targets and all nights.
* astroplan (baseline): ``Observer.twilight_evening_nautical`` / ``twilight_morning_nautical``,
  then ``is_observable`` and ``is_always_observable`` with ``AltitudeConstraint``,
  ``AtNightConstraint`` and ``MoonSeparationConstraint`` on the same time grid. astroplan is slow,
  so by default it runs on a subset (``--ap-targets`` x ``--ap-nights``) and its time is scaled
  linearly to the full size (stated in the output); ``--full`` runs it on everything.

* plain astropy (the fair baseline): on rhofollow's own time grid of each night, one vectorised
  ``SkyCoord(...).transform_to(AltAz)`` of all targets x all times, ``get_sun`` and ``get_body("moon")``
  in the same frame, and the mask ``alt >= 30 & sun alt <= -12 & moon separation >= 30``. It runs on
  ``--apy-nights`` nights spread over the semester (all targets) and is scaled to the full size;
  its masks are compared with rhofollow's.

Accuracy is reported on the subset: twilight times and per-sample constraint masks against
astroplan, and target altitudes against astropy's AltAz.

Usage::

    .venv/bin/python bench/bench_visibility.py            # short run (< 2 min)
    .venv/bin/python bench/bench_visibility.py --full     # astroplan on the full size too (slow)
"""
from __future__ import annotations

import argparse
import dataclasses
import datetime as dt
import sys
import time
import warnings
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))

from rhofollow.core.timescales import configure_offline  # noqa: E402
from rhofollow.planning.site import Constraints, load_site  # noqa: E402
from rhofollow.planning.visibility import VisibilityEngine  # noqa: E402


def bench_site():
    site = load_site(ROOT / "site_configs" / "alto_quemado.toml", check_files=False)
    cons = Constraints(min_altitude_deg=30.0, twilight="nautical", min_moon_separation_deg=30.0)
    return dataclasses.replace(site, constraints=cons)


def run_rhofollow(site, ra, dec, start, n_nights):
    t0 = time.perf_counter()
    eng = VisibilityEngine(site, step_minutes=5.0)
    nights = eng.nights(start, start + dt.timedelta(days=n_nights - 1))
    ever = np.zeros((ra.size, n_nights), bool)
    always = np.zeros((ra.size, n_nights), bool)
    minutes = np.zeros(ra.size)
    for j, g in enumerate(nights):
        m = eng.observable_mask(ra, dec, g.times_jd)
        ever[:, j] = m.any(1)
        always[:, j] = m.all(1)
        minutes += m.sum(1) * 5.0
    return time.perf_counter() - t0, nights, ever, always, minutes, eng


def run_astroplan(site, ra, dec, nights, *, masks=False):
    import astropy.units as u
    from astroplan import (AltitudeConstraint, AtNightConstraint, FixedTarget,
                           MoonSeparationConstraint, is_always_observable, is_observable)
    from astropy.coordinates import SkyCoord
    from astropy.time import Time

    observer = site.observer()
    targets = [FixedTarget(SkyCoord(a * u.deg, d * u.deg), name=str(i)) for i, (a, d) in enumerate(zip(ra, dec))]
    cons = [AltitudeConstraint(min=30 * u.deg), AtNightConstraint.twilight_nautical(),
            MoonSeparationConstraint(min=30 * u.deg)]
    dusk, dawn, ever, always, mask_list = [], [], [], [], []
    t0 = time.perf_counter()
    for g in nights:
        noon = Time(g.noon_jd, format="jd")
        e = observer.twilight_evening_nautical(noon, which="next")
        m = observer.twilight_morning_nautical(noon, which="next")
        step = 5.0 / 1440.0
        n = int(np.floor((m.jd - e.jd) / step + 1e-9)) + 1
        times = e + np.arange(n) * 5.0 * u.min
        ever.append(is_observable(cons, observer, targets, times=times))
        always.append(is_always_observable(cons, observer, targets, times=times))
        dusk.append(e.jd)
        dawn.append(m.jd)
    elapsed = time.perf_counter() - t0
    if masks:   # per-sample masks on the rhofollow grid, for the accuracy comparison (not timed)
        for g in nights:
            times = Time(g.times_jd, format="jd")
            mask_list.append(np.logical_and.reduce([c(observer, targets, times=times, grid_times_targets=True) for c in cons]))
    return elapsed, np.array(dusk), np.array(dawn), np.array(ever).T, np.array(always).T, mask_list


def run_astropy_mask(site, ra, dec, nights):
    """Plain vectorised astropy masks (alt, Sun, Moon) on each night's grid: (time s, masks)."""
    import astropy.units as u
    from astropy.coordinates import AltAz, SkyCoord, get_body, get_sun
    from astropy.time import Time

    cons = site.constraints
    targets = SkyCoord(ra[:, None] * u.deg, dec[:, None] * u.deg)
    masks = []
    t0 = time.perf_counter()
    for g in nights:
        times = Time(g.times_jd, format="jd")
        frame = AltAz(obstime=times, location=site.location)
        local = targets.transform_to(frame)                               # (targets, times)
        alt = local.alt.deg
        sun_alt = get_sun(times).transform_to(frame).alt.deg
        moon = get_body("moon", times, site.location).transform_to(frame)
        sep = local.separation(moon[None, :]).deg
        masks.append((alt >= cons.min_altitude_deg) & (sun_alt <= -12.0)[None, :]
                     & (sep >= cons.min_moon_separation_deg))
    return time.perf_counter() - t0, masks


def main(argv=None):
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--full", action="store_true", help="run astroplan on the full size too (slow)")
    p.add_argument("--targets", type=int, default=1000)
    p.add_argument("--nights", type=int, default=180)
    p.add_argument("--ap-targets", type=int, default=1000, help="astroplan subset: targets (default 1000)")
    p.add_argument("--ap-nights", type=int, default=3, help="astroplan subset: nights (default 3)")
    p.add_argument("--apy-nights", type=int, default=6, help="plain astropy baseline: nights (default 6)")
    p.add_argument("--start", default="2027-01-01", help="first night (local date)")
    args = p.parse_args(argv)
    configure_offline()
    warnings.simplefilter("ignore")   # astroplan/astropy chatter is not part of the measurement

    rng = np.random.default_rng(20261202)
    ra = rng.uniform(0, 360, args.targets)
    dec = np.degrees(np.arcsin(rng.uniform(-1, 1, args.targets)))
    site = bench_site()
    start = dt.date.fromisoformat(args.start)

    # warm-up (imports, IERS table) outside the timings
    VisibilityEngine(site).observable_mask(ra[:2], dec[:2], [2461000.5])
    import astroplan  # noqa: F401

    t_rf, nights, ever, always, minutes, eng = run_rhofollow(site, ra, dec, start, args.nights)
    n_samples = args.targets * sum(g.times_jd.size for g in nights)
    print(f"work: {args.targets} targets x {args.nights} nights at 5 min "
          f"({n_samples / 1e6:.1f} M target-samples), site {site.name}")
    print(f"rhofollow VisibilityEngine : {t_rf:8.2f} s  (full size)")

    na = args.nights if args.full else min(args.apy_nights, args.nights)
    pick_a = np.linspace(0, args.nights - 1, na).round().astype(int)
    t_apy, apy_masks = run_astropy_mask(site, ra, dec, [nights[j] for j in pick_a])
    t_apy_full = t_apy * args.nights / na
    same = np.mean([np.mean(eng.observable_mask(ra, dec, nights[j].times_jd) == m)
                    for j, m in zip(pick_a, apy_masks)])
    print(f"plain astropy AltAz mask   : {t_apy:8.2f} s  on {args.targets} targets x {na} nights; scaled "
          f"x{args.nights / na:.0f} to the full size: {t_apy_full:8.1f} s; masks {100 * same:.3f} % identical")
    print(f"ratio astropy / rhofollow  : {t_apy_full / t_rf:8.1f} x")

    nt = args.targets if args.full else min(args.ap_targets, args.targets)
    nn = args.nights if args.full else min(args.ap_nights, args.nights)
    pick = np.linspace(0, args.nights - 1, nn).round().astype(int)
    sub_nights = [nights[j] for j in pick]
    t_ap, dusk, dawn, ap_ever, ap_always, ap_masks = run_astroplan(
        site, ra[:nt], dec[:nt], sub_nights, masks=True)
    scale = (args.targets * args.nights) / (nt * nn)
    t_ap_full = t_ap * scale
    if scale == 1:
        print(f"astroplan is_observable    : {t_ap:8.2f} s  (full size)")
    else:
        print(f"astroplan is_observable    : {t_ap:8.2f} s  on {nt} targets x {nn} nights; "
              f"scaled x{scale:.0f} to the full size: {t_ap_full:8.1f} s (linear-scaling estimate)")
    print(f"ratio astroplan / rhofollow: {t_ap_full / t_rf:8.1f} x")

    # ------------------------------------------------------------ accuracy on the subset
    from astropy.coordinates import AltAz, SkyCoord
    from astropy.time import Time
    import astropy.units as u

    d_dusk = np.abs(np.array([g.dusk_jd for g in sub_nights]) - dusk) * 86400
    d_dawn = np.abs(np.array([g.dawn_jd for g in sub_nights]) - dawn) * 86400
    print(f"twilight vs astroplan      : max |dusk| {d_dusk.max():.1f} s, max |dawn| {d_dawn.max():.1f} s")
    agree = [np.mean(eng.observable_mask(ra[:nt], dec[:nt], g.times_jd) == m)
             for g, m in zip(sub_nights, ap_masks)]
    print(f"per-sample mask agreement  : {100 * np.mean(agree):.3f} % of {sum(m.size for m in ap_masks)} samples "
          "(any difference is a sample within ~1 arcsec of a limit)")
    same_ever = np.mean(ever[:nt][:, pick] == ap_ever)
    same_always = np.mean(always[:nt][:, pick] == ap_always)
    print(f"ever / always observable   : {100 * same_ever:.2f} % / {100 * same_always:.2f} % identical "
          "(astroplan samples its own grid, from its own twilight times)")
    g = sub_nights[0]
    tt = g.times_jd[::6]
    alt = eng.altitude(ra[:nt], dec[:nt], tt)
    ref = SkyCoord(ra[:nt, None] * u.deg, dec[:nt, None] * u.deg).transform_to(
        AltAz(obstime=Time(tt, format="jd")[None, :], location=site.location)).alt.deg
    print(f"altitude vs astropy AltAz  : max |d alt| {np.abs(alt - ref).max() * 3600:.2f} arcsec "
          "(requirement 0.05 deg = 180 arcsec)")
    print(f"(observable hours per target over the semester: median {np.median(minutes) / 60:.1f} h)")


if __name__ == "__main__":
    main()
