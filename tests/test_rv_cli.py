"""The ``rhofollow rv`` command: JSON contract, equality with the library, bad input -> exit 2."""
import json
from pathlib import Path

import pytest

from rhofollow.cli import main

ROOT = Path(__file__).resolve().parents[1]
VEL = str(ROOT / "site_configs/instruments/aq_vel.toml")
CAM = str(ROOT / "site_configs/instruments/aq_cam.toml")
CAT = ("name,period_d,t0_bjd,ra_deg,dec_deg,a_rs,a_rs_err,b,b_err,rp_rs,rp_rs_err,rho_star_cgs,"
       "rho_star_cgs_err,mstar_msun,mstar_msun_err,rstar_rsun,rstar_rsun_err,teff_k,logg_cgs,vmag\n"
       "HTS-104,8.774,2461028.37097,150.1,12.3,27.8,0.6,0.3,0.05,0.118,0.001,1.51,0.08,0.98,0.05,0.97,0.04,"
       "5700,4.4,10.2\n"
       "HTS-107,16.02,2461026.59207,210.3,-5.2,32.9,0.7,0.2,0.05,0.102,0.0008,1.18,0.07,1.05,0.04,1.08,0.03,"
       "5200,4.55,9.4\n")
KEYS = {"name", "ok", "errors", "warnings", "k_ms", "mp_mearth", "sigma_rv_ms", "n_epochs_detect_k",
        "n_epochs_confirm_ecc", "hours_confirm_ecc", "best_phases"}


@pytest.fixture
def cat(tmp_path):
    p = tmp_path / "hts.csv"
    p.write_text(CAT)
    return p


def run(*argv):
    return main(["rv", *map(str, argv), "--samples", "600", "--seed", "7", "--sims", "300"])


def test_json_contract_and_library_equality(cat, tmp_path):
    out = tmp_path / "rv.json"
    assert run(cat, "--instrument", VEL, "--rv-data", ROOT / "examples/rv", "--json", out) == 0
    doc = json.loads(out.read_text())
    assert "safety" in doc["caution"]
    recs = {r["name"]: r for r in doc["targets"]}
    for r in recs.values():
        assert KEYS <= set(r) and r["ok"]
        assert set(r["k_ms"]) == {"q025", "q16", "q50", "q84", "q975"}
        assert {"ecc_updated", "ecc_confirmed"} <= set(r)
        assert all(0 <= p < 1 for p in r["best_phases"])
    # The demo RVs of HTS-104 were made from e = 0.41, K = 45 m/s (examples/rv/make_demo_rv.py;
    # invented truth of examples/hts_truth.csv).
    assert recs["HTS-104"]["ecc_confirmed"] is True
    assert recs["HTS-104"]["ecc_updated"]["q025"] < 0.41 < recs["HTS-104"]["ecc_updated"]["q975"]
    # The CLI JSON equals the library's records for the same inputs and seed.
    from rhofollow.stages.assess import assess_catalogue
    from rhofollow.cli.common import _clean
    from rhofollow.io.catalogue import read_catalogue
    from rhofollow.io.instruments import read_instrument
    from rhofollow.io.rvdata import read_rv_dir
    from rhofollow.stages.rv import plan_rv

    a = assess_catalogue(read_catalogue(cat).targets, n_samples=600, seed=7)
    lib = plan_rv(a, read_instrument(VEL), read_rv_dir(ROOT / "examples/rv", {"AQ-VEL"}), seed=7,
                  n_null=300, n_alt=300)
    from rhofollow.cli.common import json_default
    assert _clean(json.loads(json.dumps(lib, default=json_default))) == doc["targets"]


def test_same_seed_same_output(cat, tmp_path):
    a, b = tmp_path / "a.json", tmp_path / "b.json"
    assert run(cat, "--instrument", VEL, "--json", a) == 0
    assert run(cat, "--instrument", VEL, "--json", b) == 0
    assert a.read_text() == b.read_text()


def test_missing_vmag_is_a_target_error(tmp_path):
    p = tmp_path / "c.csv"
    p.write_text(CAT.replace(",5700,4.4,10.2\n", ",5700,4.4,\n"))
    out = tmp_path / "o.json"
    assert run(p, "--instrument", VEL, "--json", out) == 1
    r = {t["name"]: t for t in json.loads(out.read_text())["targets"]}
    assert not r["HTS-104"]["ok"] and "vmag" in r["HTS-104"]["errors"][0] and r["HTS-107"]["ok"]


@pytest.mark.parametrize("extra, match", [
    (["--instrument", "nope.toml"], "nope.toml: instrument file not found"),
    (["--instrument", CAM], "needs a spectrograph"),
    (["--instrument", VEL, "--fap", "1.5"], "--fap"),
    (["--instrument", VEL, "--power", "0"], "--power"),
])
def test_bad_options(cat, capsys, extra, match):
    assert run(cat, *extra) == 2
    assert match in capsys.readouterr().err.replace("\n", "")


def test_bad_rv_file(cat, tmp_path, capsys):
    d = tmp_path / "rv"
    d.mkdir()
    (d / "HTS-104.csv").write_text("bjd_tdb,rv_ms,rv_err_ms,instrument\n2460401.5,1,2,AQ-VEL\n"
                                   "2460402.5,1,2,MYSTERY\n")
    assert run(cat, "--instrument", VEL, "--rv-data", d) == 2
    err = capsys.readouterr().err.replace("\n", "")
    assert "HTS-104.csv, row 2, column 'instrument'" in err and "MYSTERY" in err
    assert "Traceback" not in err
