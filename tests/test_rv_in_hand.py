"""RV epochs already in hand (the ledger's measured RVs) count in the power curve: the visits to
request are those on top of them, so a target with RVs in hand needs fewer new visits, never more."""
from __future__ import annotations

import copy
import datetime as dt

import numpy as np
import pytest

from rhofollow.physics import rvreach


def _posterior(n=400, e0=0.3, k=10.0, seed=1):
    rng = np.random.default_rng(seed)
    e = np.clip(rng.normal(e0, 0.05, n), 0.0, 0.9)
    return e, rng.uniform(0, 2 * np.pi, n), np.full(n, k)


def test_epochs_in_hand_raise_the_power_and_lower_the_visits():
    # More data of the same quality can only help the likelihood-ratio test (Neyman-Pearson; common
    # practice, no source): with eight epochs in hand every point of the curve is at least as high
    # (within the Monte-Carlo error of 400 data sets, sd <= 0.025) and the power is reached sooner.
    e, om, k = _posterior()
    pool = rvreach.uniform_pool(60, seed=2)
    lad = rvreach.visit_ladder(60, n_min=1)
    kw = dict(seed=3, loss=0.25, n_alt=400, n_null=2000)
    base = rvreach.power_curve_at_pool(e, om, k, 3.0, pool, lad, **kw)
    held = rvreach.power_curve_at_pool(e, om, k, 3.0, pool, lad, prior_phases=(np.arange(8) + 0.5) / 8,
                                       prior_sigma=3.0, **kw)
    assert all(b >= a - 0.05 for a, b in zip(base["power"], held["power"]))
    n0, n1 = rvreach.visits_for_power(base, 0.8), rvreach.visits_for_power(held, 0.8)
    assert n0 is not None and n1 is not None and n1 < n0
    # running sums and the direct computation agree with epochs in hand too
    direct = rvreach.power_curve_at_pool(e, om, k, 3.0, pool, lad, prior_phases=(np.arange(8) + 0.5) / 8,
                                         prior_sigma=3.0, method="direct", **kw)
    assert direct["power"] == held["power"]


def test_no_epochs_in_hand_is_the_plain_curve_and_useless_ones_change_little():
    e, om, k = _posterior(200)
    pool = rvreach.uniform_pool(30, seed=2)
    lad = rvreach.visit_ladder(30)
    kw = dict(seed=5, n_alt=200, n_null=800)
    plain = rvreach.power_curve_at_pool(e, om, k, 3.0, pool, lad, **kw)
    assert rvreach.power_curve_at_pool(e, om, k, 3.0, pool, lad, prior_phases=[], prior_sigma=[], **kw) == plain
    # epochs a million times less precise carry no information: the same powers within MC error
    vague = rvreach.power_curve_at_pool(e, om, k, 3.0, pool, lad, prior_phases=[0.1, 0.6], prior_sigma=3e6, **kw)
    assert np.allclose(vague["power"], plain["power"], atol=0.03)
    with pytest.raises(ValueError, match="errors of the RV epochs"):
        rvreach.power_curve_at_pool(e, om, k, 3.0, pool, lad, prior_phases=[0.1], prior_sigma=0.0, **kw)


def _setup(tmp_path):
    """Two demo targets (invented) over twelve nights: assessments, science entries, nights, spectrograph."""
    from rhofollow.io.catalogue import read_catalogue
    from rhofollow.io.instruments import read_instrument
    from rhofollow.physics.priors import DEFAULT_PRIOR, parse_prior
    from rhofollow.planning.campaign import NightVis
    from rhofollow.planning.night import night_visibility, science_from_records
    from rhofollow.planning.site import load_site
    from rhofollow.planning.visibility import VisibilityEngine
    from rhofollow.stages.assess import assess_target
    from rhofollow.stages.rv import plan_rv

    lines = [ln for ln in open("examples/hts_candidates.csv", encoding="utf-8") if not ln.startswith("#")]
    cat = tmp_path / "cat.csv"
    cat.write_text(lines[0] + lines[15] + lines[19], encoding="utf-8")
    ass = [assess_target(t, 600, parse_prior(DEFAULT_PRIOR), 7, True) for t in read_catalogue(str(cat)).targets]
    spec = read_instrument("site_configs/instruments/aq_vel.toml")
    rvs = plan_rv(ass, spec, fap=0.01, power=0.8, seed=7, n_alt=200, n_null=400)
    sci, _ = science_from_records(ass, [], rvs)
    site = load_site("site_configs/alto_quemado.toml")
    eng = VisibilityEngine(site)
    grids = [g for g in eng.nights(dt.date(2026, 12, 10), dt.date(2026, 12, 21)) if g.kind != "no_night"]
    nights = [NightVis(str(g.date), night_visibility(eng, g, sci), g.start_jd, g.end_jd) for g in grids]
    return ass, sci, nights, spec, site


def test_reachable_request_counts_the_rvs_in_hand(tmp_path):
    from rhofollow.planning.rvreach import reachable_rv

    ass, sci, nights, spec, site = _setup(tmp_path)
    kw = dict(loss_fraction=site.loss_fraction, seed=7, n_alt=200, n_null=800)
    plain = copy.deepcopy(sci)
    reachable_rv(ass, plain, nights, spec, **kw)
    held = copy.deepcopy(sci)
    for entry in held:
        entry["n_done"] = 6      # as the ledger counts them: six nights with an RV
    # six past epochs spread in phase, 2 m/s, for the second target only
    p, t0 = held[1]["period_d"], held[1]["t0_bjd"]
    bjd = t0 - p * (40 + 3 * np.arange(6)) + p * (np.arange(6) + 0.5) / 6      # on six different nights
    reachable_rv(ass, held, nights, spec, epochs_in_hand={held[1]["name"]: (bjd, np.full(6, 2.0))}, **kw)
    a, b = plain[1]["rv"]["confirm_reachable"], held[1]["rv"]["confirm_reachable"]
    assert b["visits_in_hand"] == 6 and "visits_in_hand" not in a
    assert a["visits"] is not None, "the invented target is confirmable in twelve nights without RVs in hand"
    assert b["visits"] is not None and b["visits"] < a["visits"]
    assert b["power_curve"][0]["n"] == 1 < a["power_curve"][0]["n"]   # with six in hand, one more may do
    assert held[1]["n_done"] == 0          # counted in the curve, not subtracted again by the planners
    assert held[0]["n_done"] == 6          # the other target has no RVs in hand: unchanged
    assert held[0]["rv"]["confirm_reachable"] == plain[0]["rv"]["confirm_reachable"]


def test_epochs_from_ledger(tmp_path):
    from rhofollow.io.ledger import Ledger
    from rhofollow.planning.rvreach import epochs_from_ledger

    assert epochs_from_ledger(None, ["X"]) == {}
    path = tmp_path / "led.sqlite"
    lg = Ledger(path)
    rv = tmp_path / "HTS-1.csv"
    rv.write_text("bjd_tdb,rv_ms,rv_err_ms,instrument\n2461000.5,1.0,2.5,X\n2461001.6,-3.0,3.0,X\n",
                  encoding="utf-8")
    lg.ingest_rv_file(rv, target="HTS-1")
    got = epochs_from_ledger(path, ["HTS-1", "HTS-2"])
    assert list(got) == ["HTS-1"]
    assert got["HTS-1"][0].tolist() == [2461000.5, 2461001.6] and got["HTS-1"][1].tolist() == [2.5, 3.0]
