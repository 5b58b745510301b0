"""`rv --site --start --end` and `campaign` give the same visits and hours for the same target.
Consistency of the tool's own outputs with each other, not physics values: common practice, no source."""
from __future__ import annotations

import json

import pytest


def test_rv_and_campaign_hours_agree(tmp_path, capsys):
    from rhofollow.cli import main

    lines = [ln for ln in open("examples/hts_candidates.csv", encoding="utf-8") if not ln.startswith("#")]
    cat = tmp_path / "cat.csv"
    cat.write_text(lines[0] + lines[15] + lines[19], encoding="utf-8")
    rv_json, camp_json = tmp_path / "rv.json", tmp_path / "camp.json"
    common = ["--start", "2026-12-10", "--end", "2026-12-19", "--samples", "500"]
    assert main(["rv", str(cat), "--instrument", "site_configs/instruments/aq_vel.toml", "--site",
                 "site_configs/alto_quemado.toml", *common, "--json", str(rv_json)]) == 0
    out = capsys.readouterr().out
    assert "reachable epochs of Alto Quemado Observatory 2026-12-10 to 2026-12-19" in out
    assert main(["campaign", str(cat), "--site", "site_configs/alto_quemado.toml", *common,
                 "--json", str(camp_json)]) == 0
    rv = {t["name"]: t for t in json.loads(rv_json.read_text())["targets"]}
    camp = json.loads(camp_json.read_text())
    assert json.loads(rv_json.read_text())["phase_model"] == "reachable"
    n_compared = 0
    for t in camp["targets"]:
        r = rv[t["name"]]
        assert r["confirm_reachable"]["phase_model"] == "reachable"
        if t.get("rv_visits"):
            # one visit costs the same in both commands (exposure + instrument overhead, once)
            assert t["hours"]["AQ-VEL"] == pytest.approx(len(t["rv_visits"]) * r["visit_h"], abs=1e-3)
            assert all(v["exposure_s"] == r["exposure_s"] for v in t["rv_visits"])
            if r["n_epochs_confirm_ecc"] is not None and t["rv_request"]["visits"] == r["n_epochs_confirm_ecc"]:
                # a target requested at the visits reaching the power: the same visits and hours
                assert len(t["rv_visits"]) == r["n_epochs_confirm_ecc"]
                assert t["hours"]["AQ-VEL"] == pytest.approx(r["hours_confirm_ecc"], abs=1e-3)
                n_compared += 1
    assert n_compared >= 1


def test_rv_site_needs_dates(capsys):
    from rhofollow.cli import main

    rc = main(["rv", "examples/hts_candidates.csv", "--instrument", "site_configs/instruments/aq_vel.toml",
               "--site", "site_configs/alto_quemado.toml", "--samples", "500", "--start", "2026-12-10"])
    assert rc == 2
    assert "--end" in capsys.readouterr().err
