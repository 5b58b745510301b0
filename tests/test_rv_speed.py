"""The faster RV planning gives the numbers of the slower one: the Fisher cross-check on 64 phases
gives the epochs of 256 phases, and the closed-form one-degree-of-freedom non-central chi^2 gives
scipy's ncx2.sf and the same epochs to detect K."""
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy import stats

from rhofollow.stages.assess import assess_catalogue
from rhofollow.io.catalogue import read_catalogue
from rhofollow.physics import rvconfirm as rc
from rhofollow.stages.rv import _rng, planet_mass_and_k

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def demo():
    """Samples and K of the demo targets (invented scenario), a reduced sample count for speed."""
    cat = read_catalogue(ROOT / "examples" / "hts_candidates.csv", require_coords=True)
    out = []
    for a in assess_catalogue(cat.targets, n_samples=2000, seed=20261202):
        if a.ok:
            _, k, _ = planet_mass_and_k(a.samples, _rng(20261202, a.name, "mass"))
            out.append((a.samples, k))
    return out


@given(x=st.floats(0.01, 60.0), lam=st.floats(0.0, 500.0))
@settings(max_examples=200, deadline=None)
def test_ncx2_sf_1dof_equals_scipy(x, lam):
    # chi'^2_1(lam) = (Z + sqrt(lam))^2 (definition; reference library scipy.stats.ncx2).
    assert rc.ncx2_sf_1dof(x, lam) == pytest.approx(stats.ncx2.sf(x, 1, lam), rel=1e-9, abs=1e-14)


@pytest.mark.slow
@pytest.mark.parametrize("sigma", [2.0, 8.0])
def test_detect_k_same_epochs_as_scipy_ncx2(demo, sigma):
    # The bisection with scipy.stats.ncx2.sf (the previous evaluation) as the reference.
    thr = stats.chi2.isf(0.01, 1)
    for s, k in demo:
        w = s.weights / s.weights.sum()
        lam1 = k * k / (2 * sigma * sigma)
        ref = rc._smallest_n(lambda n: float(np.sum(w * stats.ncx2.sf(thr, 1, n * lam1))), 0.8, 3, 10000)
        assert rc.epochs_to_detect_k(k, sigma, s.weights) == ref, s.name


@pytest.mark.slow
@pytest.mark.parametrize("sigma", [1.5, 5.0])
def test_fisher_64_phases_same_epochs_as_256(demo, sigma, monkeypatch):
    # Midpoint rule on a smooth periodic integrand converges geometrically (Trefethen & Weideman
    # 2014, SIAM Review 56, 385): the default phase bands give the epochs of the previous 256.
    got, ref = [], []
    for s, k in demo:
        got.append(rc.fisher_epochs_to_confirm(s.e, s.omega, k, sigma, s.weights, seed=3))
    orig = rc.fisher_noncentrality
    monkeypatch.setattr(rc, "fisher_noncentrality", lambda *a, **kw: orig(*a, n_phase=256, **kw))
    for s, k in demo:
        ref.append(rc.fisher_epochs_to_confirm(s.e, s.omega, k, sigma, s.weights, seed=3))
    assert got == ref
    assert any(n is not None and n > 5 for n in got)   # the check is not only at the ladder floor


def test_fisher_phase_bands_match_fine_quadrature():
    # The per-epoch non-centrality with the default phase bands against 1,024 phases: e <= 0.6 on
    # 64 phases within 1e-5, e up to 0.8 on 256 within 1e-5 (common practice, no source:
    # quadrature convergence check), and the bands equal the old fixed 256 above e = 0.6.
    rng = np.random.default_rng(5)
    e = np.concatenate([rng.uniform(0.0, 0.6, 300), rng.uniform(0.6, 0.8, 100)])
    om = rng.uniform(0, 2 * np.pi, e.size)
    k = np.full(e.size, 20.0)
    a = rc.fisher_noncentrality(e, om, k, 3.0)
    b = rc.fisher_noncentrality(e, om, k, 3.0, n_phase=1024)
    np.testing.assert_allclose(a, b, rtol=1e-5, atol=1e-12)
    hi = e > 0.6
    np.testing.assert_array_equal(a[hi], rc.fisher_noncentrality(e[hi], om[hi], k[hi], 3.0, n_phase=256))
