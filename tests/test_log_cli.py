"""``rhofollow log`` end to end, and the posterior update from ledger data.

Systems are invented (Heliotrope Transit Survey); every random draw is seeded.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from rhofollow.cli import main
from rhofollow.io.ledger import Ledger
from rhofollow.stages.update import LedgerUpdateError, update_from_ledger
from rhofollow.physics import occultation_timing as ot
from rhofollow.physics.rv import rv_curve
from rhofollow.core.samples import SampleSet

EXAMPLES = Path(__file__).resolve().parent.parent / "examples"


def run(*argv) -> int:
    return main([str(a) for a in argv])


def test_rv_ingest_twice_via_cli(tmp_path, capsys):
    db = tmp_path / "l.sqlite"
    f = EXAMPLES / "ledger" / "rv_heliotrope.csv"
    assert run("log", "rv", f, "--ledger", db, "--json", tmp_path / "a.json") == 0
    first = json.loads((tmp_path / "a.json").read_text())["ingests"][0]
    n_rows = sum(1 for ln in f.read_text().splitlines()[2:] if ln.strip())
    assert first["n_added"] - len(first["added"].get("targets", [])) == n_rows
    capsys.readouterr()
    assert run("log", "rv", f, "--ledger", db, "--json", tmp_path / "b.json") == 0
    assert "already in the ledger" in capsys.readouterr().out
    second = json.loads((tmp_path / "b.json").read_text())["ingests"][0]
    assert second["already_ingested"] and second["n_added"] == 0


def test_malformed_file_rejected_whole_via_cli(tmp_path, capsys):
    db = tmp_path / "l.sqlite"
    assert run("log", "done", "--target", "HTS-104", "--start", "2026-06-01T01:00:00",
               "--kind", "rv", "--ledger", db) == 0
    with Ledger(db) as lg:
        before = lg.content()
    bad = EXAMPLES / "ledger" / "malformed_rv.csv"
    capsys.readouterr()
    assert run("log", "rv", bad, "--ledger", db) == 2
    err = " ".join(capsys.readouterr().err.split())
    assert "malformed_rv.csv" in err and "row 2, column 'rv_ms'" in err
    assert "row 3, column 'rv_err_ms'" in err and "nothing was written" in err
    with Ledger(db) as lg:
        assert lg.content() == before


def test_occultation_forms_and_option_errors(tmp_path, capsys):
    db = tmp_path / "l.sqlite"
    assert run("log", "occultation", EXAMPLES / "ledger" / "occultations_heliotrope.csv",
               "--ledger", db) == 0
    assert run("log", "occultation", "--target", "HTS-105", "--mid", "2461100.25",
               "--err-min", "3", "--band", "4.5", "--ledger", db) == 0
    assert run("log", "occultation", "--target", "HTS-105", "--window", "2461103.1",
               "2461103.4", "--depth-limit", "400", "--ledger", db) == 0
    with Ledger(db) as lg:
        kinds = [o.kind for o in lg.occultation_timings("HTS-105")]
        assert kinds == ["detection", "non_detection"]
    capsys.readouterr()
    assert run("log", "occultation", "--target", "HTS-105", "--mid", "2461100.25",
               "--window", "1", "2", "--ledger", db) == 2
    assert run("log", "occultation", "--ledger", db) == 2
    assert run("log", "occultation", "--target", "HTS-105", "--window", "2461103.4",
               "2461103.1", "--depth-limit", "400", "--ledger", db) == 2
    assert "window ends before it starts" in " ".join(capsys.readouterr().err.split())


def test_done_show_and_export_import_round_trip(tmp_path, capsys):
    db = tmp_path / "l.sqlite"
    assert run("log", "done", EXAMPLES / "ledger" / "done_heliotrope.csv", "--ledger", db) == 0
    assert run("log", "rv", EXAMPLES / "ledger" / "rv_heliotrope.csv", "--ledger", db) == 0
    assert run("log", "occultation", EXAMPLES / "ledger" / "occultations_heliotrope.csv",
               "--ledger", db) == 0
    assert run("log", "show", "--ledger", db, "--json", tmp_path / "s.json") == 0
    s = json.loads((tmp_path / "s.json").read_text())
    by = {t["name"]: t for t in s["targets"]}
    assert by["HTS-103"]["n_rv"] > 0 and by["HTS-103"]["n_occ_detections"] == 1
    assert s["schema_version"] == 2 and len(s["ingests"]) == 3
    assert run("log", "show", "HTS-103", "--ledger", db, "--json", tmp_path / "t.json") == 0
    t = json.loads((tmp_path / "t.json").read_text())["target"]
    assert t["occultation_timings"][0]["kind"] == "detection"
    assert run("log", "show", "HTS-999", "--ledger", db) == 2
    assert run("log", "export", tmp_path / "out", "--ledger", db) == 0
    db2 = tmp_path / "fresh.sqlite"
    assert run("log", "import", tmp_path / "out", "--ledger", db2) == 0
    with Ledger(db) as a, Ledger(db2) as b:
        assert a.content() == b.content()
        assert b.is_done("HTS-101", "rv") and not b.is_done("HTS-103")


# ---------------------------------------------------------------------------------------------
# The posterior update on an injected eccentric system

TRUE = dict(period=4.7, t0=2461000.3, e=0.35, omega=np.radians(50.0), a_rs=12.0, b=0.3,
            k=0.09, rstar=1.0, mstar=1.0, teff=5600.0, K=40.0)


def density_only_samples(name: str, n: int, seed: int) -> SampleSet:
    """A photo-eccentric posterior of the injected system built by importance sampling: uniform
    (e, omega) weighted by a Gaussian likelihood of g = (1 + e sin w)/sqrt(1 - e^2) around the
    true g with 5 % error (Dawson & Johnson 2012 recipe; REFERENCE sec. 3.3, memory)."""
    rng = np.random.default_rng(seed)
    e = rng.uniform(0.0, 0.9, n)
    om = rng.uniform(0.0, 2 * np.pi, n)
    g = (1 + e * np.sin(om)) / np.sqrt(1 - e**2)
    g_true = (1 + TRUE["e"] * np.sin(TRUE["omega"])) / np.sqrt(1 - TRUE["e"] ** 2)
    w = np.exp(-0.5 * ((g - g_true) / (0.05 * g_true)) ** 2)
    a_rs = rng.normal(TRUE["a_rs"], 0.2, n)
    b = np.clip(rng.normal(TRUE["b"], 0.03, n), 0, None)
    # b = a cos i (1 - e^2)/(1 + e sin w) (Winn 2010 eq. 7, memory)
    inc = np.arccos(b / a_rs * (1 + e * np.sin(om)) / (1 - e**2))
    return SampleSet(name=name, e=e, omega=om, b=b, k=rng.normal(TRUE["k"], 0.001, n),
                     period=rng.normal(TRUE["period"], 2e-5, n),
                     t0=rng.normal(TRUE["t0"], 4e-4, n), rho_star=np.full(n, 1.4),
                     mstar=np.full(n, 1.0), rstar=rng.normal(1.0, 0.02, n), a_rs=a_rs, inc=inc,
                     teff=np.full(n, TRUE["teff"]), weights=w)


def simulated_files(folder: Path, name: str, seed: int) -> tuple[Path, Path]:
    rng = np.random.default_rng(seed)
    lines = ["target,bjd_tdb,rv_ms,rv_err_ms,instrument"]
    for inst, n, err, offset in (("Larkspur", 10, 4.0, 15.0), ("Foxglove", 5, 6.0, -8.0)):
        t = np.sort(TRUE["t0"] + 30 + rng.uniform(0, 40, n))
        v = rv_curve(t, TRUE["period"], TRUE["t0"], TRUE["e"], TRUE["omega"], TRUE["K"],
                     offset) + rng.normal(0, err, n)
        lines += [f"{name},{float(ti)!r},{float(vi)!r},{err},{inst}" for ti, vi in zip(t, v)]
    rv = folder / "rv.csv"
    rv.write_text("\n".join(lines) + "\n")
    inc = np.arccos(TRUE["b"] / TRUE["a_rs"] * (1 + TRUE["e"] * np.sin(TRUE["omega"]))
                    / (1 - TRUE["e"] ** 2))
    mid = (TRUE["t0"] + 20 * TRUE["period"]
           + ot.occultation_offset(TRUE["e"], TRUE["omega"], TRUE["period"])
           + ot.light_time_delay(TRUE["e"], TRUE["omega"], TRUE["a_rs"], TRUE["rstar"], inc)
           + rng.normal(0, 10.0 / 1440))
    occ = folder / "occ.csv"
    occ.write_text("target,kind,mid_bjd_tdb,mid_err_min,instrument\n"
                   f"{name},detection,{float(mid)!r},10.0,Sorrel-IR\n")
    return rv, occ


def width(q):
    return q["q84"] - q["q16"]


def test_posterior_tightens_around_the_injected_truth(tmp_path):
    name = "HTS-190"
    prior = density_only_samples(name, 60000, seed=11)
    rv, occ = simulated_files(tmp_path, name, seed=12)
    db = tmp_path / "l.sqlite"
    assert run("log", "rv", rv, "--ledger", db) == 0
    assert run("log", "occultation", occ, "--ledger", db) == 0
    with Ledger(db) as lg:
        res = update_from_ledger(lg, prior)
        assert res.n_rv == 15 and res.n_detections == 1 and res.stored
        before, after = prior.quantiles("e"), res.summary["ecc"]
        # the density alone allows a wide range of e; the RVs and the timing pin it
        assert width(after) < 0.3 * width(before)
        assert after["q025"] < TRUE["e"] < after["q975"]
        assert abs(after["q50"] - TRUE["e"]) < 0.05
        ecosw = res.summary["ecosw"]
        assert ecosw["q025"] < TRUE["e"] * np.cos(TRUE["omega"]) < ecosw["q975"]
        assert width(ecosw) < 0.02
        # importance weights concentrate (the prior is broad); enough samples remain to summarise
        assert res.ess > 20
        (v,) = lg.posterior_versions(name)
        assert v.summary["ecc"] == after and v.summary["n_rv"] == 15
        # same samples, same data: no new version
        assert not update_from_ledger(lg, prior).stored
        assert len(lg.posterior_versions(name)) == 1


def test_occultation_timing_alone_moves_e_cos_omega(tmp_path):
    name = "HTS-191"
    prior = density_only_samples(name, 30000, seed=21)
    _, occ = simulated_files(tmp_path, name, seed=22)
    with Ledger(tmp_path / "l.sqlite") as lg:
        lg.ingest_occultation_file(occ)
        res = update_from_ledger(lg, prior, store=False)
        assert res.n_rv == 0 and not res.stored
        assert np.all(res.log_like["rv"] == 0)
        q = res.summary["ecosw"]
        assert q["q16"] < TRUE["e"] * np.cos(TRUE["omega"]) < q["q84"] or width(q) < 0.01
        assert width(q) < 0.2 * width(prior.quantiles("e"))
        assert lg.posterior_versions(name) == []


def test_non_detection_removes_samples_with_occultation_in_the_window(tmp_path):
    name = "HTS-192"
    prior = density_only_samples(name, 30000, seed=31)
    # window around the phase where the circular-like samples (e cos w ~ 0) put the occultation
    start = TRUE["t0"] + 20 * TRUE["period"] + 0.5 * TRUE["period"] - 0.15
    with Ledger(tmp_path / "l.sqlite") as lg:
        lg.add_occultation(name, kind="non_detection", window_start_bjd_tdb=start,
                           window_end_bjd_tdb=start + 0.3, depth_limit_ppm=200.0, band_um=4.5)
        res = update_from_ledger(lg, prior, store=False)
    s0, s1 = prior, res.samples
    near_half = np.abs(s0.e * np.cos(s0.omega)) < 0.02
    assert np.sum(s0.weights[near_half]) > 0.02
    assert np.sum(s1.weights[near_half]) < 0.1 * np.sum(s0.weights[near_half])


def test_impossible_data_are_reported(tmp_path):
    name = "HTS-193"
    prior = density_only_samples(name, 2000, seed=41)
    with Ledger(tmp_path / "l.sqlite") as lg:
        # a timing far (hours) from every prediction, with a tiny error: a warning
        lg.add_occultation(name, mid_bjd_tdb=TRUE["t0"] + 0.01, mid_err_min=0.5)
        res = update_from_ledger(lg, prior, store=False)
        assert any("conflicts with the posterior" in w for w in res.warnings)
        # at i = 10 deg no sample has an occultation at all (b_occ > 1 + k): an error
        prior.inc[:] = np.radians(10.0)
        with pytest.raises(LedgerUpdateError, match="exclude every"):
            update_from_ledger(lg, prior)
        assert lg.posterior_versions(name) == []


def test_update_command_on_the_demo_catalogue(tmp_path, capsys):
    db = tmp_path / "l.sqlite"
    assert run("log", "targets", EXAMPLES / "hts_candidates.csv", "--ledger", db) == 0
    assert run("log", "rv", EXAMPLES / "ledger" / "rv_heliotrope.csv", "--ledger", db) == 0
    assert run("log", "occultation", EXAMPLES / "ledger" / "occultations_heliotrope.csv",
               "--ledger", db) == 0
    rc = run("log", "update", "HTS-103", "HTS-999", "--samples", "4000", "--seed", "5",
             "--ledger", db, "--json", tmp_path / "u.json")
    assert rc == 1  # HTS-999 is not in the ledger
    recs = {r["name"]: r for r in json.loads((tmp_path / "u.json").read_text())["targets"]}
    assert not recs["HTS-999"]["ok"] and "not in the ledger" in recs["HTS-999"]["errors"][0]
    r = recs["HTS-103"]
    assert r["ok"] and r["n_rv"] == 14 and r["n_occ_detections"] == 1
    for key in ("name", "ok", "errors", "warnings", "ecc", "ecosw", "esinw", "ess"):
        assert key in r
    assert set(r["ecc"]) == {"q025", "q16", "q50", "q84", "q975"}
    with Ledger(db) as lg:
        assert len(lg.posterior_versions("HTS-103")) == 1


def test_apply_to_assessments_replaces_samples_of_targets_with_data(tmp_path):
    from rhofollow.stages.assess import Assessment
    from rhofollow.stages.update import apply_to_assessments

    with_data = Assessment("HTS-194", None, True, samples=density_only_samples("HTS-194", 5000, 51))
    without = Assessment("HTS-195", None, True, samples=density_only_samples("HTS-195", 5000, 52))
    failed = Assessment("HTS-196", None, False, errors=["bad row"])
    untouched = without.samples
    _, occ = simulated_files(tmp_path, "HTS-194", seed=53)
    with Ledger(tmp_path / "l.sqlite") as lg:
        lg.ingest_occultation_file(occ)
        ups = apply_to_assessments(lg, [with_data, without, failed])
        assert list(ups) == ["HTS-194"]
        assert with_data.samples is ups["HTS-194"].samples
        assert with_data.samples.ess < 0.5 * density_only_samples("HTS-194", 5000, 51).ess
        assert without.samples is untouched
        assert lg.posterior_versions("HTS-194") == []  # planners do not store by default
