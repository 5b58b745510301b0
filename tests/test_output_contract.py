"""The output contract shared by every command (rhofollow.stages.records): envelope keys, counts that equal
the lists they count, one meaning of failure and one exit-status policy (0 all good, 1 some rows or
targets failed, 2 unusable input)."""
from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rhofollow.cli import main
from rhofollow.stages.records import CAUTION, ENVELOPE_KEYS, envelope, exit_status, merge_stage_records

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "examples" / "hts_candidates.csv"
SITE = str(ROOT / "site_configs" / "alto_quemado.toml")
VEL = str(ROOT / "site_configs" / "instruments" / "aq_vel.toml")
TARGET_KEYS = ("name", "ok", "errors", "warnings")
ISSUE_KEYS = {"file", "row", "column", "reason", "name"}

# invented rows beside the demo's HTS-115 (an observable target in December at the demo site):
# BAD-ROW fails validation (negative period); DENSE is a valid row whose assessment is made to fail
# (the fixture below injects a row problem: inconsistent data are now a finding, not a failure, and an
# extreme density is a row error, so no natural row fails after validation); NORTH never rises above
# the demo site's 30 deg limit (dec +75 at latitude -30.4: highest altitude 90 - 105.4 < 0)
EXTRA = [
    {"name": "BAD-ROW", "ra_deg": "150.0", "dec_deg": "-20.0", "period_d": "-3.0", "t0_bjd": "2460412.3871",
     "t14_h": "3.0", "t23_h": "2.2", "depth_ppm": "20000", "rho_star_cgs": "1.4"},
    {"name": "DENSE", "ra_deg": "150.0", "dec_deg": "-20.0", "period_d": "3.0", "t0_bjd": "2460412.3871",
     "t0_bjd_err": "0.001", "t14_h": "3.0", "t14_h_err": "0.01", "t23_h": "2.2", "t23_h_err": "0.01",
     "depth_ppm": "20000", "depth_ppm_err": "100", "rho_star_cgs": "1.4", "rho_star_cgs_err": "0.1"},
    {"name": "NORTH", "ra_deg": "60.0", "dec_deg": "75.0", "vmag": "12.0", "period_d": "4.0", "t0_bjd": "2460412.1",
     "t14_h": "2.5", "t23_h": "2.0", "depth_ppm": "10000", "rho_star_cgs": "1.41", "rho_star_cgs_err": "0.05"},
]


def _catalogue(path: Path, extra=()) -> Path:
    with open(DEMO, encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    head = list(rows[0]) + [k for e in extra for k in e if k not in rows[0]]
    head = list(dict.fromkeys(head))
    keep = [r for r in rows if r["name"] == "HTS-115"] + [dict.fromkeys(head, "") | e for e in extra]
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=head)
        w.writeheader()
        w.writerows(keep)
    return path


@pytest.fixture(autouse=True)
def dense_fails(monkeypatch):
    """The assessment of DENSE fails (an injected row problem); every other target is untouched."""
    import rhofollow.stages.assess as assess_mod

    real = assess_mod._assess

    def flaky(t, *a, **k):
        if t.name == "DENSE":
            raise assess_mod._RowProblem("injected failure for the contract test")
        return real(t, *a, **k)

    monkeypatch.setattr(assess_mod, "_assess", flaky)


@pytest.fixture(scope="module")
def cats(tmp_path_factory):
    d = tmp_path_factory.mktemp("contract")
    return {"good": _catalogue(d / "good.csv"), "mixed": _catalogue(d / "mixed.csv", EXTRA),
            "missing": d / "missing.csv", "dir": d}


FAST = ["--samples", "500", "--seed", "3"]
RANGE = ["--start", "2026-12-10", "--end", "2026-12-11"]


def _argv(command: str, cat: Path, out: Path) -> tuple[list[str], Path]:
    """(argv, path of the JSON it writes) for one command."""
    js = out / f"{command}.json"
    if command == "assess":
        return ["assess", str(cat), "--json", str(js), *FAST], js
    if command == "eclipses":
        return ["eclipses", str(cat), *RANGE, "--json", str(js), *FAST], js
    if command == "rv":
        return ["rv", str(cat), "--instrument", VEL, "--sims", "100", "--json", str(js), *FAST], js
    if command == "night":
        return ["night", str(cat), "--site", SITE, "--date", "2026-12-10", "--json", str(js), *FAST], js
    if command == "campaign":
        return ["campaign", str(cat), "--site", SITE, *RANGE, "--json", str(js), *FAST], js
    if command == "plan":
        return ["plan", str(cat), "--site", SITE, *RANGE, "--out", str(out / "report"), "--sims", "100",
                "--plot-targets", "0", *FAST], out / "report" / "results.json"
    if command == "check":
        return ["check", str(cat), "--site", SITE, "--require-coords", "--json", str(js)], js
    raise AssertionError(command)


#: the command's own keys, kept inside the envelope (other code and tests read them)
OWN_KEYS = {
    "assess": {"prior", "samples", "caveat"},
    "eclipses": {"start_utc", "end_utc", "coverage", "band", "notices"},
    "rv": {"instrument", "instrument_file", "fap", "power", "samples"},
    "night": {"site", "night_start_utc", "night_end_utc", "blocks", "total_value", "method", "cautions",
              "date", "timezone", "instruments", "notices", "samples"},
    "campaign": {"site", "start", "end", "hours_total", "instruments", "cautions", "notices", "timezone",
                 "overhead_h", "samples"},
    "plan": {"site", "start", "end", "samples", "prior", "priority_rule", "hours_total", "assumptions",
             "cautions", "notices", "instruments"},
    "demo": {"site", "start", "end", "samples", "prior", "priority_rule", "hours_total", "assumptions",
             "cautions", "notices", "instruments"},
    "check": {"ok", "n_warnings", "issues", "rows", "site"},
    "log update": {"ledger", "samples", "jitter_ms", "stored"},
}


def assert_contract(doc: dict, command: str, own: bool = True) -> None:
    """Envelope keys first and in order, the command's keys after, counts equal to their lists."""
    assert tuple(doc)[:len(ENVELOPE_KEYS)] == ENVELOPE_KEYS
    if own:
        assert OWN_KEYS[command] <= set(doc), OWN_KEYS[command] - set(doc)
    assert doc["command"] == command and doc["caution"] == CAUTION
    assert doc["n_row_errors"] == len(doc["row_errors"])
    assert doc["n_row_warnings"] == len(doc["row_warnings"])
    assert doc["n_rows_failed"] == len({e["row"] for e in doc["row_errors"] if e["row"] > 0})
    assert doc["n_targets"] == len(doc["targets"])
    assert doc["n_ok"] == sum(t["ok"] for t in doc["targets"])
    assert doc["n_targets_failed"] == sum(not t["ok"] for t in doc["targets"]) == doc["n_targets"] - doc["n_ok"]
    assert doc["n_skipped"] == len(doc["skipped"])
    for e in doc["row_errors"] + doc["row_warnings"]:
        assert set(e) == ISSUE_KEYS
    for t in doc["targets"]:
        assert tuple(t)[:4] == TARGET_KEYS
        assert t["ok"] == (t["errors"] == [])           # one meaning of failure
    failed = {t["name"] for t in doc["targets"] if not t["ok"]}
    for s in doc["skipped"]:
        assert set(s) == {"name", "reason"} and s["name"] not in failed


COMMANDS = ["assess", "eclipses", "rv", "night", "campaign", "plan", "check"]


@pytest.mark.parametrize("command", COMMANDS)
def test_all_good_exits_0(command, cats, tmp_path, capsys):
    argv, js = _argv(command, cats["good"], tmp_path)
    assert main(argv) == 0
    doc = json.loads(js.read_text())
    assert_contract(doc, command)
    assert doc["exit_status"] == 0 and doc["catalogue"] == str(cats["good"])
    assert doc["n_rows"] == 1 and doc["n_row_errors"] == 0 and doc["n_targets_failed"] == 0
    assert [t["name"] for t in doc["targets"]] == ["HTS-115"]


@pytest.mark.parametrize("command", COMMANDS)
def test_failed_row_and_failed_target_exit_1(command, cats, tmp_path, capsys):
    argv, js = _argv(command, cats["mixed"], tmp_path)
    assert main(argv) == 1
    doc = json.loads(js.read_text())
    assert_contract(doc, command)
    assert doc["exit_status"] == 1 and doc["n_rows"] == 4
    # one invalid row (the old assess JSON counted it together with a later failure as n_failed: 2)
    assert doc["n_rows_failed"] == 1 and {e["name"] for e in doc["row_errors"]} == {"BAD-ROW"}
    assert any(e["column"] == "period_d" and e["row"] == 2 for e in doc["row_errors"])
    names = [t["name"] for t in doc["targets"]]
    assert names == ["HTS-115", "DENSE", "NORTH"] or sorted(names) == ["DENSE", "HTS-115", "NORTH"]
    failed = {t["name"] for t in doc["targets"] if not t["ok"]}
    if command == "check":       # validation only: DENSE is a valid row
        assert failed == set()
    else:
        assert failed == {"DENSE"} and doc["n_targets_failed"] == 1
    if command in ("night", "campaign", "plan", "check"):   # the site's planners and check --site
        north = next(t for t in doc["targets"] if t["name"] == "NORTH")
        assert any("never rises" in w for w in north["warnings"])
        if command != "plan":
            assert north["never_rises"] is True
    if command == "plan":        # no per-target figures for a target that never rises
        plots = {p.name for p in (tmp_path / "report" / "plots").glob("*.png")}
        assert any(p.startswith("HTS-115") and p.endswith("_density.png") for p in plots)
        assert not any(p.startswith("NORTH") for p in plots)


@pytest.mark.parametrize("command", COMMANDS)
def test_missing_catalogue_exits_2(command, cats, tmp_path, capsys):
    argv, _js = _argv(command, cats["missing"], tmp_path)
    assert main(argv) == 2
    assert "missing.csv" in " ".join(capsys.readouterr().err.split())


@pytest.mark.parametrize("command", ["night", "campaign", "plan"])
def test_bad_site_file_exits_2(command, cats, tmp_path, capsys):
    bad = tmp_path / "bad_site.toml"
    bad.write_text("[site]\nname = 'x'\nlatitude_deg = 95.0\n")
    argv, _js = _argv(command, cats["good"], tmp_path)
    argv[argv.index("--site") + 1] = str(bad)
    assert main(argv) == 2
    assert "bad_site.toml" in " ".join(capsys.readouterr().err.split())


@pytest.mark.parametrize("command", ["assess", "eclipses", "rv", "night", "campaign", "plan"])
def test_bad_option_exits_2(command, cats, tmp_path, capsys):
    argv, _js = _argv(command, cats["good"], tmp_path)
    argv[argv.index("--samples") + 1] = "10"
    assert main(argv) == 2


def test_no_valid_row_still_writes_the_envelope(cats, tmp_path, capsys):
    cat = tmp_path / "allbad.csv"
    _catalogue(cat, EXTRA[:1])
    lines = cat.read_text().splitlines()
    cat.write_text("\n".join([lines[0], lines[2]]) + "\n")     # only the invalid row
    for command in ("night", "campaign"):
        argv, js = _argv(command, cat, tmp_path)
        assert main(argv) == 1
        doc = json.loads(js.read_text())
        assert_contract(doc, command, own=False)
        assert doc["targets"] == [] and doc["n_rows_failed"] == doc["n_rows"] == 1
        assert doc.get("blocks", []) == [] and doc.get("hours_total", {}) == {}


def test_log_update_envelope_and_exit_status(cats, tmp_path, capsys):
    good_db, mixed_db = str(tmp_path / "good.sqlite"), str(tmp_path / "mixed.sqlite")
    assert main(["log", "targets", str(cats["good"]), "--ledger", good_db]) == 0
    assert main(["log", "targets", str(cats["mixed"]), "--ledger", mixed_db]) == 0
    for db, code in ((good_db, 0), (mixed_db, 1)):
        js = tmp_path / f"u{code}.json"
        assert main(["log", "update", "--ledger", db, "--samples", "500", "--no-store", "--json", str(js)]) == code
        doc = json.loads(js.read_text())
        assert_contract(doc, "log update")
        assert doc["exit_status"] == code and doc["catalogue"] is None and doc["n_rows"] is None
        assert {t["name"] for t in doc["targets"] if not t["ok"]} == ({"DENSE"} if code else set())
    assert main(["log", "update", "--ledger", good_db, "--samples", "10"]) == 2


def test_demo_runs_from_package_data_with_the_envelope(tmp_path, monkeypatch, capsys):
    import rhofollow.cli.options as options_mod

    monkeypatch.setattr(options_mod, "DEMO_DAYS", 9)   # ten nights: enough visits for an RV request
    monkeypatch.chdir(tmp_path)                  # outside the checkout
    out = tmp_path / "r"
    assert main(["demo", "--out", str(out), "--samples", "500", "--sims", "100", "--plot-targets", "1"]) == 0
    doc = json.loads((out / "results.json").read_text())
    assert_contract(doc, "demo")
    assert Path(doc["catalogue"]).parts[-4:] == ("data", "demo", "examples", "hts_candidates.csv")
    assert doc["n_targets"] == doc["n_rows"] == len(DEMO.read_text().splitlines()) - 1
    md = (out / "summary.md").read_text()
    assert "| local (" in md and "America/Santiago" in md   # first-night table: local time beside UTC


# ---------------------------------------------------------------- the builder itself

_names = st.text("ABCXYZ-0123", min_size=1, max_size=6)
_target = st.fixed_dictionaries({"name": _names, "ok": st.booleans(),
                                 "errors": st.lists(st.text(max_size=5), max_size=2),
                                 "warnings": st.lists(st.text(max_size=5), max_size=2)})


@settings(max_examples=80, deadline=None)
@given(targets=st.lists(_target, max_size=8),
       skipped=st.lists(st.fixed_dictionaries({"name": _names, "reason": st.text(max_size=8)}), max_size=6),
       errors=st.lists(st.fixed_dictionaries({"file": st.just("c.csv"), "row": st.integers(0, 5),
                                              "column": st.text(max_size=4), "reason": st.text(max_size=4),
                                              "name": st.text(max_size=4)}), max_size=6))
def test_envelope_counts_equal_their_lists(targets, skipped, errors):
    doc = envelope("x", targets=targets, skipped=skipped, row_errors=errors, n_rows=9, payload={"own": 1})
    assert doc["n_targets"] == len(doc["targets"]) == len(targets)
    assert doc["n_ok"] + doc["n_targets_failed"] == doc["n_targets"]
    assert doc["n_ok"] == sum(t["ok"] for t in doc["targets"])
    assert doc["n_skipped"] == len(doc["skipped"]) and doc["n_row_errors"] == len(errors)
    for t_in, t in zip(targets, doc["targets"]):
        assert t["ok"] == (t["errors"] == []) and (t["ok"] <= t_in["ok"])  # never more ok than given
    assert doc["exit_status"] == exit_status(doc) == int(bool(errors) or doc["n_targets_failed"] > 0)
    assert doc["own"] == 1


def test_envelope_refuses_to_shadow_its_keys():
    with pytest.raises(ValueError, match="envelope keys"):
        envelope("x", payload={"targets": []})


def test_merge_stage_records_one_meaning_of_failure():
    recs = merge_stage_records(
        ["A", "B", "C"],
        [{"name": "A", "ok": True, "errors": [], "warnings": ["w1"]}, {"name": "B", "ok": True, "errors": [],
                                                                       "warnings": []},
         {"name": "C", "ok": False, "errors": ["bad row"], "warnings": []}],
        [{"name": "A", "ok": True, "errors": [], "warnings": ["w1", "w2"]}],
        [{"name": "B", "ok": False, "errors": ["RV plan failed"], "warnings": []}],
        extra_warnings={"A": ["never rises"]})
    assert [(r["name"], r["ok"], r["errors"], r["warnings"]) for r in recs] == [
        ("A", True, [], ["w1", "w2", "never rises"]), ("B", False, ["RV plan failed"], []),
        ("C", False, ["bad row"], [])]


def test_one_caution_text_everywhere():
    from rhofollow.stages import occultations as eclipses, rv as rvplan
    from rhofollow.planning import night
    from rhofollow.report import summary

    assert eclipses.CAUTION is rvplan.CAUTION is night.CAUTION is summary.CAUTIONS[0] is CAUTION
    assert "Sun avoidance" in CAUTION and "override" in CAUTION


def test_plan_tables_show_prior_beside_posterior():
    """The plan's tables show P(e > 0.1) under the prior alone beside the value after the data, and the
    CSV carries both (issue: say how much the data moved the prior)."""
    from rhofollow.report.summary import prior_post_text

    assert prior_post_text({"p_ecc_gt_0p1": 0.981, "p_ecc_gt_0p1_prior": 0.704}) == "0.70→0.98"
    assert prior_post_text({"p_ecc_gt_0p1": 0.5}) == "0.50"
    assert prior_post_text({}) == "–"
