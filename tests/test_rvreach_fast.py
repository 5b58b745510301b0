"""The fast time-to-confirm at reachable epochs gives the numbers of the slow one.

* The power curve from running sums over the visits (:class:`rhofollow.physics.rvreach._RunningLRT`)
  gives the powers of the direct computation (every visit count from scratch, centred sums), and
  with ``power`` given the reported point's threshold is the direct one to the last bit.
* The exposure choice by bisection on the visit counts gives the exposure, error and Fisher visit
  count of the scan over every count.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from rhofollow.io.instruments import Spectrograph
from rhofollow.physics import rvreach
from rhofollow.physics.rvnoise import epoch_precision

_INST = Spectrograph("TEST-RV", precision_ref_ms=1.6, vmag_ref=9.0, exposure_ref_s=1200.0, floor_ms=0.8,
                     overhead_min=7.0, exposure_min_s=120.0, exposure_max_s=2700.0)


def _case(seed, n=300):
    rng = np.random.default_rng(seed)
    e = np.clip(rng.beta(1.2, 4.0, n) * rng.uniform(0.5, 1.5), 0.0, 0.9)
    om = rng.uniform(0, 2 * np.pi, n)
    k = np.exp(rng.normal(np.log(rng.uniform(3, 80)), 0.2, n))
    nights = int(rng.integers(5, 40))
    centre = rng.uniform(0, 1)
    width = rng.uniform(0.02, 0.5)
    pool = rvreach.EpochPool([(centre + width * (rng.random(int(rng.integers(1, 12))) - 0.5)) % 1.0
                              for _ in range(nights)])
    return e, om, k, pool, float(rng.uniform(1.0, 15.0)), float(rng.uniform(0.0, 0.6))


@settings(max_examples=25, deadline=None)
@given(st.integers(0, 10_000))
def test_running_sums_give_the_direct_powers(seed):
    # Same statistic written two ways (centred sums per visit count vs raw running sums,
    # Frisch-Waugh-Lovell; common practice, no source): the powers must be equal, the thresholds
    # equal to rounding.
    e, om, k, pool, sigma, loss = _case(seed)
    lad = rvreach.visit_ladder(pool.n_nights)
    kw = dict(loss=loss, seed=seed, n_alt=96, n_null=320, n_batches=8)
    a = rvreach.power_curve_at_pool(e, om, k, sigma, pool, lad, method="direct", **kw)
    b = rvreach.power_curve_at_pool(e, om, k, sigma, pool, lad, **kw)
    assert b["n"] == a["n"] and b["power"] == a["power"]
    # the raw sums lose the digits of the signal's own size: the statistic is a difference of gains
    # up to (K / sigma)^2 N ~ 1e5 here, so 1e-16 relative rounding leaves ~1e-10 on a threshold ~5
    assert np.allclose(b["threshold"], a["threshold"], rtol=1e-7, atol=1e-7)
    c = rvreach.power_curve_at_pool(e, om, k, sigma, pool, lad, power=0.8, **kw)
    i = next((j for j, p in enumerate(a["power"]) if p >= 0.8), len(lad) - 1)
    assert c["power"] == a["power"] and c["threshold"][i] == a["threshold"][i]


def test_method_is_checked():
    e, om, k, pool, sigma, _ = _case(1)
    with pytest.raises(ValueError, match="method"):
        rvreach.power_curve_at_pool(e, om, k, sigma, pool, [5], method="fast")


def _scan(lam, vmag, jitter, n_cap, loss, fap=0.01, power=0.8, n_candidates=12):
    """The exposure choice evaluated at every visit count (the reference the bisection must equal)."""
    inst = _INST
    w = np.ones(lam.size) / lam.size
    t = np.geomspace(inst.exposure_min_s, inst.exposure_max_s, n_candidates)
    t = np.unique(np.clip(np.round(t), math.ceil(inst.exposure_min_s), math.floor(inst.exposure_max_s)))
    sig = epoch_precision(vmag, t, inst.precision_ref_ms, inst.vmag_ref, inst.exposure_ref_s, inst.floor_ms,
                          jitter)
    thr = stats.chi2.isf(fap, 2)   # reference library scipy.stats (chi2, ncx2)
    ns = np.arange(rvreach.N_MIN, max(n_cap, rvreach.N_MIN) + 1)
    nc = (ns[None, :, None] * (1.0 - loss) * lam[None, None, :]) / (sig[:, None, None] ** 2)
    pw = np.tensordot(stats.ncx2.sf(thr, 2, nc), w, axes=([2], [0]))
    reach = pw >= power
    if reach.any():
        n_need = np.where(reach.any(axis=1), ns[np.argmax(reach, axis=1)], np.iinfo(int).max)
        hours = np.where(reach.any(axis=1), n_need * (t + inst.overhead_s), np.inf)
        i = int(np.argmin(hours))
        return float(t[i]), float(sig[i]), int(n_need[i])
    i = int(np.argmax(pw[:, -1]))
    return float(t[i]), float(sig[i]), None


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 10_000))
def test_exposure_bisection_equals_the_scan(seed):
    rng = np.random.default_rng(seed)
    lam = np.exp(rng.normal(rng.uniform(-3.0, 6.0), 1.0, 200))
    vmag, jitter = float(rng.uniform(8, 14)), float(rng.uniform(0.5, 5))
    n_cap, loss = int(rng.integers(3, 200)), float(rng.uniform(0, 0.5))
    got = rvreach.choose_exposure(lam, None, vmag, jitter, _INST, n_cap=n_cap, loss=loss)
    assert (got["exposure_s"], got["sigma_ms"], got["n_fisher"]) == _scan(lam, vmag, jitter, n_cap, loss)


def test_exposure_visit_counts_must_increase():
    with pytest.raises(ValueError, match="increasing"):
        rvreach.choose_exposure(np.ones(5), None, 10.0, 2.0, _INST, n_cap=20, ns=[10, 8])
