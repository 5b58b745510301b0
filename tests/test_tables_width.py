"""Every terminal table fits 80 and 140 columns without cutting a name or a number, and messages are
never wrapped (one message, one line), whatever the width or the length of a path.

Tables are rendered with a fixed-width rich Console into a string; the checks are structural (which
columns are shown, every line within the width, no ellipsis, every name and key number intact), not
whole-screen snapshots. Layout rules are this project's own (common practice, no source).
"""
from __future__ import annotations

import datetime as dt
import io
import json
from types import SimpleNamespace

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from rich.console import Console

from rhofollow.cli import common
from rhofollow.cli.assess import summary_table
from rhofollow.cli.campaign import campaign_table
from rhofollow.cli.check import problems_table
from rhofollow.cli.eclipses import events_table
from rhofollow.cli.log import ledger_table
from rhofollow.cli.night import night_table
from rhofollow.cli.plan import summary_table as plan_table
from rhofollow.cli.render import Col, fit_table, message
from rhofollow.cli.rv import rv_table

WIDTHS = (80, 140)
NAMES = ["HTS-2031-LONG-CANDIDATE-07", "HTS-9", "HTS-104 b", "Ωmega-12"]


def render(fitted, width: int) -> str:
    con = Console(width=width, file=io.StringIO(), record=True, color_system=None)
    con.print(fitted.table)
    return con.export_text()


def headers(fitted) -> list[str]:
    return [" ".join(str(c.header).split()) for c in fitted.table.columns]


def check_layout(text: str, width: int, names, numbers=()):
    assert "…" not in text and "..." not in text
    for line in text.splitlines():
        assert len(line.rstrip()) <= width, line
    body = text
    for n in names:
        assert n in body, f"{n!r} cut or folded"
    for x in numbers:
        assert x in body, f"number {x!r} missing"


# ------------------------------------------------------------------------------------- fake inputs

def q(m, lo, hi, lo2=None, hi2=None):
    return {"q025": lo2 if lo2 is not None else lo, "q16": lo, "q50": m, "q84": hi,
            "q975": hi2 if hi2 is not None else hi}


def assess_records():
    recs = []
    for i, n in enumerate(NAMES):
        recs.append({"name": n, "ok": True, "rho_circ_cgs": q(12.34 + i, 11, 13), "rho_star_cgs": q(1.4, 1.3, 1.5),
                     "density_ratio": q(8.81, 8, 9), "density_ratio_sigma": 35.1 + i, "ecc_min": 0.62,
                     "ecc": q(0.74, 0.7, 0.8, 0.66, 0.88), "p_ecc_gt_0p1": 0.987,
                     "p_ecc_gt_0p1_prior": 0.734, "ecc_bounds": {"lower": "data", "upper": "prior"},
                     "finding": ["fits", "no explanation fits", "star density in question",
                                 "measured orbit disagrees"][i],
                     "favoured": "other_host", "ln_bayes_factor": 410.0})
    recs.append({"name": "HTS-BAD-ROW-TARGET", "ok": False})
    return recs


def eclipse_result(filter_band=False):
    targets = []
    for n in NAMES:
        targets.append({"name": n, "ok": True, "occ_phase": q(0.312, 0.062, 0.84), "p_occultation": 0.51,
                        "occ_duration_h": q(6.46, 3.39, 10.53), "depth_ppm": q(1759, 1683, 1863),
                        "events": [{"window_utc": [["2027-03-01T03:56:00", "2027-03-30T13:58:00"]],
                                    "window_bjd_tdb": [[2461465.6, 2461495.1]]}] * 3})
    band = {"filter": True, "min_um": 1.9, "max_um": 2.4} if filter_band else {"center_um": 4.5, "width_um": 1.0}
    return {"band": band, "targets": targets}


def rv_records():
    return [{"name": n, "ok": True, "k_ms": q(209.0, 41.0, 1050.0), "mp_mearth": q(431.0, 1, 2),
             "sigma_rv_ms": 7.03, "n_epochs_detect_k": 3, "n_epochs_confirm_ecc": 185, "hours_confirm_ecc": 160.3,
             "best_phases": [0.12, 0.47]} for n in NAMES]


def night_inputs():
    class Eng:
        def local_time(self, jd):
            return (dt.datetime(2000, 1, 1, 12, tzinfo=dt.timezone(dt.timedelta(hours=-3), "-03"))
                    + dt.timedelta(days=jd - 2451545.0))

    night = SimpleNamespace(start_jd=2461475.4979, end_jd=2461475.9076)
    site = SimpleNamespace(name="Alto Quemado Observatory", constraints=SimpleNamespace(twilight="nautical"))
    blocks = []
    for i, n in enumerate(NAMES):
        jd = night.start_jd + 0.05 * i
        blocks.append({"kind": "occultation" if i % 2 else "rv", "epoch": 1234, "partial": i == 3, "p_catch": 0.5,
                       "phase": 0.12, "name": n, "start_jd": jd, "end_jd": jd + 0.03,
                       "start_utc": "2027-03-11T00:57:00", "end_utc": "2027-03-11T01:49:00",
                       "value": 0.179, "airmass_max": 1.37})
    return {"blocks": blocks}, Eng(), night, site, dt.date(2027, 3, 10), {"occultation": "AQ-CAM", "rv": "AQ-VEL"}


def campaign_inputs():
    targets = [{"name": n, "occultation_windows": [{"clash": 0}] * 3, "rv_visits": [{"clash": 1}] * 7,
                "rv_visits_needed": 185 if i else None, "hours": {"AQ-CAM": 12.5, "AQ-VEL": 160.25}}
               for i, n in enumerate(NAMES)]
    doc = {"targets": targets, "hours_total": {"AQ-CAM": 50.0, "AQ-VEL": 641.0}}
    plan = SimpleNamespace(instruments={"occultation": "AQ-CAM", "rv": "AQ-VEL"})
    return doc, plan


def plan_doc():
    targets = []
    for i, n in enumerate(NAMES):
        targets.append({"name": n, "ok": True, "rank": i + 1, "priority": 1.0, "p_ecc_gt_0p1": 0.987,
                        "density_ratio_sigma": 40.0 - i, "ecc": q(0.74, 0.7, 0.8),
                        "density_ratio": q(8.8, 8, 9), "favoured": "eccentric",
                        "occultation": {"p_occultation": 0.5}, "rv": {"k_ms": q(20, 10, 30), "n_epochs_confirm_ecc": 7},
                        "campaign": {"occultation_windows": [1, 2], "rv_visits": [1] * 5, "hours": {}}})
    return {"site": "Alto Quemado Observatory", "start": "2027-03-01", "end": "2027-04-30",
            "hours_total": {"AQ-CAM": 12.0, "AQ-VEL": 30.0}, "targets": targets}


def check_result():
    issues = [SimpleNamespace(row=i + 2, name=n, column="rho_star_cgs | mstar_msun | logg_cgs | teff_k",
                              reason="no independent stellar-density route: give rho_star_cgs; or mstar_msun "
                              "and rstar_rsun; or logg_cgs and rstar_rsun", severity="error")
              for i, n in enumerate(NAMES)]
    return SimpleNamespace(source="/tmp/" + "very-long-directory-name/" * 6 + "cat.csv", issues=issues)


def ledger_result():
    return {"ledger": "/tmp/ledger.sqlite", "targets": [
        {"name": n, "has_catalogue_row": True, "n_rv": 14, "n_occ_detections": 2, "n_occ_non_detections": 1,
         "n_done": 9, "n_posteriors": 3, "latest_posterior_utc": "2027-03-01T12:34:56"} for n in NAMES]}


TABLES = {
    "assess": (lambda w: summary_table(assess_records(), w), ["35.1σ", "0.73→0.99", "†"]),
    "eclipses": (lambda w: events_table(eclipse_result(), w), ["0.312", "0.51", "1759"]),
    "rv": (lambda w: rv_table(rv_records(), "AQ-VEL", 0.01, 0.8, w), ["209", "185", "160.3"]),
    "night": (lambda w: night_table(*night_inputs(), width=w), ["0.179", "E1234"]),
    "campaign": (lambda w: campaign_table(*campaign_inputs(), "Alto Quemado Observatory", "2027-03-01",
                                          "2027-04-30", 61, w), ["160.25", "641.00", "185"]),
    "plan": (lambda w: plan_table(plan_doc(), w), ["1.000", "40.0σ"]),
    "check": (lambda w: problems_table(check_result(), w), ["stellar-density"]),
    "log show": (lambda w: ledger_table(ledger_result(), w), ["14", "2027-03-01"]),
}


@pytest.mark.parametrize("width", WIDTHS)
@pytest.mark.parametrize("which", list(TABLES))
def test_table_fits_without_cutting(which, width):
    build, numbers = TABLES[which]
    fitted = build(width)
    text = render(fitted, width)
    check_layout(text, width, NAMES, numbers)
    note = fitted.note()
    if fitted.left_out or fitted.compacted:
        assert note and "--json" in note and "\n" not in note
        for label in fitted.left_out:
            assert label in note
    else:
        assert note is None


@pytest.mark.parametrize("which", list(TABLES))
def test_wider_terminal_shows_at_least_as_much(which):
    build, _ = TABLES[which]
    narrow, wide = build(80), build(140)
    assert len(wide.left_out) <= len(narrow.left_out)
    assert set(wide.left_out) <= set(narrow.left_out)


def test_expected_columns_at_80_and_140():
    """Structure snapshot: which columns each table shows at 80 and at 140 columns."""
    a80, a140 = TABLES["assess"][0](80), TABLES["assess"][0](140)
    assert headers(a140) == ["target", "ρ_circ", "ρ★", "ratio", "mismatch", "e_min", "e [95%]",
                             "P(e>0.1) prior→post", "favoured", "2lnB"]
    assert {"target", "mismatch", "P(e>0.1) prior→post", "favoured"} <= set(headers(a80))
    assert "820.0" in render(a140, 140) and "8.81" in render(a140, 140)
    p80 = plan_table(plan_doc(), 80)
    assert {"rank", "target", "priority", "occ. windows", "RV visits placed"} <= set(headers(p80))
    p140 = plan_table(plan_doc(), 140)
    assert "tie-break: mismatch σ" in headers(p140) and not p140.left_out


def test_depth_column_names_unit_and_band():
    for w in WIDTHS:
        assert any("depth ppm @ 4.5 µm" in h for h in headers(events_table(eclipse_result(), w)))
        assert any("depth ppm @ filter 1.9–2.4 µm" in h for h in headers(events_table(eclipse_result(True), w)))


def test_plan_table_has_no_cell_that_needs_a_footnote():
    text = render(plan_table(plan_doc(), 80), 80)
    assert "/" not in text.split("\n", 3)[-1]  # no "2/5" style cells under the header
    assert "occ." in text and "RV visits" in text


def test_tie_breaker_shown_is_the_one_the_ranking_uses():
    """Equal priorities: rank_targets orders by the density mismatch the plan table names as tie-break."""
    from rhofollow.report.tables import rank_targets

    sig = {"A": 3.0, "B": 9.0, "C": 5.0}
    assessments = [SimpleNamespace(name=n, ok=True, record={"p_ecc_gt_0p1": 1.0, "density_ratio_sigma": s,
                                                             "p_explanation": {"eccentric": 1.0}})
                   for n, s in sig.items()]
    result = SimpleNamespace(assessments=assessments,
                             occultations={"targets": [{"name": n, "p_occultation": 1.0} for n in sig]},
                             rv=[{"name": n, "n_epochs_confirm_ecc": 0} for n in sig],
                             campaign={"targets": [{"name": n, "occultation_windows": [1], "rv_visits": []}
                                                   for n in sig]})
    ranks = rank_targets(result)
    assert len({ranks[n]["priority"] for n in sig}) == 1  # a tie
    order = sorted(sig, key=lambda n: ranks[n]["rank"])
    assert order == sorted(sig, key=lambda n: -sig[n])


@settings(max_examples=60, deadline=None)
@given(width=st.integers(40, 220),
       names=st.lists(st.text(st.characters(whitelist_categories=("Lu", "Ll", "Nd"), whitelist_characters="-_ "),
                              min_size=1, max_size=30).map(str.strip).filter(bool), min_size=1, max_size=5,
                      unique=True),
       value=st.floats(-1e6, 1e6, allow_nan=False))
def test_fit_table_never_cuts_names_or_numbers(width, names, value):
    """Any width, any names: no ellipsis, no line wider than the terminal, and when the essential columns
    fit, every name and number appears whole."""
    cols = [Col("target", justify="left"), Col("value"), Col("extra one", drop=2), Col("extra two", drop=1),
            Col("reason", justify="left", wrap=True)]
    rows = [[n, f"{value:.3f}", "x" * 12, "y" * 20, "some prose that may fold inside its cell"] for n in names]
    fitted = fit_table("title", cols, rows, width)
    text = render(fitted, width)
    assert "…" not in text
    assert all(len(line.rstrip()) <= width for line in text.splitlines())
    if width >= 80:
        check_layout(text, width, names, [f"{value:.3f}"])


# ------------------------------------------------------------------------------------------ messages

@pytest.mark.parametrize("columns", ["40", "60", "200"])
def test_messages_are_one_line_at_any_width(monkeypatch, capsys, columns):
    monkeypatch.setenv("COLUMNS", columns)
    monkeypatch.setattr(common, "_ERR", None)
    monkeypatch.setattr(common, "_CONSOLE", None)
    path = "/tmp/" + "x" * 150 + "/cat [bold].csv"
    message(f"{path}, row 2, column 't14_h': must be positive (a duration), got 0", "error")
    message("two\nlines become one", "warning")
    message("a result line on stdout " * 8, to_stdout=True)
    cap = capsys.readouterr()
    err = cap.err.splitlines()
    assert err[0] == f"error: {path}, row 2, column 't14_h': must be positive (a duration), got 0"
    assert err[1] == "warning: two lines become one" and len(err) == 2
    assert len(cap.out.splitlines()) == 1


def test_cli_row_error_is_one_line_with_long_path(tmp_path, monkeypatch, capsys):
    """The user-facing case: a bad row in a catalogue under a long directory, at 60 columns."""
    from rhofollow.cli import main

    monkeypatch.setenv("COLUMNS", "60")
    monkeypatch.setattr(common, "_ERR", None)
    monkeypatch.setattr(common, "_CONSOLE", None)
    d = tmp_path / ("d" * 120)
    d.mkdir()
    cat = d / "cat.csv"
    cat.write_text("name,period_d,t0_bjd,t14_h,depth_ppm,rho_star_cgs\nHTS-X,3.0,2461000.5,0,1000,1.4\n")
    assert main(["check", str(cat), "--json", str(tmp_path / "c.json")]) == 1
    out = capsys.readouterr().out
    assert any(str(cat) in line and "1 failed" in line for line in out.splitlines())
    assert json.loads((tmp_path / "c.json").read_text())


@pytest.mark.parametrize("columns", ["80", "140"])
def test_assess_command_table_at_width(tmp_path, monkeypatch, capsys, columns):
    """End to end: the assess command on demo rows at 80 and 140 columns."""
    from pathlib import Path

    from rhofollow.cli import main

    monkeypatch.setenv("COLUMNS", columns)
    monkeypatch.setattr(common, "_ERR", None)
    monkeypatch.setattr(common, "_CONSOLE", None)
    src = Path(__file__).resolve().parents[1] / "examples" / "hts_candidates.csv"
    lines = src.read_text().splitlines()
    cat = tmp_path / "c.csv"
    cat.write_text("\n".join(lines[:4]) + "\n")
    assert main(["assess", str(cat), "--samples", "1000", "--json", str(tmp_path / "a.json")]) == 0
    out = capsys.readouterr().out
    doc = json.loads((tmp_path / "a.json").read_text())
    table = []
    for line in out.splitlines():
        if line.startswith(("At ", "mismatch:")):  # the one-line notes after the table
            break
        table.append(line)
    check_layout("\n".join(table), int(columns), [t["name"] for t in doc["targets"]],
                 [f"{t['p_ecc_gt_0p1']:.2f}" for t in doc["targets"]])


def test_printed_priorities_show_the_ranking_order():
    """Priorities that differ print differently (more decimals when needed), so the rank column never
    contradicts the printed priority and mismatch tie-break."""
    doc = plan_doc()
    for t, p in zip(doc["targets"], (1.0, 0.99996, 0.99996, 0.9999)):
        t["priority"] = p
    text = render(plan_table(doc, 140), 140)
    assert "1.00000" in text and "0.99996" in text and "0.99990" in text


@pytest.mark.parametrize("width", WIDTHS)
def test_assess_table_shows_prior_beside_posterior_and_the_finding(width):
    """The prior P(e>0.1) stands beside the posterior, a prior-driven bound is marked, and a row no
    explanation fits says so, at 80 and 140 columns (issue 10; layout rule of this project)."""
    text = render(TABLES["assess"][0](width), width)
    assert "0.73→0.99" in text and "†" in text
    assert ("no explanation fits" in text) or ("none fits" in text)
    assert "star density in question" in text or "ρ★ doubt" in text
    if width >= 140:
        assert "no explanation fits" in text and "measured orbit disagrees" in text
        assert "0.88†" in text   # the upper bound is the prior's, the lower one the data's
