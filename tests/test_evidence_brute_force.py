"""Evidences accurate in size (issue 10): the sampler's ln Z against brute-force integrals.

The density-route likelihood is ln rho_circ,obs ~ N(ln rho* + 3 ln g, sigma_c) with
g = (1 + e sin w) / sqrt(1 - e^2) and rho_circ = rho* g^3 (Kipping 2010, MNRAS 407, 301; Dawson &
Johnson 2012, ApJ 756, 122; equation numbers not quoted; the relation as in REFERENCE.md section 3). The star is log-normal, ln rho* ~ N(ln 1.4, 0.05), so
integrating ln rho* out is a Gaussian convolution: the marginal likelihood at (e, w) is
N(ln ratio - 3 ln g; 0, hypot(sigma_c, 0.05)) (product of Gaussians, common practice, no source).

* circular (e = 0): ln Z is that normal log density at ln ratio (analytic, scipy.stats.norm), the
  1-D integral over ln rho* cross-checked with scipy.integrate.quad;
* eccentric: Z = int int p(e) (1/2 pi) (1 + e sin w)/(1 - e^2)/<1/(1 - e^2)> L(e, w) de dw, the prior
  p(e) the Beta(0.867, 3.03) of Kipping 2013 (MNRAS 434, L51; parameters from physics/priors.py)
  truncated to [0, 0.99) as priors.py does, times the transit-probability factor (Barnes 2007, PASP
  119, 986; Kipping 2014, MNRAS 444, 2263) normalised by its prior mean. The w integral is a periodic
  trapezoid on 8192 points (spectrally accurate for a smooth periodic integrand), the e integral
  scipy.integrate.quad (handles the integrable e^-0.133 singularity of the Beta at 0).

Tolerance: 0.05 nats (a Bayes factor good to 5 %).
"""
import math

import numpy as np
import pytest
from scipy import integrate, stats

from rhofollow.physics.eccentricity import HypothesisSetup, Obs, StarPool, TransitObservables, run_hypothesis
from rhofollow.physics.priors import E_MAX, PRIOR_NAMES, parse_prior

RHO_STAR, SIG_STAR = 1.4, 0.05
TOL = 0.05
_W = np.linspace(0.0, 2 * np.pi, 8192, endpoint=False)


def _setup(ratio, err):
    rng = np.random.default_rng(0)
    rho = np.exp(math.log(RHO_STAR) + SIG_STAR * rng.standard_normal(20000))
    pool = StarPool(rho, np.ones_like(rho), np.ones_like(rho), np.full(rho.size, 5800.0))
    pool._sn = (math.log(RHO_STAR), SIG_STAR, SIG_STAR)  # exact log-normal star for the integrals
    obs = TransitObservables("density", Obs(10.0, 0, 0), Obs(2460000.0, 0, 0), Obs(0.1, 0.001, 0.001),
                             ln_rho_circ=Obs(math.log(RHO_STAR * ratio), err, err))
    return obs, pool


def _brute_eccentric_ln_z(ratio, err, prior_name="kipping13", transit_prob=True):
    kind, params, _ = PRIOR_NAMES[prior_name]
    pdf = {"beta": lambda e: stats.beta.pdf(e, *params),
           "uniform": lambda e: 1.0}[kind]
    e_max = E_MAX
    norm = integrate.quad(pdf, 0.0, e_max, limit=200)[0]
    boost = (integrate.quad(lambda e: pdf(e) / (1 - e * e), 0.0, e_max, limit=200)[0] / norm
             if transit_prob else 1.0)
    s = math.hypot(err, SIG_STAR)
    y = math.log(ratio)

    def inner(e):  # (1/2 pi) int dw transit factor x marginal likelihood
        sw = np.sin(_W)
        like = stats.norm.pdf(y - 3 * np.log((1 + e * sw) / math.sqrt(1 - e * e)), 0.0, s)
        fac = (1 + e * sw) / (1 - e * e) / boost if transit_prob else 1.0
        return float(np.mean(like * fac))

    z = integrate.quad(lambda e: pdf(e) / norm * inner(e), 0.0, e_max, limit=1000,
                       points=[0.1, 0.3, 0.49, 0.6, 0.8, 0.9])[0]
    return math.log(z)


@pytest.mark.parametrize("ratio", [0.2, 1.0, 5.0])
def test_circular_evidence_matches_the_analytic_value(ratio):
    obs, pool = _setup(ratio, 0.05)
    s = math.hypot(0.05, SIG_STAR)
    exact = float(stats.norm.logpdf(math.log(ratio), 0.0, s))
    # the same value as a 1-D integral over ln rho* (scipy.integrate.quad)
    f = lambda x: stats.norm.pdf(math.log(RHO_STAR * ratio), x, 0.05) * stats.norm.pdf(x, math.log(RHO_STAR), SIG_STAR)  # noqa: E731
    lo, hi = sorted([math.log(RHO_STAR), math.log(RHO_STAR * ratio)])
    quad = integrate.quad(f, lo - 1, hi + 1, points=[0.5 * (lo + hi)], limit=200)[0]
    assert math.log(quad) == pytest.approx(exact, abs=1e-3)
    res = run_hypothesis("circular", obs, pool, HypothesisSetup(), 4000, np.random.default_rng(1))
    assert res.log_evidence == pytest.approx(exact, abs=TOL)


@pytest.mark.parametrize("ratio", [0.2, 1.0, 5.0])
def test_eccentric_evidence_matches_a_brute_force_2d_integral(ratio):
    obs, pool = _setup(ratio, 0.05)
    exact = _brute_eccentric_ln_z(ratio, 0.05)
    setup = HypothesisSetup(prior=parse_prior("kipping13"), transit_prob=True)
    for seed in (1, 2):
        res = run_hypothesis("eccentric", obs, pool, setup, 20000, np.random.default_rng(seed))
        assert res.log_evidence == pytest.approx(exact, abs=TOL), (ratio, seed)


def test_eccentric_evidence_uniform_prior_without_transit_factor():
    # uniform e prior on [0, 0.99) (Dawson & Johnson 2012 used a uniform prior), no transit factor
    ratio = 5.0
    obs, pool = _setup(ratio, 0.05)
    exact = _brute_eccentric_ln_z(ratio, 0.05, "uniform", transit_prob=False)
    res = run_hypothesis("eccentric", obs, pool, HypothesisSetup(prior=parse_prior("uniform"), transit_prob=False),
                         20000, np.random.default_rng(3))
    assert res.log_evidence == pytest.approx(exact, abs=TOL)


def test_bayes_factor_far_from_the_data_is_right_in_size():
    # ratio 5 with 5 % errors: the circular explanation is ~255 nats worse; the reported difference
    # must match the integrals' difference, not only its sign
    obs, pool = _setup(5.0, 0.05)
    exact = _brute_eccentric_ln_z(5.0, 0.05) - float(stats.norm.logpdf(math.log(5.0), 0.0, math.hypot(0.05, SIG_STAR)))
    setup = HypothesisSetup(prior=parse_prior("kipping13"), transit_prob=True)
    ecc = run_hypothesis("eccentric", obs, pool, setup, 20000, np.random.default_rng(4))
    circ = run_hypothesis("circular", obs, pool, setup, 4000, np.random.default_rng(5))
    assert ecc.log_evidence - circ.log_evidence == pytest.approx(exact, abs=2 * TOL)
