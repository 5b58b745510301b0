"""Nightly plan: contract, exactness and observability of every block."""
import numpy as np
import pytest

from rhofollow.planning.night import CAUTION, plan_night, science_entry
from rhofollow.planning.tasks import VisGrid, iso_to_jd, jd_to_iso

JD0 = 2461376.5 + 1.0 / 24.0  # invented night, 2026-12-03T01:00Z, 8 h long


def _vis(names, n=97, obs=None, airmass=None):
    t = JD0 + np.arange(n) * 5.0 / 1440.0
    o = np.ones((len(names), n), bool) if obs is None else obs
    x = np.full((len(names), n), 1.3) if airmass is None else airmass
    return VisGrid(t, list(names), o, x)


def _occ(w0_h, w1_h, p=0.9, dur=1.5):
    return {"p_occultation": p, "occ_duration_h": dur,
            "events": [{"epoch": 7, "window_utc": [[jd_to_iso(JD0 + w0_h / 24), jd_to_iso(JD0 + w1_h / 24)]]}]}


def _rv(n=6, hours=3.0, best=(0.25, 0.75)):
    return {"n_epochs_confirm_ecc": n, "hours_confirm_ecc": hours, "best_phases": list(best)}


def _science():
    return [
        science_entry("HTS-101", evidence=0.9, occultation=_occ(1.0, 3.0), rv=_rv(),
                      t0_bjd=JD0 - 0.3, period_d=3.1),
        science_entry("HTS-102", evidence=0.6, occultation=_occ(2.0, 4.5), rv=None),
        science_entry("HTS-103", evidence=0.8, rv=_rv(n=3, hours=1.5), t0_bjd=JD0 + 0.1, period_d=1.7),
        science_entry("HTS-104", evidence=0.0, rv=_rv(), t0_bjd=JD0, period_d=5.0),
    ]


def test_night_contract_and_feasibility():
    names = ["HTS-101", "HTS-102", "HTS-103", "HTS-104"]
    plan = plan_night(_science(), _vis(names), site="Alto Quemado Observatory", night_start_jd=JD0,
                      night_end_jd=JD0 + 8 / 24, overhead_h=0.1)
    d = plan.to_dict()
    assert {"site", "night_start_utc", "night_end_utc", "blocks", "skipped"} <= set(d)
    assert d["cautions"] == [CAUTION]
    for b in d["blocks"]:
        assert {"name", "kind", "start_utc", "end_utc", "value", "airmass_max"} <= set(b)
        assert b["kind"] in ("occultation", "rv")
        assert iso_to_jd(b["start_utc"]) >= JD0 - 1e-6
        assert iso_to_jd(b["end_utc"]) <= JD0 + 8 / 24 + 1e-6
    ends = sorted((iso_to_jd(b["start_utc"]), iso_to_jd(b["end_utc"])) for b in d["blocks"])
    for (s0, e0), (s1, e1) in zip(ends, ends[1:]):
        assert s1 >= e0 + 0.1 / 24 - 2e-5  # ISO rounding to the second
    for s in d["skipped"]:
        assert set(s) == {"name", "reason"}
    # the zero-evidence target is skipped with a reason
    assert any(s["name"] == "HTS-104" and "no value" in s["reason"] for s in d["skipped"])
    # every offered task is either scheduled or explained
    assert {b["name"] for b in d["blocks"]} | {s["name"] for s in d["skipped"]} == set(names)


def test_night_exact_beats_greedy():
    names = ["HTS-101", "HTS-102", "HTS-103", "HTS-104"]
    kw = dict(site="x", night_start_jd=JD0, night_end_jd=JD0 + 8 / 24, overhead_h=0.1)
    exact = plan_night(_science(), _vis(names), **kw)
    greedy = plan_night(_science(), _vis(names), method="greedy", **kw)
    assert exact.schedule.method == "milp"
    assert exact.schedule.value >= greedy.schedule.value - 1e-9


def test_night_respects_unobservable_time():
    names = ["HTS-103"]
    obs = np.zeros((1, 97), bool)
    obs[0, 40:60] = True
    plan = plan_night(_science()[2:3], _vis(names, obs=obs), site="x", night_start_jd=JD0,
                      night_end_jd=JD0 + 8 / 24)
    (b,) = plan.to_dict()["blocks"]
    t = JD0 + np.arange(97) * 5.0 / 1440.0
    assert iso_to_jd(b["start_utc"]) >= t[40] - 1e-6 and iso_to_jd(b["end_utc"]) <= t[59] + 1e-6
    assert b["kind"] == "rv" and 0 <= b["phase"] < 1
