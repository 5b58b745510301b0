"""The RV budget: exact knapsack over per-target power curves, the gain-per-hour threshold, and
the request carried into the campaign (rv and campaign hours agree)."""
from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rhofollow.planning.budget import (MIN_GAIN_PER_HOUR, Option, brute_force_budget, solve_budget,
                                       target_options, threshold_requests)


def _items(rng, n_targets=4, n_opts=3):
    items = []
    for i in range(n_targets):
        visit_h = float(rng.uniform(0.1, 1.0))
        ns = np.sort(rng.choice(np.arange(5, 40), n_opts, replace=False))
        pw = np.sort(rng.uniform(0.05, 1.0, n_opts))
        curve = [{"n": int(n), "power": float(p)} for n, p in zip(ns, pw)]
        items.append({"name": f"T{i}", "instrument": "RV", "options": target_options(curve, visit_h,
                                                                                      rng.uniform(0.1, 1))})
    return items


@settings(max_examples=30, deadline=None)
@given(st.integers(0, 10_000), st.floats(0.5, 60.0))
def test_knapsack_equals_brute_force(seed, budget):
    items = _items(np.random.default_rng(seed))
    sol = solve_budget(items, {"RV": budget})
    value = sum(s["value"] for s in sol.values())
    assert sum(s["hours"] for s in sol.values()) <= budget + 1e-9
    assert value == pytest.approx(brute_force_budget(items, budget), abs=1e-9)


@settings(max_examples=20, deadline=None)
@given(st.integers(0, 10_000), st.floats(0.5, 40.0))
def test_doubling_the_budget_never_lowers_expected_confirmations(seed, budget):
    items = _items(np.random.default_rng(seed), n_targets=5)
    v1 = sum(s["value"] for s in solve_budget(items, {"RV": budget}).values())
    v2 = sum(s["value"] for s in solve_budget(items, {"RV": 2 * budget}).values())
    assert v2 >= v1 - 1e-12


def test_budget_below_the_cheapest_option_funds_nothing():
    items = _items(np.random.default_rng(3))
    cheapest = min(o.hours for it in items for o in it["options"])
    sol = solve_budget(items, {"RV": 0.99 * cheapest})
    assert all(s["visits"] == 0 and s["hours"] == 0.0 for s in sol.values())
    # and a spectrograph without a budget gets nothing
    assert all(s["visits"] == 0 for s in solve_budget(items, {"OTHER": 100.0}).values())


def test_options_keep_rising_values_only():
    curve = [{"n": 5, "power": 0.2}, {"n": 6, "power": 0.2}, {"n": 8, "power": 0.5}, {"n": 10, "power": 0.4}]
    assert target_options(curve, 0.5, 0.5) == [Option(5, 2.5, 0.1), Option(8, 4.0, 0.25)]


def test_threshold_rule_requests_worthwhile_targets_only():
    good = {"name": "A", "instrument": "RV", "options": [Option(10, 5.0, 0.72)], "visits_to_power": 10,
            "visit_h": 0.5}
    poor = {"name": "B", "instrument": "RV", "options": [Option(60, 60.0, 0.2)], "visits_to_power": 60,
            "visit_h": 1.0}
    never = {"name": "C", "instrument": "RV", "options": [Option(30, 15.0, 0.1)], "visits_to_power": None,
             "visit_h": 0.5}
    short = {"name": "D", "instrument": "RV", "options": [Option(5, 2.0, 0.2), Option(12, 4.8, 0.5)],
             "visits_to_power": None, "visit_h": 0.4}
    empty = {"name": "E", "instrument": "RV", "options": [], "visits_to_power": None, "visit_h": 0.4}
    out = threshold_requests([good, poor, never, short, empty], 0.8)
    assert out["A"]["requested"] and out["A"]["hours"] == 5.0
    assert 0.2 / 60.0 < MIN_GAIN_PER_HOUR and not out["B"]["requested"]
    assert "would cost 60.0 h" in out["B"]["reason"]
    assert not out["C"]["requested"] and "not confirmable" in out["C"]["reason"]
    # power out of reach but worth its hours: requested at the reachable visits of most value
    assert out["D"]["requested"] and out["D"]["visits"] == 12 and "not confirmable at 80%" in out["D"]["reason"]
    assert not out["E"]["requested"]


def test_parse_hours_errors():
    from rhofollow.cli.campaign import parse_hours
    from rhofollow.cli.common import UserError

    assert parse_hours(["AQ-VEL=40"], ["AQ-VEL"]) == {"AQ-VEL": 40.0}
    assert parse_hours(None, ["AQ-VEL"]) is None
    for bad, msg in (("AQ-VEL", "INSTRUMENT=HOURS"), ("AQ-VEL=x", "not a number"), ("AQ-VEL=-1", "positive"),
                     ("AQ-CAM=4", "not a spectrograph")):
        with pytest.raises(UserError, match=msg):
            parse_hours([bad], ["AQ-VEL"])
    with pytest.raises(UserError, match="twice"):
        parse_hours(["AQ-VEL=1", "AQ-VEL=2"], ["AQ-VEL"])


# ------------------------------------------------------------------ request -> campaign

def _reachable_setup(tmp_path):
    """Two demo targets over twelve nights: assessments, science entries, nights, spectrograph."""
    from rhofollow.stages.assess import assess_target
    from rhofollow.io.catalogue import read_catalogue
    from rhofollow.io.instruments import read_instrument
    from rhofollow.physics.priors import DEFAULT_PRIOR, parse_prior
    from rhofollow.planning.campaign import NightVis
    from rhofollow.planning.night import night_visibility, science_from_records
    from rhofollow.planning.site import load_site
    from rhofollow.planning.visibility import VisibilityEngine
    from rhofollow.stages.rv import plan_rv

    lines = [ln for ln in open("examples/hts_candidates.csv", encoding="utf-8") if not ln.startswith("#")]
    cat = tmp_path / "cat.csv"
    cat.write_text(lines[0] + lines[15] + lines[19], encoding="utf-8")
    targets = read_catalogue(str(cat)).targets
    prior = parse_prior(DEFAULT_PRIOR)
    ass = [assess_target(t, 600, prior, 7, True) for t in targets]
    spec = read_instrument("site_configs/instruments/aq_vel.toml")
    rvs = plan_rv(ass, spec, fap=0.01, power=0.8, seed=7, n_alt=200, n_null=400)
    sci, _ = science_from_records(ass, [], rvs)
    site = load_site("site_configs/alto_quemado.toml")
    eng = VisibilityEngine(site)
    import datetime as dt

    grids = [g for g in eng.nights(dt.date(2026, 12, 10), dt.date(2026, 12, 21)) if g.kind != "no_night"]
    nights = [NightVis(str(g.date), night_visibility(eng, g, sci), g.start_jd, g.end_jd) for g in grids]
    return ass, sci, nights, spec, site, rvs


def test_request_and_campaign_hours_agree_and_budget_is_respected(tmp_path):
    from rhofollow.planning.campaign import plan_campaign
    from rhofollow.planning.rvrequest import plan_rv_requests

    ass, sci, nights, spec, site, rvs = _reachable_setup(tmp_path)
    uniform_exp = [r["exposure_s"] for r in rvs]
    req = plan_rv_requests(ass, sci, nights, spec, loss_fraction=site.loss_fraction, seed=7, n_alt=200,
                           n_null=400, min_gain_per_hour=0.0)
    plan = plan_campaign(sci, nights, site=site.name, overhead_h=0.1,
                         instruments={"rv": spec.name, "occultation": "AQ-CAM"}, rv_request=req).to_dict()
    by = {t["name"]: t for t in plan["targets"]}
    for r in rvs:
        cr = r["confirm_reachable"]
        assert cr["phase_model"] == "reachable" and cr["loss_fraction"] == 0.25
        assert r["uniform_phase"]["n_epochs_confirm_ecc"] is not None or r["uniform_phase"]
        # visit cost itemised once: exposure + instrument overhead
        assert r["visit_h"] == pytest.approx((r["exposure_s"] + spec.overhead_s) / 3600.0)
        assert spec.exposure_min_s <= r["exposure_s"] <= spec.exposure_max_s
        if r["request"]["requested"]:
            t = by[r["name"]]
            # the rv record's hours and the campaign's hours for the target are the same number
            assert len(t["rv_visits"]) == r["request"]["visits"]
            assert t["hours"][spec.name] == pytest.approx(r["request"]["hours"], abs=1e-3)
            if r["request"]["visits"] == r["n_epochs_confirm_ecc"]:
                assert r["hours_confirm_ecc"] == pytest.approx(t["hours"][spec.name], abs=1e-3)
    assert req["requested"], "at least one demo target is confirmable in twelve nights"
    # a budget: chosen hours stay within it; doubling it never lowers the expected confirmations
    cheapest = min(pt["n"] for r in rvs for pt in r["confirm_reachable"]["power_curve"][:1]) * \
        min(r["visit_h"] for r in rvs)
    small = plan_rv_requests(ass, sci, nights, spec, loss_fraction=site.loss_fraction, seed=7, n_alt=200,
                             n_null=400, hours={spec.name: 0.5 * cheapest})
    assert small["requested"] == [] and small["expected_confirmations"] == 0.0
    one = plan_rv_requests(ass, sci, nights, spec, loss_fraction=site.loss_fraction, seed=7, n_alt=200,
                           n_null=400, hours={spec.name: 3.0})
    plan = plan_campaign(sci, nights, site=site.name, overhead_h=0.1, instruments={"rv": spec.name},
                         rv_request=one).to_dict()
    assert plan["hours_total"].get(spec.name, 0.0) <= 3.0 + 1e-6
    assert plan["rv_request"]["basis"] == "budget"
    two = plan_rv_requests(ass, sci, nights, spec, loss_fraction=site.loss_fraction, seed=7, n_alt=200,
                           n_null=400, hours={spec.name: 6.0})
    assert sum(one["hours_requested"].values()) <= 3.0 + 1e-9
    assert two["expected_confirmations"] >= one["expected_confirmations"]
    # the uniform-phase answer is kept once (re-running the request does not overwrite it)
    assert all(r["uniform_phase"]["exposure_s"] == u for r, u in zip(rvs, uniform_exp))
