"""Re-weighting posterior samples with measured RVs, and the LRT on data."""
import numpy as np
import pytest
from scipy import integrate

from rhofollow.io.instruments import Spectrograph
from rhofollow.io.rvdata import RVData
from rhofollow.physics.rv import rv_curve, rv_shape
from rhofollow.physics.rvupdate import conditional_k, lrt_on_data, rv_log_likelihood
from rhofollow.stages.rv import rv_record
from rhofollow.core.samples import SampleSet

P, T0 = 8.7, 2460100.25
INST = Spectrograph(name="TEST-SPEC", precision_ref_ms=1.5, vmag_ref=9.0, exposure_ref_s=900.0,
                    floor_ms=0.5, overhead_min=5.0)


def make_samples(n=4000, seed=0, e_max=0.9, name="HTS-104", **meta):
    rng = np.random.default_rng(seed)
    e = rng.uniform(0, e_max, n)
    return SampleSet(name=name, e=e, omega=rng.uniform(0, 2 * np.pi, n), b=0.3, k=0.03,
                     period=P + 1e-5 * rng.standard_normal(n), t0=T0 + 1e-4 * rng.standard_normal(n),
                     rho_star=1.4, mstar=rng.normal(0.9, 0.03, n), rstar=rng.normal(0.85, 0.02, n),
                     a_rs=20.0, inc=np.radians(89.0), teff=5200.0, weights=np.ones(n),
                     meta=dict(dict(vmag=9.5, teff_k=5200.0, logg_cgs=4.55), **meta))


def make_data(e, om, k, n=30, sigma=3.0, seed=1, offsets=(0.0,), name="HTS-104"):
    rng = np.random.default_rng(seed)
    t = np.sort(T0 + 200 * rng.random(n))
    inst = np.array([f"I{i % len(offsets)}" for i in range(n)])
    off = np.array([offsets[i % len(offsets)] for i in range(n)])
    y = rv_curve(t, P, T0, e, om, k, 0.0) + off + sigma * rng.standard_normal(n)
    return RVData(name, t, y, np.full(n, sigma), inst)


def test_marginal_k_matches_quadrature():
    # ln L with K marginalised (flat prior K > 0) against numerical integration of the Gaussian
    # likelihood over K (scipy.integrate.quad as reference library), offsets profiled.
    d = make_data(0.3, 1.0, 12.0, n=12, sigma=4.0)
    g = np.zeros(d.n, int)
    e = np.array([0.3, 0.1])
    om = np.array([1.0, 3.0])
    ll = rv_log_likelihood(d.bjd_tdb, d.rv_ms, d.rv_err_ms, g, np.full(2, P), np.full(2, T0), e, om)
    w = 1 / d.rv_err_ms**2

    def chi2(k, j):
        r = d.rv_ms - k * rv_shape((d.bjd_tdb - T0) / P, e[j], om[j])
        r = r - np.sum(w * r) / np.sum(w)
        return np.sum(w * r * r)

    base = chi2(12.0, 0)
    z = [integrate.quad(lambda k: np.exp(-0.5 * (chi2(k, j) - base)), 0, 200, points=[12.0])[0] for j in (0, 1)]
    assert ll[0] - ll[1] == pytest.approx(np.log(z[0] / z[1]), abs=1e-6)


def test_offsets_per_instrument_absorbed():
    # Constant offsets per instrument do not change the likelihood (flat-prior offsets, analytic).
    s = make_samples(300)
    d0 = make_data(0.4, 1.2, 20.0, offsets=(0.0, 0.0))
    d1 = make_data(0.4, 1.2, 20.0, offsets=(120.0, -55.0))
    args = (s.period, s.t0, s.e, s.omega)
    g = d0.groups()
    l0 = rv_log_likelihood(d0.bjd_tdb, d0.rv_ms, d0.rv_err_ms, g, *args, jitter_ms=2.0)
    l1 = rv_log_likelihood(d1.bjd_tdb, d1.rv_ms, d1.rv_err_ms, g, *args, jitter_ms=2.0)
    np.testing.assert_allclose(l1, l0, atol=1e-8)


def test_mass_mode_uses_given_k():
    # With K given per sample, ln L is -chi^2/2 of the offset-projected residuals (Gaussian).
    s = make_samples(5)
    d = make_data(0.2, 0.5, 10.0, n=8)
    k = np.full(5, 10.0)
    ll = rv_log_likelihood(d.bjd_tdb, d.rv_ms, d.rv_err_ms, np.zeros(8, int), s.period, s.t0, s.e, s.omega, k)
    r = d.rv_ms - 10.0 * rv_shape((d.bjd_tdb - s.t0[0]) / s.period[0], s.e[0], s.omega[0])
    r -= r.mean()
    assert ll[0] == pytest.approx(-0.5 * np.sum(r * r) / 9.0, rel=1e-9)


def test_chunking_does_not_change_result():
    s = make_samples(1000)
    d = make_data(0.3, 2.0, 15.0)
    a = (d.bjd_tdb, d.rv_ms, d.rv_err_ms, np.zeros(d.n, int), s.period, s.t0, s.e, s.omega)
    np.testing.assert_allclose(rv_log_likelihood(*a, chunk=97), rv_log_likelihood(*a, chunk=5000))


def test_update_recovers_eccentric_truth_and_confirms():
    # Injection: e = 0.4, omega = 1.2 rad, K = 25 m/s, 16 epochs at 5 m/s; the updated posterior
    # contains the truth and the data LRT confirms e > 0 (common practice, no source).
    s = make_samples(20000, seed=3)
    d = make_data(0.4, 1.2, 25.0, n=16, sigma=5.0, seed=4)
    rec = rv_record(s, INST, d, seed=5, n_null=500, n_alt=200)
    assert rec["ess_updated"] > 50
    assert rec["ecc_updated"]["q025"] < 0.4 < rec["ecc_updated"]["q975"]
    assert rec["ecc_updated"]["q84"] - rec["ecc_updated"]["q16"] < 0.25
    k = rec["k_updated_ms"]
    assert abs(k["q50"] - 25.0) < 1.5 * (k["q975"] - k["q025"])
    assert rec["ecc_confirmed"] is True and rec["n_rv"] == 16


def test_circular_truth_not_confirmed():
    s = make_samples(3000, seed=6)
    d = make_data(0.0, 0.0, 25.0, seed=7)
    rec = rv_record(s, INST, d, seed=8, n_null=500, n_alt=200)
    assert rec["ecc_confirmed"] is False
    assert rec["ecc_updated"]["q50"] < 0.1


def test_jitter_broadens_posterior():
    # Adding jitter in quadrature lowers the information: the spread of ln L shrinks.
    s = make_samples(500)
    d = make_data(0.3, 1.0, 15.0)
    a = (d.bjd_tdb, d.rv_ms, d.rv_err_ms, np.zeros(d.n, int), s.period, s.t0, s.e, s.omega)
    assert np.ptp(rv_log_likelihood(*a, jitter_ms=10.0)) < np.ptp(rv_log_likelihood(*a, jitter_ms=0.0))


def test_conditional_k_positive_and_seeded():
    s = make_samples(200)
    d = make_data(0.3, 1.0, 2.0, sigma=5.0)
    a = (d.bjd_tdb, d.rv_ms, d.rv_err_ms, np.zeros(d.n, int), s.period, s.t0, s.e, s.omega, 0.0)
    k1 = conditional_k(*a, rng=np.random.default_rng(1))
    k2 = conditional_k(*a, rng=np.random.default_rng(1))
    assert np.all(k1 >= 0) and np.array_equal(k1, k2)


def test_lrt_p_value_bounds():
    d = make_data(0.0, 0.0, 5.0, n=10, sigma=5.0)
    res = lrt_on_data(d.bjd_tdb, d.rv_ms, d.rv_err_ms, np.zeros(10, int), P, T0, n_null=99, seed=1)
    assert 0.01 <= res["p_value"] <= 1.0 and res["delta_chi2"] >= 0
