"""``night`` counts the RV visits to confirm at the epochs the site reaches over the campaign's range,
as ``campaign`` does: the same request (visits, hours, power) and the same visit length for the same
target, range and seed; the night's RV blocks last one requested visit.
Consistency of the tool's own outputs with each other, not physics values: common practice, no source."""
from __future__ import annotations

import json
from pathlib import Path

import pytest

from rhofollow.cli import main

ROOT = Path(__file__).resolve().parents[1]
SITE = str(ROOT / "site_configs" / "alto_quemado.toml")


def _catalogue(tmp_path, names=("HTS-115", "HTS-119")) -> Path:
    lines = [ln for ln in (ROOT / "examples" / "hts_candidates.csv").read_text(encoding="utf-8").splitlines()
             if not ln.startswith("#")]
    p = tmp_path / "cat.csv"
    p.write_text("\n".join([lines[0]] + [ln for ln in lines[1:] if ln.split(",")[0] in names]) + "\n",
                 encoding="utf-8")
    return p


@pytest.fixture(scope="module")
def both(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("nightrange")
    cat = _catalogue(tmp)
    common = [str(cat), "--site", SITE, "--samples", "300", "--seed", "5"]
    n_out, c_out = tmp / "night.json", tmp / "camp.json"
    assert main(["night", *common, "--date", "2026-12-10", "--end", "2026-12-19", "--json", str(n_out)]) == 0
    assert main(["campaign", *common, "--start", "2026-12-10", "--end", "2026-12-19", "--json", str(c_out)]) == 0
    return json.loads(n_out.read_text()), json.loads(c_out.read_text())


def test_night_and_campaign_request_the_same_visits(both):
    night, camp = both
    assert night["rv_request"] == camp["rv_request"]
    cn = {t["name"]: t for t in camp["targets"]}
    nt = [t for t in night["targets"] if "rv_request" in t]
    assert {t["name"] for t in nt} == {"HTS-115", "HTS-119"}
    for t in nt:
        c = cn[t["name"]]["rv_request"]
        assert {k: t["rv_request"][k] for k in c} == c


def test_night_rv_blocks_last_one_requested_visit(both):
    night, camp = both
    visits = {t["name"]: t["rv_visits"] for t in camp["targets"]}
    blocks = [b for b in night["blocks"] if b["kind"] == "rv"]
    assert blocks, "an RV visit fits the first night for at least one of the invented targets"
    from rhofollow.planning.tasks import iso_to_jd

    for b in blocks:
        v = visits[b["name"]][0]
        n_len = (iso_to_jd(b["end_utc"]) - iso_to_jd(b["start_utc"])) * 24.0
        c_len = (iso_to_jd(v["end_utc"]) - iso_to_jd(v["start_utc"])) * 24.0
        assert n_len == pytest.approx(c_len, abs=2.0 / 3600.0)
        assert c_len == pytest.approx((v["exposure_s"] + v["overhead_s"]) / 3600.0, abs=2.0 / 3600.0)


def test_night_range_end_is_checked(tmp_path, capsys):
    cat = _catalogue(tmp_path)
    assert main(["night", str(cat), "--site", SITE, "--date", "2026-12-10", "--end", "2026-12-01"]) == 2
    assert "before the night" in capsys.readouterr().err
    assert main(["night", str(cat), "--site", SITE, "--date", "2026-12-10", "--end", "12/20/2026"]) == 2
    assert "--end must be YYYY-MM-DD" in capsys.readouterr().err
