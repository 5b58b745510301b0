"""Split-normal draws and the adaptive importance sampler (physics/sampling.py)."""
import math

import numpy as np
import pytest
from scipy import stats

from rhofollow.physics.sampling import (adaptive_importance_sample, draw_split_normal, split_normal_logpdf,
                                        split_normal_ppf)


def test_split_normal_symmetric_matches_scipy_norm():
    # reference library: scipy.stats.norm
    u = np.linspace(0.001, 0.999, 101)
    assert np.allclose(split_normal_ppf(u, 2.0, 0.5, 0.5), stats.norm.ppf(u, 2.0, 0.5))
    x = np.linspace(0, 4, 50)
    assert np.allclose(split_normal_logpdf(x, 2.0, 0.5, 0.5), stats.norm.logpdf(x, 2.0, 0.5))


def test_split_normal_asymmetric_quantiles():
    # a split normal 10 -1/+3 puts 25 % of its mass below the mode (s_lo/(s_lo+s_hi); common practice,
    # no source) and its density integrates to 1
    u = split_normal_ppf(np.array([0.25]), 10.0, 1.0, 3.0)
    assert u[0] == pytest.approx(10.0, abs=1e-9)
    x = np.linspace(0, 30, 200001)
    assert np.trapezoid(np.exp(split_normal_logpdf(x, 10.0, 1.0, 3.0)), x) == pytest.approx(1.0, abs=1e-4)


def test_truncated_draws_respect_bounds():
    rng = np.random.default_rng(1)
    x = draw_split_normal(rng, 10000, 0.05, 0.1, 0.2, lower=0.0)
    assert x.min() > 0
    with pytest.raises(ValueError):
        draw_split_normal(rng, 10, -50.0, 0.1, 0.1, lower=0.0)


def test_importance_sampler_evidence_and_ess():
    # a Gaussian likelihood on the unit square: evidence = integral of the likelihood over the square
    # (computed with scipy.stats.norm CDFs); the adaptive sampler recovers it and reaches the ESS floor
    mu, s = np.array([0.7, 0.3]), np.array([0.01, 0.02])

    def model(u, rng):
        z = (u - mu) / s
        ll = -0.5 * np.sum(z * z, axis=1) - np.sum(np.log(np.sqrt(2 * np.pi) * s))
        return ll, {"x": u[:, 0]}

    res = adaptive_importance_sample(model, 2, 20000, np.random.default_rng(5), ess_floor=2000)
    exact = np.prod(stats.norm.cdf(1, mu, s) - stats.norm.cdf(0, mu, s))
    assert res.log_evidence == pytest.approx(math.log(exact), abs=0.05)
    assert res.ess >= 2000
    assert res.adapted
    w = np.exp(res.log_w - res.log_w.max())
    assert np.sum(w * res.aux["x"]) / w.sum() == pytest.approx(0.7, abs=0.002)


def test_sampler_is_deterministic_for_a_seed():
    def model(u, rng):
        return -0.5 * ((u[:, 0] - 0.4) / 0.05) ** 2 + rng.normal(0, 0.01, len(u)), {"x": u[:, 0]}

    a = adaptive_importance_sample(model, 1, 5000, np.random.default_rng(9), ess_floor=1000)
    b = adaptive_importance_sample(model, 1, 5000, np.random.default_rng(9), ess_floor=1000)
    assert np.array_equal(a.log_w, b.log_w)


def test_pooled_set_meets_the_floor_and_keeps_the_evidence():
    """A narrow bimodal likelihood on the unit square that one batch cannot resolve: the returned
    pooled set's Kish ESS (Kish 1965, Survey Sampling; recomputed here from the returned weights)
    meets the floor, and the evidence stays the exact integral (scipy.stats.norm CDFs) with the
    deterministic-mixture weights (Owen & Zhou 2000, JASA 95, 135)."""
    mus = np.array([[0.2, 0.8], [0.75, 0.3]])
    s = np.array([0.004, 0.006])

    def model(u, rng):
        ll = []
        for mu in mus:
            z = (u - mu) / s
            ll.append(-0.5 * np.sum(z * z, axis=1) - np.sum(np.log(np.sqrt(2 * np.pi) * s)) + np.log(0.5))
        return np.logaddexp(*ll), {"x": u[:, 0]}

    res = adaptive_importance_sample(model, 2, 3000, np.random.default_rng(2), ess_floor=2500)
    w = np.exp(res.log_w - res.log_w.max())
    kish = w.sum() ** 2 / np.sum(w * w)
    assert kish == pytest.approx(res.ess) and kish >= 2500
    assert len(res.log_w) > 3000   # more than one batch was needed and kept
    exact = 0.5 * sum(np.prod(stats.norm.cdf(1, mu, s) - stats.norm.cdf(0, mu, s)) for mu in mus)
    assert res.log_evidence == pytest.approx(math.log(exact), abs=0.05)
    assert np.sum(w * (res.aux["x"] < 0.5)) / w.sum() == pytest.approx(0.5, abs=0.05)
