"""``--hours INSTRUMENT=H`` through the commands (plan, campaign, night), not only the knapsack: the
option reaches the budget, the request stays within it, and a bad value is one clear error.
The budget rule itself (an exact knapsack) is tested in test_budget.py; these are command paths
(common practice, no source)."""
from __future__ import annotations

import json
from pathlib import Path

import pytest

from rhofollow.cli import main

ROOT = Path(__file__).resolve().parents[1]
DEMO_CAT = ROOT / "examples" / "hts_candidates.csv"
SITE = ROOT / "site_configs" / "alto_quemado.toml"
RANGE = ["--start", "2026-12-10", "--end", "2026-12-19"]


def _catalogue(tmp_path, names=("HTS-104", "HTS-115", "HTS-119")) -> Path:
    lines = [ln for ln in DEMO_CAT.read_text(encoding="utf-8").splitlines() if not ln.startswith("#")]
    keep = [lines[0]] + [ln for ln in lines[1:] if ln.split(",")[0] in names]
    p = tmp_path / "cat.csv"
    p.write_text("\n".join(keep) + "\n", encoding="utf-8")
    return p


def test_plan_with_hours_stays_within_the_budget(tmp_path):
    out = tmp_path / "report"
    rc = main(["plan", str(_catalogue(tmp_path)), "--site", str(SITE), *RANGE, "--out", str(out),
               "--samples", "500", "--sims", "100", "--plot-targets", "1", "--hours", "AQ-VEL=3"])
    assert rc in (0, 1)
    doc = json.loads((out / "results.json").read_text())
    assert doc["rv_request"]["basis"] == "budget"
    hours = sum(t["rv"]["request"]["hours"] for t in doc["targets"] if t.get("rv", {}).get("request"))
    assert 0.0 <= hours <= 3.0 + 1e-9


def test_campaign_with_hours_stays_within_the_budget(tmp_path):
    out = tmp_path / "c.json"
    rc = main(["campaign", str(_catalogue(tmp_path)), "--site", str(SITE), *RANGE, "--samples", "300",
               "--json", str(out), "--hours", "AQ-VEL=3"])
    assert rc in (0, 1)
    doc = json.loads(out.read_text())
    assert doc["rv_request"]["basis"] == "budget"
    hours = sum(t["rv_request"]["hours"] for t in doc["targets"] if t.get("rv_request"))
    assert 0.0 <= hours <= 3.0 + 1e-9


@pytest.mark.parametrize("command", ["plan", "campaign", "night"])
def test_hours_for_an_unknown_instrument_is_one_clear_error(tmp_path, capsys, command):
    extra = {"plan": [*RANGE, "--out", str(tmp_path / "r")], "campaign": RANGE, "night": ["--date", "2026-12-10"]}
    rc = main([command, str(_catalogue(tmp_path, ("HTS-119",))), "--site", str(SITE), *extra[command],
               "--samples", "500", "--hours", "NO-SUCH=5"])
    assert rc == 2
    err = capsys.readouterr().err
    assert "NO-SUCH" in err and "Traceback" not in err
