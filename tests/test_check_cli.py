"""``rhofollow check`` through rhofollow.cli.main."""
from __future__ import annotations

import json
import sys
import types
from pathlib import Path

import pytest

from rhofollow.cli import main

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
HEADER = "name,period_d,t0_bjd,ra_deg,dec_deg,a_rs,b,rp_rs,rho_star_cgs"
ROW_A = "HTS-101,3.0,2460412.3871,148.2391,21.5872,10.0,0.3,0.1,1.41"
ROW_B = "HTS-102,5.0,2460413.1,203.771,-8.44,12.0,0.2,0.05,1.2"


def flat(text: str) -> str:
    """Undo the terminal's line wrapping (rich wraps long cells)."""
    return " ".join(text.split())


@pytest.fixture
def good_csv(tmp_path):
    p = tmp_path / "good.csv"
    p.write_text(f"{HEADER}\n{ROW_A}\n{ROW_B}\n")
    return p


@pytest.fixture
def bad_csv(tmp_path):
    p = tmp_path / "bad.csv"
    p.write_text(f"{HEADER}\n{ROW_A}\n{ROW_B.replace('5.0', '-5.0', 1)}\n")
    return p


def test_all_good_exits_0(good_csv, capsys):
    assert main(["check", str(good_csv)]) == 0
    out = flat(capsys.readouterr().out)
    assert "2 rows read, 0 failed, 0 warnings" in out


def test_failed_row_exits_1_and_names_row_and_column(bad_csv, tmp_path, capsys):
    js = tmp_path / "out" / "report.json"
    assert main(["check", str(bad_csv), "--json", str(js)]) == 1
    cap = capsys.readouterr()
    assert "2 rows read, 1 failed, 0 warnings" in flat(cap.out)
    assert "period_d" in cap.out and "HTS-102" in cap.out
    assert "Traceback" not in cap.out + cap.err
    rep = json.loads(js.read_text())
    assert rep["command"] == "check" and rep["catalogue"] == str(bad_csv)
    assert rep["ok"] is False and rep["n_rows"] == 2 and rep["n_row_errors"] == 1
    (issue,) = rep["issues"]
    assert issue == {"row": 2, "name": "HTS-102", "column": "period_d", "severity": "error",
                     "reason": issue["reason"]} and "positive" in issue["reason"]
    assert rep["row_errors"] == [{"file": str(bad_csv), "row": 2, "column": "period_d", "name": "HTS-102",
                                  "reason": issue["reason"]}]
    # targets: the valid rows only; rows: every data row
    assert [t["name"] for t in rep["targets"]] == ["HTS-101"] and rep["exit_status"] == 1
    a, b = rep["rows"]
    assert a == {"row": 1, "name": "HTS-101", "ok": True, "errors": [], "warnings": []}
    assert b["name"] == "HTS-102" and b["ok"] is False and "period_d" in b["errors"][0]


def test_json_matches_library_result(bad_csv, tmp_path, capsys):
    from rhofollow.cli.check import report_dict
    from rhofollow.io import read_catalogue

    js = tmp_path / "r.json"
    main(["check", str(bad_csv), "--json", str(js)])
    capsys.readouterr()
    doc, rep = json.loads(js.read_text()), report_dict(read_catalogue(bad_csv))
    assert doc["rows"] == rep["targets"] and doc["issues"] == rep["issues"] and doc["ok"] == rep["ok"]


@pytest.mark.parametrize("name, text", [("missing.csv", None), ("cat.xlsx", "x"),
                                        ("nohead.csv", "period_d\n3\n")])
def test_file_level_error_exits_2_with_one_sentence(tmp_path, capsys, name, text):
    p = tmp_path / name
    if text is not None:
        p.write_text(text)
    js = tmp_path / "r.json"
    assert main(["check", str(p), "--json", str(js)]) == 2
    cap = capsys.readouterr()
    assert str(p) in cap.err and "Traceback" not in cap.err
    assert len(cap.err.strip().splitlines()) <= 3  # one sentence (wrapped by the terminal)
    doc = json.loads(js.read_text())
    assert doc["ok"] is False and doc["exit_status"] == 2 and str(p) in doc["file_error"]


def test_warnings_are_counted(tmp_path, capsys):
    p = tmp_path / "w.csv"
    p.write_text(f"{HEADER},colour\n{ROW_A},blue\n")
    assert main(["check", str(p)]) == 0
    assert "1 rows read, 0 failed, 1 warning" in flat(capsys.readouterr().out)


def test_require_coords_option(tmp_path, capsys):
    p = tmp_path / "nc.csv"
    p.write_text("name,period_d,t0_bjd,a_rs,rho_star_cgs\nA,3,2460000.5,10,1.4\n")
    assert main(["check", str(p)]) == 0
    assert main(["check", str(p), "--require-coords"]) == 1
    assert "ra_deg" in capsys.readouterr().out


def test_markup_in_reasons_is_printed_literally(tmp_path, capsys):
    p = tmp_path / "m.csv"
    p.write_text(f"{HEADER}\n{ROW_A.replace('3.0', '[bold]x', 1)}\n")
    assert main(["check", str(p)]) == 1
    assert "[bold]x" in capsys.readouterr().out


def test_demo_malformed_file(capsys, tmp_path):
    js = tmp_path / "r.json"
    assert main(["check", str(EXAMPLES / "demo_malformed.csv"), "--json", str(js)]) == 1
    rep = json.loads(js.read_text())
    good = [t["name"] for t in rep["rows"] if t["ok"]]
    assert len(good) == 2 and [t["name"] for t in rep["targets"]] == good
    assert len({e["row"] for e in rep["row_errors"] if e["row"]}) == rep["n_rows"] - 2
    # every failed row carries at least one error naming a column
    assert all(t["errors"] for t in rep["rows"] if not t["ok"])


def test_nothing_to_check_is_a_user_error(capsys):
    assert main(["check"]) == 2
    assert "give a catalogue" in capsys.readouterr().err


def _fake_site(monkeypatch, problems=None, exc=None):
    mod = types.ModuleType("rhofollow.planning.site")

    def check_site(path):
        if exc is not None:
            raise exc
        return list(problems)

    mod.check_site = check_site
    mod.load_site = lambda path: None
    monkeypatch.setitem(sys.modules, "rhofollow.planning.site", mod)


@pytest.fixture
def site_file(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "s.toml").write_text("# a site\n")
    return "s.toml"


def test_site_ok_and_catalogue(monkeypatch, good_csv, tmp_path, site_file, capsys):
    _fake_site(monkeypatch, problems=[])
    js = tmp_path / "r.json"
    assert main(["check", str(good_csv), "--site", site_file, "--json", str(js)]) == 0
    rep = json.loads(js.read_text())
    assert rep["site"] == {"path": "s.toml", "ok": True, "problems": []}
    assert rep["ok"] is True and rep["catalogue"] == str(good_csv)


def test_site_problems_exit_1(monkeypatch, site_file, capsys):
    _fake_site(monkeypatch, problems=["latitude 95 is outside [-90, 90]"])
    assert main(["check", "--site", "s.toml"]) == 1
    assert "latitude 95" in capsys.readouterr().out


def test_site_unreadable_exit_2(monkeypatch, site_file, capsys):
    _fake_site(monkeypatch, exc=PermissionError("permission denied: s.toml"))
    assert main(["check", "--site", "s.toml"]) == 2
    assert "s.toml" in capsys.readouterr().err


def test_site_missing_file_exit_2(monkeypatch, tmp_path, capsys):
    _fake_site(monkeypatch, problems=[])
    assert main(["check", "--site", str(tmp_path / "none.toml")]) == 2
    assert "not found" in flat(capsys.readouterr().err)


def test_real_demo_site_if_present(capsys):
    site = Path(__file__).resolve().parents[1] / "site_configs" / "alto_quemado.toml"
    try:
        from rhofollow.planning.site import check_site  # noqa: F401
    except ImportError:
        pytest.skip("site support not written yet")
    if not site.exists():
        pytest.skip("demo site not written yet")
    assert main(["check", "--site", str(site)]) == 0


def test_site_support_missing_exit_2(monkeypatch, site_file, capsys):
    monkeypatch.setitem(sys.modules, "rhofollow.planning.site", None)
    assert main(["check", "--site", "s.toml"]) == 2
    assert "not available" in capsys.readouterr().err


def test_bundled_demo_catalogue_is_valid(capsys):
    demo = EXAMPLES / "hts_candidates.csv"
    if not demo.exists():
        pytest.skip("demo catalogue not written yet")
    assert main(["check", str(demo), "--require-coords"]) == 0
    assert " 0 failed" in flat(capsys.readouterr().out)


def test_brackets_in_a_path_are_not_markup(tmp_path, capsys):
    p = tmp_path / "cat[bold].csv"
    assert main(["check", str(p)]) == 2
    assert "cat[bold].csv" in flat(capsys.readouterr().err)
