"""Nightly plan: contract, exactness and observability of every block."""
import numpy as np
import pytest

from rhofollow.planning.night import CAUTION, plan_night, science_entry
from rhofollow.planning.tasks import VisGrid, iso_to_jd, jd_to_iso

JD0 = 2461376.5 + 1.0 / 24.0  # invented night, 2026-12-03T01:00Z, 8 h long


def _vis(names, n=97, obs=None, airmass=None):
    t = JD0 + np.arange(n) * 5.0 / 1440.0
    o = np.ones((len(names), n), bool) if obs is None else obs
    x = np.full((len(names), n), 1.3) if airmass is None else airmass
    return VisGrid(t, list(names), o, x)


def _occ(w0_h, w1_h, p=0.9, dur=1.5):
    return {"p_occultation": p, "occ_duration_h": dur,
            "events": [{"epoch": 7, "window_utc": [[jd_to_iso(JD0 + w0_h / 24), jd_to_iso(JD0 + w1_h / 24)]]}]}


def _rv(n=6, hours=3.0, best=(0.25, 0.75)):
    return {"n_epochs_confirm_ecc": n, "hours_confirm_ecc": hours, "best_phases": list(best)}


def _science():
    return [
        science_entry("HTS-101", evidence=0.9, occultation=_occ(1.0, 3.0), rv=_rv(),
                      t0_bjd=JD0 - 0.3, period_d=3.1),
        science_entry("HTS-102", evidence=0.6, occultation=_occ(2.0, 4.5), rv=None),
        science_entry("HTS-103", evidence=0.8, rv=_rv(n=3, hours=1.5), t0_bjd=JD0 + 0.1, period_d=1.7),
        science_entry("HTS-104", evidence=0.0, rv=_rv(), t0_bjd=JD0, period_d=5.0),
    ]


def test_night_contract_and_feasibility():
    names = ["HTS-101", "HTS-102", "HTS-103", "HTS-104"]
    plan = plan_night(_science(), _vis(names), site="Alto Quemado Observatory", night_start_jd=JD0,
                      night_end_jd=JD0 + 8 / 24, overhead_h=0.1)
    d = plan.to_dict()
    assert {"site", "night_start_utc", "night_end_utc", "blocks", "skipped"} <= set(d)
    assert d["cautions"] == [CAUTION]
    for b in d["blocks"]:
        assert {"name", "kind", "start_utc", "end_utc", "value", "airmass_max"} <= set(b)
        assert b["kind"] in ("occultation", "rv")
        assert iso_to_jd(b["start_utc"]) >= JD0 - 1e-6
        assert iso_to_jd(b["end_utc"]) <= JD0 + 8 / 24 + 1e-6
    ends = sorted((iso_to_jd(b["start_utc"]), iso_to_jd(b["end_utc"])) for b in d["blocks"])
    for (s0, e0), (s1, e1) in zip(ends, ends[1:]):
        assert s1 >= e0 + 0.1 / 24 - 2e-5  # ISO rounding to the second
    for s in d["skipped"]:
        assert set(s) == {"name", "reason"}
    # the zero-evidence target is skipped with a reason
    assert any(s["name"] == "HTS-104" and "no value" in s["reason"] for s in d["skipped"])
    # every offered task is either scheduled or explained
    assert {b["name"] for b in d["blocks"]} | {s["name"] for s in d["skipped"]} == set(names)


def test_night_exact_beats_greedy():
    names = ["HTS-101", "HTS-102", "HTS-103", "HTS-104"]
    kw = dict(site="x", night_start_jd=JD0, night_end_jd=JD0 + 8 / 24, overhead_h=0.1)
    exact = plan_night(_science(), _vis(names), **kw)
    greedy = plan_night(_science(), _vis(names), method="greedy", **kw)
    assert exact.schedule.method == "milp"
    assert exact.schedule.value >= greedy.schedule.value * (1 - 1e-7)  # solver tolerance


def test_night_respects_unobservable_time():
    names = ["HTS-103"]
    obs = np.zeros((1, 97), bool)
    obs[0, 40:60] = True
    plan = plan_night(_science()[2:3], _vis(names, obs=obs), site="x", night_start_jd=JD0,
                      night_end_jd=JD0 + 8 / 24)
    (b,) = plan.to_dict()["blocks"]
    t = JD0 + np.arange(97) * 5.0 / 1440.0
    assert iso_to_jd(b["start_utc"]) >= t[40] - 1e-6 and iso_to_jd(b["end_utc"]) <= t[59] + 1e-6
    assert b["kind"] == "rv" and 0 <= b["phase"] < 1


# ---------------------------------------------------------------- real site, independent astropy check

SITE = "site_configs/alto_quemado.toml"


@pytest.fixture()
def real_plan(demo_night):
    """The shared demo night (tests/conftest.py): site, night grid, science dicts, the plan's JSON."""
    return demo_night.site, demo_night.night, demo_night.science, demo_night.plan.to_dict()


def test_real_night_has_both_kinds(real_plan):
    _, _, _, d = real_plan
    kinds = {b["kind"] for b in d["blocks"]}
    assert kinds == {"occultation", "rv"}
    assert d["solver_status"] == "optimal"


def test_every_block_observable_astropy(real_plan):
    """Independent check with astropy (AltAz, get_sun, get_body) and astroplan's moon_illumination:
    throughout each block (1-minute samples) the Sun is below the site's twilight limit, the target
    is above the altitude limit and the horizon mask, and the Moon is far enough (or below the
    horizon, as the site allows). Tolerance 0.05 deg: the visibility engine's stated accuracy."""
    import astropy.units as u
    from astroplan import moon_illumination
    from astropy.coordinates import AltAz, SkyCoord, get_body, get_sun
    from astropy.time import Time

    site, night, sci, d = real_plan
    c = site.constraints
    loc = site.location
    by_name = {s["name"]: s for s in sci}
    assert d["blocks"]
    for b in d["blocks"]:
        t = Time(np.arange(b["start_jd"], b["end_jd"] + 1e-9, 1 / 1440), format="jd", scale="utc")
        assert night.start_jd - 1e-6 <= t.jd[0] and t.jd[-1] <= night.end_jd + 1e-6
        frame = AltAz(obstime=t, location=loc)  # no pressure: geometric, like the engine
        tgt = SkyCoord(by_name[b["name"]]["ra_deg"] * u.deg, by_name[b["name"]]["dec_deg"] * u.deg)
        alt = tgt.transform_to(frame)
        sun_alt = get_sun(t).transform_to(frame).alt.deg
        assert np.all(sun_alt < c.sun_altitude_limit_deg + 0.05), b
        need = c.required_altitude_deg(alt.az.deg)
        assert np.all(alt.alt.deg >= need - 0.05), b
        moon = get_body("moon", t, loc).transform_to(frame)
        sep = moon.separation(alt).deg
        req = c.required_moon_separation_deg(moon_illumination(t))
        ok = sep >= req - 0.05
        if c.moon_ignore_below_horizon:
            ok |= moon.alt.deg < 0.05
        assert np.all(ok), b
        # the reported airmass bound holds too (sec z from astropy)
        assert np.max(alt.secz.value) <= b["airmass_max"] + 0.01


# ---------------------------------------------------------------- the command

def _small_catalogue(tmp_path, rows=(1, 3)):
    lines = [ln for ln in open("examples/hts_candidates.csv", encoding="utf-8") if not ln.startswith("#")]
    path = tmp_path / "cat.csv"
    path.write_text("".join([lines[0]] + [lines[i] for i in rows]), encoding="utf-8")
    return path


def test_night_command_json_and_plot(tmp_path):
    import json

    from rhofollow.cli import main

    cat = _small_catalogue(tmp_path, rows=(15, 19))  # HTS-115 and HTS-119: RV visits that night
    out, png = tmp_path / "night.json", tmp_path / "night.png"
    rc = main(["night", str(cat), "--site", SITE, "--date", "2026-12-10", "--samples", "300",
               "--seed", "3", "--json", str(out), "--plot", str(png)])
    assert rc == 0
    d = json.loads(out.read_text())
    assert d["site"] == "Alto Quemado Observatory" and d["date"] == "2026-12-10"
    assert d["night_start_utc"] < d["night_end_utc"]
    assert {"blocks", "skipped", "cautions"} <= set(d)
    for b in d["blocks"]:
        assert {"name", "kind", "start_utc", "end_utc", "value", "airmass_max"} <= set(b)
        assert d["night_start_utc"] <= b["start_utc"] < b["end_utc"] <= d["night_end_utc"]
    assert {b["name"] for b in d["blocks"]} | {s["name"] for s in d["skipped"]} == {"HTS-115", "HTS-119"}
    assert png.stat().st_size > 10_000 and png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_night_command_errors(tmp_path, capsys):
    from rhofollow.cli import main

    cat = _small_catalogue(tmp_path)
    assert main(["night", str(cat), "--site", SITE, "--date", "2026-13-01"]) == 2
    assert "--date must be YYYY-MM-DD" in capsys.readouterr().err
    assert main(["night", str(cat), "--site", str(tmp_path / "none.toml"), "--date", "2026-12-10"]) == 2
    assert main(["night", str(tmp_path / "none.csv"), "--site", SITE, "--date", "2026-12-10",
                 "--samples", "300"]) == 2
    assert "none.csv" in (err := capsys.readouterr().err) and "not found" in err


def test_night_evidence_is_the_rankings_data_weight():
    """E of the night and campaign block values is the ranking's W = B/(1+B), B the posterior-to-
    prior odds of e > 0.1 (README, Ranking; one definition: rhofollow.stages.assess.data_weight). A target
    the data say nothing about (posterior = prior) gets E = 0.5, not the prior's P(e > 0.1) ~ 0.7;
    another threshold computes the same W from the samples and the run's prior.
    (Ranking and value rules of this project, common practice, no source.)"""
    from types import SimpleNamespace

    from rhofollow.stages.assess import assess_target, data_weight, record_data_weight, refresh_data_keys
    from rhofollow.core.types import Measurement as M, Target
    from rhofollow.planning.night import science_from_records
    from rhofollow.physics.priors import parse_prior
    from rhofollow.planning.tasks import ecc_evidence
    from rhofollow.report.tables import rank_targets

    t = Target("HTS-E", 1, "e.csv", {"period_d": M(4.0, 1e-5, 1e-5), "t0_bjd": M(2461000.5, 1e-3, 1e-3),
                                     "a_rs": M(13.0, 0.4, 0.4), "rp_rs": M(0.1, 0.002, 0.002),
                                     "rho_star_cgs": M(2.2, 0.2, 0.2), "ra_deg": M(150.0), "dec_deg": M(-30.0)})
    a = assess_target(t, n_samples=3000, seed=4)
    rec = a.record
    (entry,), _ = science_from_records([a], [], [])
    assert entry["evidence"] == pytest.approx(rec["ecc_data_weight"]) == pytest.approx(record_data_weight(rec))
    assert entry["evidence"] != pytest.approx(rec["p_ecc_gt_0p1"])
    result = SimpleNamespace(assessments=[a], occultations={"targets": [{"name": "HTS-E", "p_occultation": 1.0}]},
                             rv=[], campaign={"targets": [{"name": "HTS-E", "occultation_windows": [1]}]})
    w_rank = rank_targets(result)["HTS-E"]["priority"] / rec["p_explanation"]["eccentric"]
    assert w_rank == pytest.approx(entry["evidence"], abs=1e-5)
    # no information: posterior = prior -> W = 0.5
    p0 = rec["p_ecc_gt_0p1_prior"]
    assert data_weight(p0, p0, 1e4) == pytest.approx(0.5)
    # another threshold: the same W from the samples and the run's prior
    (e2,), _ = science_from_records([a], [], [], e_min=0.2)
    s = a.samples
    want = data_weight(ecc_evidence(s.e, s.weights, 0.2), parse_prior(rec["prior"]).prob_above(0.2, True), s.ess)
    assert e2["evidence"] == pytest.approx(want)
    # an updated posterior (ledger RVs) moves W with it
    rec2 = dict(rec, p_ecc_gt_0p1=0.999)
    refresh_data_keys(rec2)
    assert rec2["ecc_data_weight"] > rec["ecc_data_weight"] and record_data_weight(rec2) == rec2["ecc_data_weight"]
