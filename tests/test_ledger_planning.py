"""The planners read the campaign ledger (--ledger): updated posteriors, visits done, measured
occultations not re-planned."""
import json
from pathlib import Path

from rhofollow.cli import main

ROOT = Path(__file__).resolve().parents[1]
SITE = str(ROOT / "site_configs/alto_quemado.toml")


def _catalogue(tmp_path, names=("HTS-101", "HTS-103")):
    lines = (ROOT / "examples/hts_candidates.csv").read_text().splitlines()
    keep = [lines[0]] + [ln for ln in lines[1:] if ln.split(",")[0] in names]
    p = tmp_path / "cat.csv"
    p.write_text("\n".join(keep) + "\n")
    return p


def _ledger(tmp_path, cat):
    led = str(tmp_path / "campaign.sqlite")
    for argv in (["targets", str(cat)], ["rv", str(ROOT / "examples/ledger/rv_heliotrope.csv")],
                 ["occultation", str(ROOT / "examples/ledger/occultations_heliotrope.csv")]):
        assert main(["log", *argv, "--ledger", led]) == 0
    return led


def test_apply_ledger_updates_records_and_counts(tmp_path):
    from rhofollow.stages.assess import assess_catalogue
    from rhofollow.io.catalogue import read_catalogue
    from rhofollow.pipeline import apply_ledger

    cat = _catalogue(tmp_path)
    led = _ledger(tmp_path, cat)
    a = assess_catalogue(read_catalogue(cat).targets, n_samples=2000, seed=3)
    before = {x.name: x.record["ecc"]["q975"] - x.record["ecc"]["q025"] for x in a}
    n_done, measured, notes = apply_ledger(led, a)
    assert measured == {"HTS-103"}          # the demo ledger holds a caught occultation of HTS-103
    assert n_done.get("HTS-101", 0) >= 1 and n_done.get("HTS-103", 0) >= 1
    recs = {x.name: x.record for x in a}
    assert recs["HTS-103"].get("updated_from_ledger") is True and notes
    # measured data narrow the eccentricity interval
    assert recs["HTS-103"]["ecc"]["q975"] - recs["HTS-103"]["ecc"]["q025"] < before["HTS-103"]


def test_night_with_ledger_skips_measured_occultation(tmp_path, capsys):
    cat = _catalogue(tmp_path)
    led = _ledger(tmp_path, cat)
    out = tmp_path / "night.json"
    assert main(["night", str(cat), "--site", SITE, "--date", "2027-01-20", "--samples", "1500",
                 "--ledger", led, "--json", str(out)]) == 0
    d = json.loads(out.read_text())
    assert any(s["name"] == "HTS-103" and "already measured" in s["reason"] for s in d["skipped"])
    assert not any(b["name"] == "HTS-103" and b["kind"] == "occultation" for b in d["blocks"])


def test_bad_ledger_path_is_one_sentence(tmp_path, capsys):
    cat = _catalogue(tmp_path)
    junk = tmp_path / "junk.sqlite"
    junk.write_text("not a database")
    assert main(["night", str(cat), "--site", SITE, "--date", "2027-01-20", "--samples", "1500",
                 "--ledger", str(junk)]) == 2
    assert "junk.sqlite" in capsys.readouterr().err
