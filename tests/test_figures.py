"""Report figures: what each one shows, read from the matplotlib Figure's axes and artists (no pixels)."""
import datetime as dt

import numpy as np
import pytest

SITE = "site_configs/alto_quemado.toml"


@pytest.fixture(autouse=True)
def _agg():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    yield
    plt.close("all")


@pytest.fixture()
def night_plan(demo_night):
    """The shared demo night (tests/conftest.py) as the night chart takes it: engine, night grid,
    science dicts and the plan's JSON with the date and instruments added."""
    plan = dict(demo_night.plan.to_dict(), date=demo_night.date,
                instruments={"occultation": "AQ-CAM", "rv": "AQ-VEL"})
    return demo_night.engine, demo_night.night, demo_night.science, plan


def _axes(fig):
    return {a.get_label(): a for a in fig.axes}


def test_night_chart_leads_with_the_schedule_timeline(night_plan):
    from rhofollow.report.schedule_chart import KIND_COLOURS, night_figure

    eng, night, sci, plan = night_plan
    fig = night_figure(eng, night, sci, plan)
    ax = _axes(fig)["schedule"]
    blocks = plan["blocks"]
    assert {b["kind"] for b in blocks} == {"occultation", "rv"}
    lanes = list(dict.fromkeys(b["name"] for b in sorted(blocks, key=lambda b: b["start_jd"])))
    # one lane per target, in the order of the first block
    assert [t.get_text() for t in ax.get_yticklabels()] == lanes
    # one bar per block, in its kind's colour, spanning the block's time exactly
    jd0 = np.floor(night.sunset_jd - 0.5 / 24 - 0.5) + 0.5
    bars = [p for p in ax.patches if (p.get_gid() or "").startswith("block:")]
    assert len(bars) == len(blocks)
    for b in blocks:
        (bar,) = [p for p in bars if p.get_gid() == f"block:{b['name']}:{b['kind']}"
                  and abs(p.get_x() - (b["start_jd"] - jd0) * 24) < 1e-9]
        assert bar.get_width() == pytest.approx((b["end_jd"] - b["start_jd"]) * 24, abs=1e-9)
        lane = lanes.index(b["name"])
        assert lane < bar.get_y() < lane + 0.5  # the upper half of its lane
        from matplotlib.colors import to_hex

        assert to_hex(bar.get_facecolor()) == KIND_COLOURS[b["kind"]]
    labels = [t.get_text() for t in ax.texts if t.get_gid() == "block-label"]
    assert sum(lab.startswith("occ E") for lab in labels) == sum(b["kind"] == "occultation" for b in blocks)
    assert sum(lab.startswith("RV φ") for lab in labels) == sum(b["kind"] == "rv" for b in blocks)


def test_night_chart_has_an_airmass_strip_per_target(night_plan):
    from rhofollow.report.schedule_chart import airmass_classes, night_figure

    eng, night, sci, plan = night_plan
    fig = night_figure(eng, night, sci, plan)
    ax = _axes(fig)["schedule"]
    lanes = [t.get_text() for t in ax.get_yticklabels()]
    strips = {c.get_gid().split(":", 1)[1]: c for c in ax.collections if (c.get_gid() or "").startswith("strip:")}
    assert set(strips) == set(lanes)
    # the strip holds the target's airmass (sec z, common practice, no source); time below the
    # site's altitude limit is set apart in its own class
    lim = eng.site.constraints.min_altitude_deg
    by = {s["name"]: s for s in sci}
    for i, name in enumerate(lanes):
        vals = np.asarray(strips[name].get_array()).ravel()
        path = strips[name].get_paths()[0].vertices
        assert i + 0.5 <= path[:, 1].min() and path[:, 1].max() <= i + 1  # the lower half of its lane
        ok = vals < 20
        assert ok.any()
        assert np.all(vals[ok] >= 1.0) and np.all(vals[ok] <= 1 / np.sin(np.radians(lim)) + 1e-9)
        # the lowest airmass drawn matches the target's highest altitude from the engine
        t = np.linspace(night.start_jd, night.end_jd, 400)
        top = np.max(eng.altitude([by[name]["ra_deg"]], [by[name]["dec_deg"]], t))
        assert vals[ok].min() <= 1 / np.sin(np.radians(top)) + 0.01
    # the key names every airmass class with its altitude range
    key = [t.get_text() for t in fig.legends[0].get_texts()]
    for e in airmass_classes(2.0):
        assert any(f"-{e:.2f}" in k for k in key)
    assert any(k.startswith("below the limit") for k in key) and "below the horizon" in key


def test_airmass_classes_end_at_the_limit():
    from rhofollow.report.schedule_chart import airmass_classes

    assert airmass_classes(2.0) == [1.15, 1.3, 1.5, 2.0]
    assert airmass_classes(1.4) == [1.15, 1.3, 1.4]
    assert airmass_classes(1.1) == [1.1]


def test_night_chart_marks_twilight_and_moon_on_a_sky_row(night_plan):
    from rhofollow.report.schedule_chart import night_figure

    eng, night, sci, plan = night_plan
    fig = night_figure(eng, night, sci, plan)
    sky = _axes(fig)["sky"]
    assert [t.get_text().split("\n")[0] for t in sky.get_yticklabels()] == ["Sun", "Moon"]
    jd0 = np.floor(night.sunset_jd - 0.5 / 24 - 0.5) + 0.5
    marks = sorted(float(line.get_xdata()[0]) for line in sky.lines if line.get_gid() == "twilight-marker")
    # sunset, -6, -12, -18 in the evening and the same in the morning: 8 markers on a long night
    assert len(marks) == 8
    assert marks[0] == pytest.approx((night.sunset_jd - jd0) * 24, abs=0.05)
    assert marks[-1] == pytest.approx((night.sunrise_jd - jd0) * 24, abs=0.05)
    # the night the plan uses (nautical limit at the demo site) is a bar from dusk to dawn
    (bar,) = [p for p in sky.patches if p.get_gid() == "night-bar"]
    assert bar.get_x() == pytest.approx((night.start_jd - jd0) * 24)
    assert bar.get_x() + bar.get_width() == pytest.approx((night.end_jd - jd0) * 24)
    # Sun altitude at the markers: -0.833 / -6 / -12 / -18 deg (engine's own ephemeris)
    sun = eng.sun_altitude(jd0 + np.array(marks) / 24)
    assert np.sort(sun) == pytest.approx(np.sort([-18, -18, -12, -12, -6, -6, -0.833, -0.833]), abs=0.1)
    # the Moon: dots where it is up, or a note that it stays down; its illumination in the row name
    moon_label = sky.get_yticklabels()[1].get_text()
    assert "% lit" in moon_label
    dots = [c for c in sky.collections if c.get_gid() == "moon-dots"]
    t = np.linspace(night.sunset_jd - 0.5 / 24, night.sunrise_jd + 0.5 / 24, 200)
    if np.any(eng.moon(t)["alt_deg"] > 1):
        assert dots and len(dots[0].get_offsets()) > 0
    else:
        assert any("Moon below the horizon" in tx.get_text() for tx in sky.texts)
    # beside every lane: the block's airmass and the Moon's distance (or that it is down)
    notes = [tx.get_text() for tx in _axes(fig)["schedule"].texts if tx.get_gid() == "lane-note"]
    assert len(notes) == len({b["name"] for b in plan["blocks"]})
    assert all(n.startswith("airmass ≤") and ("Moon down" in n or "away" in n) for n in notes)


def test_night_chart_has_utc_and_local_time(night_plan):
    from rhofollow.report.schedule_chart import night_figure

    eng, night, sci, plan = night_plan
    fig = night_figure(eng, night, sci, plan)
    ax = _axes(fig)["schedule"]
    assert "UTC" in ax.get_xlabel() and "local time" in ax.get_xlabel()
    assert eng.site.timezone in ax.get_xlabel()
    fig.canvas.draw()
    jd0 = np.floor(night.sunset_jd - 0.5 / 24 - 0.5) + 0.5
    ticks = [(v, lab.get_text()) for v, lab in zip(ax.get_xticks(), ax.get_xticklabels()) if lab.get_text()]
    assert len(ticks) >= 8
    for v, text in ticks:
        utc, local = text.split("\n")
        minutes = round((jd0 + v / 24 - 2451545.0) * 1440)  # JD 2451545.0 = 2000-01-01 12:00 UTC
        when = dt.datetime(2000, 1, 1, 12, tzinfo=dt.timezone.utc) + dt.timedelta(minutes=minutes)
        assert utc == f"{when:%H:%M}"
        # local time from the IANA zone (Python's zoneinfo)
        from zoneinfo import ZoneInfo

        assert local == f"{when.astimezone(ZoneInfo(eng.site.timezone)):%H:%M}"


def test_night_chart_without_blocks_and_lane_limit(night_plan):
    from rhofollow.report.schedule_chart import night_figure

    eng, night, sci, plan = night_plan
    fig = night_figure(eng, night, sci, dict(plan, blocks=[]))
    ax = _axes(fig)["schedule"]
    assert any("no block" in t.get_text() for t in ax.texts)
    assert not [p for p in ax.patches if (p.get_gid() or "").startswith("block:")]
    fig = night_figure(eng, night, sci, plan, max_targets=2)
    ax = _axes(fig)["schedule"]
    assert len(ax.get_yticklabels()) == 2
    hidden = list(dict.fromkeys(b["name"] for b in sorted(plan["blocks"], key=lambda b: b["start_jd"])))[2:]
    assert all(any(h in t.get_text() for t in fig.texts) for h in hidden)


def test_plot_night_writes_a_png(night_plan, tmp_path):
    from rhofollow.report.schedule_chart import plot_night

    eng, night, sci, plan = night_plan
    p = plot_night(tmp_path / "night.png", eng, night, sci, plan)
    assert p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


# ---------------------------------------------------------------------------------------------
# RV figure: the K it shows is the RV record's K summary

ROOT = __import__("pathlib").Path(__file__).resolve().parents[1]
RV_CAT = ("name,period_d,t0_bjd,ra_deg,dec_deg,a_rs,a_rs_err,b,b_err,rp_rs,rp_rs_err,rho_star_cgs,"
          "rho_star_cgs_err,mstar_msun,mstar_msun_err,rstar_rsun,rstar_rsun_err,teff_k,logg_cgs,vmag\n"
          "HTS-104,8.774,2461028.37097,150.1,12.3,27.8,0.6,0.3,0.05,0.118,0.001,1.51,0.08,0.98,0.05,0.97,0.04,"
          "5700,4.4,10.2\n")


@pytest.fixture(scope="module")
def rv_case(tmp_path_factory):
    from rhofollow.stages.assess import assess_catalogue
    from rhofollow.io.catalogue import read_catalogue
    from rhofollow.io.instruments import read_instrument
    from rhofollow.io.rvdata import read_rv_dir
    from rhofollow.stages.rv import plan_rv

    p = tmp_path_factory.mktemp("rv") / "hts.csv"
    p.write_text(RV_CAT)
    (a,) = assess_catalogue(read_catalogue(p).targets, n_samples=600, seed=11)
    vel = read_instrument(ROOT / "site_configs/instruments/aq_vel.toml")
    data = read_rv_dir(ROOT / "examples/rv", {"AQ-VEL"})
    (before,) = plan_rv([a], vel, seed=11, n_null=200, n_alt=200)
    (after,) = plan_rv([a], vel, data, seed=11, n_null=200, n_alt=200)
    return a.samples, before, after, data[a.name]


def _circular_line(fig):
    (line,) = [ln for ln in fig.axes[0].lines if ln.get_gid() == "circular-k"]
    return line


def test_rv_figure_shows_the_record_k(rv_case):
    from rhofollow.physics.rv import circular_shape
    from rhofollow.report.plots import rv_figure

    s, rec, _, _ = rv_case
    fig = rv_figure(s, rec, seed=11)
    line = _circular_line(fig)
    k = rec["k_ms"]["q50"]
    assert f"K = {k:.1f} m/s" in line.get_label()
    # the dashed curve is K times the circular shape (the shape itself is checked in test_rv_k.py)
    ph = np.asarray(line.get_xdata())
    assert np.asarray(line.get_ydata()) == pytest.approx(k * circular_shape(ph), rel=1e-12)
    assert np.max(np.abs(line.get_ydata())) == pytest.approx(k, rel=1e-3)


def test_rv_figure_k_after_measured_rvs_is_the_updated_record_k(rv_case):
    from rhofollow.report.plots import rv_figure

    s, _, rec, data = rv_case
    assert rec.get("k_updated_ms")
    fig = rv_figure(s, rec, rv_data=data, seed=11)
    label = _circular_line(fig).get_label()
    assert f"K = {rec['k_updated_ms']['q50']:.1f} m/s" in label and "after the measured RVs" in label


def test_rv_figure_draws_are_the_records_draws(rv_case):
    """The K draws behind the figure are the RV record's: their weighted quantiles equal ``k_ms``."""
    from rhofollow.report.plots import k_summary, record_k_draws
    from rhofollow.core.samples import quantile_dict

    s, rec, _, _ = rv_case
    k, w = record_k_draws(s, seed=11)
    assert quantile_dict(k, w) == pytest.approx(rec["k_ms"], rel=1e-12)
    # without a record the summary is computed the same way (posterior-weighted median)
    kmed, q, _ = k_summary(None, k, w)
    assert kmed == pytest.approx(rec["k_ms"]["q50"], rel=1e-12)
    assert k_summary(rec)[0] == rec["k_ms"]["q50"]


# ---------------------------------------------------------------------------------------------
# targets that never rise at the site get no per-target figures

def test_highest_altitude_and_rises_at_site():
    from rhofollow.planning.site import load_site
    from rhofollow.report.plots import highest_altitude_deg, rises_at_site

    # upper culmination at 90 - |latitude - declination| (common practice, no source)
    assert highest_altitude_deg(-30.0, -30.0) == pytest.approx(90.0)
    assert highest_altitude_deg(20.0, -30.0) == pytest.approx(40.0)
    site = load_site(ROOT / SITE)  # latitude -30.41, altitude limit 30 deg (airmass 2)
    assert rises_at_site(20.0, site) and rises_at_site(-89.0, site)
    assert not rises_at_site(40.0, site)  # culminates at 19.6 deg
    assert rises_at_site(None, site) and rises_at_site(float("nan"), site)  # unknown: not skipped


def test_report_skips_figures_of_a_target_that_never_rises(tmp_path):
    import csv

    from rhofollow.cli import main

    rows = list(csv.DictReader((ROOT / "examples/hts_candidates.csv").open()))
    keep = [dict(r) for r in rows if r["name"] in ("HTS-103", "HTS-104")]
    keep[1]["dec_deg"] = "75.0"  # invented: far north, never above the demo site's horizon
    cat = tmp_path / "two.csv"
    with cat.open("w", newline="") as f:
        w = csv.DictWriter(f, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(keep)
    out = tmp_path / "report"
    rc = main(["plan", str(cat), "--site", str(ROOT / SITE), "--start", "2026-12-10", "--end", "2026-12-11",
               "--out", str(out), "--samples", "1000", "--sims", "100", "--plot-targets", "0", "--seed", "3"])
    assert rc in (0, 1)
    names = {p.name for p in (out / "plots").iterdir()}
    # per-target files are named "<slug>-<hash>_<kind>.png" (unique and bounded, report/files.py)
    assert any(n.startswith("HTS-103") and n.endswith("_density.png") for n in names)
    assert any(n.startswith("HTS-103") and n.endswith("_rv.png") for n in names)
    assert not [n for n in names if n.startswith("HTS-104")]


# ---------------------------------------------------------------------------------------------
# (e, omega) figure: the uniform-prior interval beside the default one, prior-driven bounds flagged,
# e_min named in the key (not over the data), long names folded (issue 10)

def _ecc_case(name="HTS-206", ratio=0.2):
    from rhofollow.stages.assess import assess_target
    from rhofollow.core.types import Measurement as M, Target
    from rhofollow.physics.transit import ars_from_rho

    a_c = float(ars_from_rho(1.4 * ratio, 5.0))
    t = Target(name, 1, "fig.csv", {"period_d": M(5.0, 1e-5, 1e-5), "t0_bjd": M(2461000.5, 1e-3, 1e-3),
                                    "a_rs": M(a_c, 0.02 * a_c, 0.02 * a_c), "rp_rs": M(0.1, 0.002, 0.002),
                                    "rho_star_cgs": M(1.4, 0.07, 0.07)})
    a = assess_target(t, n_samples=4000, seed=2)
    assert a.ok
    return a


def test_ecc_figure_shows_both_priors_intervals_and_flags_prior_bounds():
    from rhofollow.report.plots import ecc_omega_figure

    a = _ecc_case()
    rec = a.record
    fig = ecc_omega_figure(a.samples, rec)
    ax, axr = fig.axes[0], fig.axes[2]
    labels = [t.get_text() for t in fig.legends[0].get_texts()]
    assert any(lab.startswith(f"e_min = {rec['ecc_min']:.2f}") for lab in labels)
    assert not [t for t in ax.texts if "e_min" in t.get_text()]   # no label over the posterior
    assert any("uniform prior" in lab for lab in labels) and any("kipping13 prior" in lab for lab in labels)
    # the two interval bars span the record's 95 % intervals (default and uniform-prior re-weighted)
    spans = sorted(tuple(sorted(ln.get_ydata())) for ln in axr.lines if len(ln.get_ydata()) == 2
                   and ln.get_linewidth() == 4)
    want = sorted([(rec["ecc"]["q025"], rec["ecc"]["q975"]),
                   (rec["ecc_uniform_prior"]["q025"], rec["ecc_uniform_prior"]["q975"])])
    assert [x for sp in spans for x in sp] == pytest.approx([x for sp in want for x in sp])
    n_prior = sum(v == "prior" for v in rec["ecc_bounds"].values())
    # a 5-fold low density: g = (1 + e sin w)/sqrt(1 - e^2) = 0.585 (Kipping 2010, MNRAS 407, 301) is
    # met by every e above e_min at some w, so the data set no upper bound: it is the prior's
    assert n_prior >= 1 and rec["ecc_bounds"]["upper"] == "prior"
    assert sum(t.get_text() == "†" for t in axr.texts) == n_prior
    assert any("set by the prior" in lab for lab in labels)
    assert f"prior {rec['p_ecc_gt_0p1_prior']:.2f}" in fig._suptitle.get_text()


def test_figures_fold_long_names_and_stay_inside_the_figure():
    """A 300-character target name folds across title lines (never off the figure) and leaves the
    layout applicable: pytest turns matplotlib's "Tight layout not applied" warning into an error."""
    from rhofollow.report.plots import density_figure, ecc_omega_figure, occultation_figure, rv_figure

    a = _ecc_case(name="HTS-" + "VERY-LONG-SURVEY-DESIGNATION-" * 10)
    figs = [ecc_omega_figure(a.samples, a.record), density_figure(a.record),
            occultation_figure(a.samples, {}), rv_figure(a.samples, None)]
    for fig in figs:
        fig.canvas.draw()
        r = fig.canvas.get_renderer()
        fw = fig.bbox.width
        titles = [fig._suptitle] if fig._suptitle is not None else []
        titles += [ax.title for ax in fig.axes if ax.title.get_text()]
        assert titles
        for t in titles:
            bb = t.get_window_extent(r)
            assert bb.x0 >= -1 and bb.x1 <= fw + 1, (t.get_text()[:40], bb.x0, bb.x1, fw)
            assert "\n" in t.get_text()
