"""The assessment's fast paths give the very numbers of the plain operations they replace.

Each shortcut (physics/sampling.py logsumexp and split-normal quantiles, physics/grid_proposal.py cell
look-ups, physics/priors.py cell index, core/samples.py one-row quantiles, physics/transit.py
durations from a given sine) is checked for equality, not closeness, against the reference
computation: scipy.special.logsumexp and numpy.searchsorted as reference library, the rest against
the straightforward numpy expression (common practice, no source).
"""
import numpy as np
from hypothesis import given, settings, strategies as st
from scipy.special import logsumexp as scipy_logsumexp, ndtri

from rhofollow.core.samples import weighted_quantiles
from rhofollow.physics.grid_proposal import _GridProposal
from rhofollow.physics.priors import PRIOR_NAMES, measured_prior, parse_prior
from rhofollow.physics.sampling import logsumexp, split_normal_ppf
from rhofollow.physics.transit import durations_from_sin, eccentric_durations


@settings(max_examples=60, deadline=None)
@given(st.integers(1, 5000), st.floats(0.1, 60.0), st.floats(-900.0, 900.0), st.integers(0, 2**32 - 1))
def test_logsumexp_is_scipys_to_the_bit(n, spread, shift, seed):
    rng = np.random.default_rng(seed)
    a = rng.normal(shift, spread, n)
    a[rng.integers(0, n)] = a.max()          # a tie at the maximum
    if n > 3:
        a[rng.random(n) < 0.2] = -np.inf
    assert logsumexp(a) == scipy_logsumexp(a)
    b = rng.normal(0.0, spread, (3, n))
    assert np.array_equal(logsumexp(b, axis=0), scipy_logsumexp(b, axis=0))


def test_logsumexp_edge_cases_follow_scipy():
    for a in (np.full(4, -np.inf), np.array([np.inf, 0.0]), np.array([np.nan, 1.0]), np.array([3.0])):
        assert np.array_equal(logsumexp(a), scipy_logsumexp(a), equal_nan=True)


def test_split_normal_ppf_matches_the_two_sided_expression():
    rng = np.random.default_rng(3)
    u = np.concatenate([rng.random(20000), [0.0, 1.0, 0.2, np.nextafter(0.2, 0), np.nextafter(0.2, 1)]])
    mu, lo, hi = 1.5, 0.5, 2.0                # p_lo = 0.2
    p_lo = lo / (lo + hi)
    with np.errstate(divide="ignore"):
        ref = np.where(u < p_lo, mu + lo * ndtri(np.clip(u / p_lo * 0.5, 1e-300, 0.5)),
                       mu + hi * ndtri(np.clip(0.5 + (u - p_lo) / (1 - p_lo) * 0.5, 0.5, 1 - 1e-16)))
    assert np.array_equal(split_normal_ppf(u, mu, lo, hi), ref)


@settings(max_examples=40, deadline=None)
@given(st.integers(1, 3), st.floats(0.1, 3.0), st.floats(1.0, 12.0), st.integers(0, 2**32 - 1))
def test_grid_cell_lookups_equal_searchsorted(d, a, power, seed):
    rng = np.random.default_rng(seed)
    u = rng.beta(a, 2.0, (3000, d))
    g = _GridProposal(u, rng.random(3000) ** power, d)
    x = np.concatenate([rng.random(5000), np.clip(np.concatenate(
        [g.edges[0], np.nextafter(g.edges[0], 2), np.nextafter(g.edges[0], -2)]), 0, 1)])
    for j in range(d):
        edges = g.edges[j]
        ref = np.clip(np.searchsorted(edges, x, side="right") - 1, 0, g.bins[j] - 1)
        assert np.array_equal(g._cells(j, x), ref)
    r = np.concatenate([rng.random(5000), g.cdf[:-1], np.nextafter(g.cdf[:-1], 0)])
    r = r[(r >= 0) & (r < 1)]
    assert np.array_equal(g._cell_of_mass(r), np.searchsorted(g.cdf, r))


def test_prior_cell_index_equals_searchsorted():
    rng = np.random.default_rng(5)
    for prior in [parse_prior(n) for n in PRIOR_NAMES] + [measured_prior(0.3, 0.05, 0.08)]:
        g = prior.e_grid
        e = np.concatenate([rng.uniform(-0.1, 1.1, 50000), g, np.nextafter(g, 2), np.nextafter(g, -2),
                            [np.nan, np.inf, -np.inf]])
        assert np.array_equal(prior._cell(e), np.clip(np.searchsorted(g, e, side="right") - 1, 0, len(g) - 2))


def test_one_row_quantiles_equal_the_table_path():
    # the 1-D fast path against the same samples as one row of a 2-D table
    rng = np.random.default_rng(7)
    for t in range(60):
        n = int(rng.integers(1, 4000))
        x = rng.normal(size=n)
        w = rng.random(n) ** 3
        if t % 3 == 0:
            x[rng.random(n) < 0.1] = np.nan
        if t % 4 == 0:
            w[rng.random(n) < 0.3] = 0.0
        if t % 5 == 0:
            x = np.round(x, 1)                   # ties
        q = [0.025, 0.16, 0.5, 0.84, 0.975]
        two_d = weighted_quantiles(np.vstack([x, x]), np.vstack([w, w]), q)[0]
        assert np.array_equal(weighted_quantiles(x, w, q), two_d, equal_nan=True)


def test_durations_from_a_given_sine_are_eccentric_durations():
    rng = np.random.default_rng(11)
    n = 5000
    a_rs, b, k = rng.uniform(3, 40, n), rng.uniform(0, 1.1, n), rng.uniform(0.01, 0.2, n)
    period, e, w = rng.uniform(0.5, 50, n), rng.uniform(0, 0.9, n), rng.uniform(0, 2 * np.pi, n)
    with np.errstate(invalid="ignore", divide="ignore"):
        t14, t23 = eccentric_durations(a_rs, b, k, period, e, w)
        f14, f23, fac = durations_from_sin(a_rs, b, k, period, e, np.sin(w))
        g14, g23, _ = durations_from_sin(a_rs, b, k, period, e, np.sin(w), full=False)
    assert np.array_equal(t14, f14, equal_nan=True) and np.array_equal(t23, f23, equal_nan=True)
    assert np.array_equal(g14, t14, equal_nan=True) and g23 is None
    assert np.array_equal(fac, (1 - e * e) / (1 + e * np.sin(w)))
