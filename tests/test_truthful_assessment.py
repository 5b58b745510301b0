"""Issue 10: measured orbits stand, inconsistency is a finding, evidences are accurate in size."""
import math

import numpy as np
import pytest
from scipy import integrate

from rhofollow.stages.assess import assess_target
from rhofollow.core.types import Measurement as M, Target
from rhofollow.physics.eccentricity import HypothesisSetup, Obs, StarPool, TransitObservables, run_hypothesis
from rhofollow.physics.priors import measured_prior
from rhofollow.physics.transit import ars_from_rho


def _target(**values):
    return Target("T", 1, "test.csv", {k: M(*v) if isinstance(v, tuple) else M(float(v))
                                       for k, v in values.items()})


def test_measured_orbit_stands_against_a_sixfold_density_mismatch():
    # seen case 1: P = 20 d, a/R* = 1.82 x the circular value for rho* = 1.4 (ratio 1.82^3 = 6.0);
    # the photo-eccentric relation rho_circ/rho* = g^3 (Kipping 2010) gives g^3 = 1.35 for the
    # measured orbit, so the measured star cannot agree
    a_c = float(ars_from_rho(1.4, 20.0))
    t = _target(period_d=(20.0, 1e-5, 1e-5), t0_bjd=(2461000.5, 1e-3, 1e-3), a_rs=(1.82 * a_c, 1.0, 1.0),
                rp_rs=(0.1, 0.002, 0.002), rho_star_cgs=(1.4, 0.07, 0.07), ecc=(0.10, 0.001, 0.001),
                omega_deg=(60.0, 0.5, 0.5))
    a = assess_target(t, n_samples=8000, seed=3)
    r = a.record
    assert a.ok and r["ecc"]["q50"] == pytest.approx(0.10, abs=0.001)
    assert r["omega_deg"]["q50"] == pytest.approx(60.0, abs=0.5)
    assert r["ess"] >= 2000 and not r["fits"] and r["favoured"] == "star_density"
    assert r["consistency"]["orbit_tension_sigma"] > 5


def test_small_mismatch_with_measured_e_is_kept_as_a_finding():
    # seen case 2: P = 2.24 d, e = 0.087 +- 0.002, ratio about 2.7
    a_c = float(ars_from_rho(1.4, 2.24))
    t = _target(period_d=(2.24, 1e-5, 1e-5), t0_bjd=(2461000.5, 1e-3, 1e-3),
                a_rs=(a_c * 2.7 ** (1 / 3), 0.2, 0.2), rp_rs=(0.1, 0.002, 0.002),
                rho_star_cgs=(1.4, 0.07, 0.07), ecc=(0.087, 0.002, 0.002))
    a = assess_target(t, n_samples=4000, seed=1)
    assert a.ok and a.record["ecc"]["q50"] == pytest.approx(0.087, abs=0.002)
    assert a.record["finding"] != "fits" and a.record["consistency"]["check"]


def test_rho_circ_and_rho_star_only_gives_finite_posterior():
    # seen case 3: no radius ratio; the density route needs none (a documented default is warned)
    t = _target(period_d=(5.0, 1e-5, 1e-5), t0_bjd=(2461000.5, 1e-3, 1e-3), rho_circ_cgs=(2.8, 0.3, 0.3),
                rho_star_cgs=(1.4, 0.07, 0.07))
    a = assess_target(t, n_samples=2000, seed=1)
    assert a.ok and a.record["radius_ratio_assumed"]
    assert all(math.isfinite(v) for v in a.record["ecc"].values())
    assert any("radius ratio" in w for w in a.warnings)


def test_measured_prior_has_no_leaking_cells():
    # the exact inverse CDF keeps every draw within the measurement: for e = 0.1 +- 0.005 no draw of
    # 10^6 is beyond 6 sigma (normal tail probability 2e-9, scipy.special.ndtr)
    p = measured_prior(0.1, 0.005, 0.005)
    e = p.ppf(np.random.default_rng(0).random(1_000_000))
    assert np.all(np.abs(e - 0.1) < 6 * 0.005)


def _density_setup(ratio, err):
    rng = np.random.default_rng(0)
    rho = np.exp(np.log(1.4) + 0.05 * rng.standard_normal(20000))
    pool = StarPool(rho, np.ones_like(rho), np.ones_like(rho), np.full(rho.size, 5800.0))
    pool._sn = (math.log(1.4), 0.05, 0.05)  # exact log-normal star for the brute-force integral
    obs = TransitObservables("density", Obs(10.0, 0, 0), Obs(2460000.0, 0, 0), Obs(0.1, 0.001, 0.001),
                             ln_rho_circ=Obs(math.log(1.4 * ratio), err, err))
    return obs, pool


def test_circular_evidence_far_from_the_data_matches_the_integral():
    # ratio 5 with 5 % errors on both densities: ln Z = ln N(ln 5; 0, sqrt(2) 0.05), the Gaussian
    # convolution checked against scipy.integrate.quad
    obs, pool = _density_setup(5.0, 0.05)
    f = lambda x: math.exp(-0.5 * ((math.log(7.0) - x) / 0.05) ** 2 - 0.5 * ((x - math.log(1.4)) / 0.05) ** 2) \
        / (2 * math.pi * 0.05**2)  # noqa: E731
    z, _ = integrate.quad(f, math.log(1.4) - 1, math.log(7.0) + 1, points=[math.log(1.4 * math.sqrt(5))])
    res = run_hypothesis("circular", obs, pool, HypothesisSetup(), 4000, np.random.default_rng(1))
    assert res.log_evidence == pytest.approx(math.log(z), abs=0.1)


def test_ranking_rewards_what_the_data_show_and_puts_unexplained_rows_last():
    """priority = P(eccentric explanation) x B/(1+B) x testability (README, Ranking): a target the
    data say nothing about (posterior odds = prior odds, B = 1) scores 0.5 even though its posterior
    P(e > 0.1) equals the prior's ~0.7; a row no explanation fits ranks after the others.
    (Ranking rule of this project, common practice, no source.)"""
    from types import SimpleNamespace

    from rhofollow.report.tables import rank_targets

    def a(name, p_gt, weight, fits=True):
        return SimpleNamespace(name=name, ok=True, record={
            "p_ecc_gt_0p1": p_gt, "ecc_data_weight": weight, "fits": fits,
            "p_explanation": {"eccentric": 1.0}, "density_ratio_sigma": 1.0, "reliable": True})

    names = ("PRIOR-ONLY", "DATA-SAY-ECC", "NOTHING-FITS")
    result = SimpleNamespace(
        assessments=[a("PRIOR-ONLY", 0.70, 0.5), a("DATA-SAY-ECC", 0.65, 0.9), a("NOTHING-FITS", 0.99, 0.99, False)],
        occultations={"targets": [{"name": n, "p_occultation": 1.0} for n in names]},
        rv=[], campaign={"targets": [{"name": n, "occultation_windows": [1]} for n in names]})
    r = rank_targets(result)
    assert r["PRIOR-ONLY"]["priority"] == pytest.approx(0.5)
    assert r["DATA-SAY-ECC"]["priority"] == pytest.approx(0.9)
    assert [r[n]["rank"] for n in ("DATA-SAY-ECC", "PRIOR-ONLY", "NOTHING-FITS")] == [1, 2, 3]
