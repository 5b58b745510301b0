"""Campaign plan: windows, RV placement at informative phases, hours, tables, iCalendar."""
import csv
import io

import numpy as np
import pytest

from rhofollow.planning.campaign import NightVis, hours_table, plan_campaign, to_ical
from rhofollow.planning.night import CAUTION, science_entry
from rhofollow.planning.tasks import VisGrid, iso_to_jd, jd_to_iso

JD0 = 2461376.5 + 1.0 / 24.0  # invented: first night starts 2026-12-03T01:00Z
NAMES = ["HTS-101", "HTS-102"]


def _nights(n=6, obs_fn=None):
    out = []
    for k in range(n):
        t = JD0 + k + np.arange(97) * 5.0 / 1440.0
        obs = np.ones((len(NAMES), t.size), bool) if obs_fn is None else obs_fn(k, t)
        out.append(NightVis(f"2026-12-{2 + k:02d}", VisGrid(t, NAMES, obs, np.full(obs.shape, 1.25)),
                            t[0], t[-1]))
    return out


def _science(n_rv=4):
    period = 2.5
    occ = {"p_occultation": 0.9, "occ_duration_h": 1.5, "events": [
        {"epoch": k, "window_utc": [[jd_to_iso(JD0 + 0.2 + k * period - 0.04),
                                     jd_to_iso(JD0 + 0.2 + k * period + 0.04)]]} for k in range(4)]}
    rv = {"n_epochs_confirm_ecc": n_rv, "hours_confirm_ecc": 0.5 * n_rv, "best_phases": [0.2, 0.6]}
    return [science_entry("HTS-101", evidence=0.8, occultation=occ, rv=rv, t0_bjd=JD0 - 1.0, period_d=period),
            science_entry("HTS-102", evidence=0.5, rv=dict(rv, n_epochs_confirm_ecc=float("inf")),
                          t0_bjd=JD0, period_d=4.0)]


def test_campaign_contract_hours_and_phases():
    nights = _nights()
    plan = plan_campaign(_science(), nights, site="Alto Quemado Observatory", overhead_h=0.1,
                         instruments={"occultation": "AQ-Cam", "rv": "AQ-Vel"})
    d = plan.to_dict()
    assert {"targets", "hours_total", "cautions"} <= set(d) and d["cautions"] == [CAUTION]
    t101, t102 = d["targets"]
    assert {"name", "occultation_windows", "rv_visits", "hours"} <= set(t101)
    # windows at JD0 + 0.2, 2.7, 5.2, 7.7 d; nights cover JD0 + k .. JD0 + k + 0.33 d (k = 0..5),
    # so epoch 1 falls in daytime and epoch 3 after the campaign
    assert [w["epoch"] for w in t101["occultation_windows"]] == [0, 2]
    for w in t101["occultation_windows"]:
        assert iso_to_jd(w["end_utc"]) - iso_to_jd(w["start_utc"]) == pytest.approx((0.08 + 2 / 24), abs=1e-5)
    # hours: occultation blocks (1.92 h window + 2 x 1 h baselines) plus the overhead of each
    occ_h = sum((iso_to_jd(w["end_utc"]) - iso_to_jd(w["start_utc"])) * 24 + 0.1
                for w in t101["occultation_windows"])
    assert t101["hours"]["AQ-Cam"] == pytest.approx(occ_h, abs=1e-3)
    # an RV visit's cost (exposure + instrument overhead, in the record's visit length) is counted
    # once: the site's slew + setup is not added on top (issue 13)
    assert t101["hours"]["AQ-Vel"] == pytest.approx(4 * 0.5, abs=1e-3)
    # 4 visits, distinct nights, alternating target phases, each close to its target phase
    nights_used = [v["night"] for v in t101["rv_visits"]]
    assert len(nights_used) == 4 == len(set(nights_used))
    assert sorted(v["target_phase"] for v in t101["rv_visits"]) == [0.2, 0.2, 0.6, 0.6]
    # within its night, no other allowed start (airmass is flat here) is closer to the target phase
    for v in t101["rv_visits"]:
        night = next(n for n in nights if n.date == v["night"])
        starts = night.vis.t_jd[0] + np.arange(0, 7.5 + 1e-9, 1 / 6) / 24
        ph = ((starts + 0.25 / 24 - (JD0 - 1.0)) / 2.5) % 1
        dmin = np.min(np.abs((ph - v["target_phase"] + 0.5) % 1 - 0.5))
        dphi = abs((v["phase"] - v["target_phase"] + 0.5) % 1 - 0.5)
        assert dphi <= dmin + 1e-4  # phases are reported to 4 decimals
    # impossible confirmation: no visits, a note, no hours
    assert t102["rv_visits"] == [] and t102["hours"] == {} and t102["notes"]
    assert d["hours_total"]["AQ-Vel"] == pytest.approx(t101["hours"]["AQ-Vel"])


def test_campaign_fewer_nights_than_visits():
    plan = plan_campaign(_science(n_rv=9), _nights(3), site="x")
    t = plan.targets[0]
    assert len(t["rv_visits"]) == 3 and any("only 3 of 9" in n for n in t["notes"])


def test_campaign_visits_only_when_observable():
    def obs_fn(k, t):
        o = np.zeros((2, t.size), bool)
        if k % 2 == 0:
            o[:, 10:50] = True
        return o
    nights = _nights(6, obs_fn)
    plan = plan_campaign(_science(n_rv=3), nights, site="x")
    for v in plan.targets[0]["rv_visits"]:
        night = next(n for n in nights if n.date == v["night"])
        assert night.vis.t_jd[10] - 1e-6 <= iso_to_jd(v["start_utc"])
        assert iso_to_jd(v["end_utc"]) <= night.vis.t_jd[49] + 1e-6


def test_campaign_flags_clashes():
    sci = _science(n_rv=6)
    # a second target with the same windows: both cannot be observed, one is flagged
    sci[1] = science_entry("HTS-102", evidence=0.4, occultation=sci[0]["occultation"], t0_bjd=JD0,
                           period_d=2.5)
    plan = plan_campaign(sci, _nights(2), site="x")
    a = plan.targets[0]["occultation_windows"][0]
    b = plan.targets[1]["occultation_windows"][0]
    assert a["clash"] is False and b["clash"] is True


def test_tables_and_ical():
    plan = plan_campaign(_science(), _nights(), site="Alto Quemado Observatory",
                         instruments={"occultation": "AQ-Cam", "rv": "AQ_Vel"})
    md = hours_table(plan, "md")
    assert md.splitlines()[0].startswith("| Target |") and "| Total |" in md
    rows = list(csv.reader(io.StringIO(hours_table(plan, "csv"))))
    assert rows[0][:3] == ["Target", "Occultation windows", "RV visits"] and rows[-1][0] == "Total"
    assert float(rows[-1][-1]) == pytest.approx(sum(plan.hours_total.values()), abs=0.02)
    tex = hours_table(plan, "latex")
    assert r"\begin{tabular}" in tex and r"AQ\_Vel" in tex and "HTS-101" in tex
    with pytest.raises(ValueError, match="unknown table format"):
        hours_table(plan, "html")
    ics = to_ical(plan).decode()
    n_items = sum(len(t["occultation_windows"]) + len(t["rv_visits"]) for t in plan.targets)
    assert ics.count("BEGIN:VEVENT") == n_items and "HTS-101 occultation" in ics


# ---------------------------------------------------------------- the command

def test_campaign_command(tmp_path, capsys):
    import json

    from rhofollow.cli import main

    lines = [ln for ln in open("examples/hts_candidates.csv", encoding="utf-8") if not ln.startswith("#")]
    cat = tmp_path / "cat.csv"
    cat.write_text(lines[0] + lines[15] + lines[19], encoding="utf-8")
    out, ics = tmp_path / "camp.json", tmp_path / "camp.ics"
    # ten nights: at least five visits (the eccentric model's parameters and one more) must fit
    rc = main(["campaign", str(cat), "--site", "site_configs/alto_quemado.toml", "--start", "2026-12-10",
               "--end", "2026-12-19", "--samples", "300", "--json", str(out), "--ics", str(ics),
               "--table", "csv"])
    assert rc == 0
    printed = capsys.readouterr().out
    rows = list(csv.reader(io.StringIO(printed)))
    assert rows[0][0] == "Target" and rows[-1][0] == "Total"
    d = json.loads(out.read_text())
    assert [t["name"] for t in d["targets"]] == ["HTS-115", "HTS-119"]
    assert set(d["hours_total"]) == {"AQ-CAM", "AQ-VEL"} and d["cautions"]
    for t in d["targets"]:
        assert {"name", "occultation_windows", "rv_visits", "hours"} <= set(t)
        assert len({v["night"] for v in t["rv_visits"]}) == len(t["rv_visits"]) <= 10
        for v in t["rv_visits"]:
            assert "2026-12-10" <= v["night"] <= "2026-12-19"
    n_items = sum(len(t["occultation_windows"]) + len(t["rv_visits"]) for t in d["targets"])
    assert ics.read_text().count("BEGIN:VEVENT") == n_items > 0


def test_campaign_command_bad_dates(capsys):
    from rhofollow.cli import main

    assert main(["campaign", "x.csv", "--site", "site_configs/alto_quemado.toml", "--start", "2026-12-10",
                 "--end", "2026-12-01"]) == 2
    assert "before --start" in capsys.readouterr().err
    assert main(["campaign", "x.csv", "--site", "site_configs/alto_quemado.toml", "--start", "2026-01-01",
                 "--end", "2027-06-01"]) == 2
    assert "at most" in capsys.readouterr().err


def test_campaign_retimes_visits_that_want_the_same_time():
    # two invented targets with identical ephemerides both want phase 0.2 on the same single night:
    # the exact night schedule moves one of them instead of reporting a clash
    rv = {"n_epochs_confirm_ecc": 1, "hours_confirm_ecc": 0.5, "best_phases": [0.2]}
    sci = [science_entry(n, evidence=0.8, rv=rv, t0_bjd=JD0 - 1.0, period_d=2.5) for n in NAMES]
    plan = plan_campaign(sci, _nights(1), site="x", overhead_h=0.1)
    (a,), (b,) = (t["rv_visits"] for t in plan.targets)
    assert not a["clash"] and not b["clash"]
    (s0, e0), (s1, e1) = sorted([(iso_to_jd(a["start_utc"]), iso_to_jd(a["end_utc"])),
                                 (iso_to_jd(b["start_utc"]), iso_to_jd(b["end_utc"]))])
    assert s1 >= e0 + 0.1 / 24 - 2e-5
    assert "_target" not in a and "_target" not in b


def test_campaign_reports_the_solver_limits_and_the_gap_reached():
    from rhofollow.planning.campaign import MIP_REL_GAP, TIME_LIMIT_S

    # one night, two RV visits that compete for it: a MILP, proven optimal (gap 0)
    rv = {"n_epochs_confirm_ecc": 1, "hours_confirm_ecc": 0.5, "best_phases": [0.2]}
    sci = [science_entry(n, evidence=0.8, rv=rv, t0_bjd=JD0 - 1.0, period_d=2.5) for n in NAMES]
    d = plan_campaign(sci, _nights(1), site="x", overhead_h=0.1).to_dict()
    assert d["scheduler"] == {"time_limit_s": TIME_LIMIT_S, "mip_rel_gap": MIP_REL_GAP, "nights_scheduled": 1,
                              "max_gap": 0.0, "nights_not_optimal": []}
    assert (TIME_LIMIT_S, MIP_REL_GAP) == (20.0, 0.01)  # the documented defaults
    # the contract test's six nights of windows and visits: every night with two items is optimal
    d = plan_campaign(_science(), _nights(), site="x").to_dict()
    assert d["scheduler"]["max_gap"] == 0.0 and d["scheduler"]["nights_not_optimal"] == []


def test_scheduler_summary_names_a_night_stopped_by_the_time_limit():
    from rhofollow.planning.campaign import scheduler_summary
    from rhofollow.planning.scheduler import Schedule

    solved = {"2026-12-02": Schedule([], 1.0, "milp", 0.0, "optimal", gap=0.0),
              "2026-12-03": Schedule([], 2.0, "milp", 0.0, "time limit", gap=0.125)}
    s = scheduler_summary(solved)
    assert s["nights_scheduled"] == 2 and s["max_gap"] == 0.125
    assert s["nights_not_optimal"] == [{"night": "2026-12-03", "status": "time limit", "gap": 0.125}]
    solved["2026-12-04"] = Schedule([], 2.0, "milp", 0.0, "time limit", gap=float("nan"))
    assert scheduler_summary(solved)["max_gap"] is None  # a gap the solver did not give
    assert scheduler_summary({})["max_gap"] == 0.0 and scheduler_summary({})["nights_scheduled"] == 0
