"""The exposure per RV visit that reaches the power wanted in the fewest hours (Fisher estimate).

Split from :mod:`rhofollow.physics.rvreach` (which re-exports these names): the per-visit Fisher
non-centrality of the eccentricity test at given (reachable or uniform) phases, and the choice of
the exposure among candidates in the instrument's limits from its precision model.

Units: phases in cycles from mid-transit, velocities m/s, exposures and overheads s.
Pure numpy / scipy: no I/O.
"""
from __future__ import annotations

import math

import numpy as np
from scipy import stats

from rhofollow.physics.rvconfirm import fisher_lambda_at_phases, fisher_noncentrality
from rhofollow.physics.rvnoise import epoch_precision

__all__ = ["N_MIN", "fisher_noncentrality_at", "choose_exposure", "choose_exposure_uniform"]

#: Fewest visits the eccentric model can be tested with (gamma, K, e cos w, e sin w and one more).
N_MIN = 5


def _draw_indices(weights, n, rng, size):
    w = np.ones(size) / size if weights is None else np.asarray(weights, float) / np.sum(weights)
    cw = np.cumsum(w)
    cw[-1] = 1.0
    return rng.permutation(np.searchsorted(cw, (rng.random() + np.arange(n)) / n))


def fisher_noncentrality_at(e, omega, k, phases) -> np.ndarray:
    """Per-visit Fisher non-centrality of the eccentricity test at unit RV error, per sample.

    As :func:`rhofollow.physics.rvconfirm.fisher_noncentrality` but with the Fisher matrix averaged
    over the given ``phases`` (the reachable epochs) instead of a uniform phase grid.

    Parameters
    ----------
    e, omega, k : posterior samples (eccentricity, omega [rad], K [m/s])
    phases : the phases (0..1) the Fisher matrix is averaged over

    Returns
    -------
    ndarray (S,): the non-centrality per visit at unit RV error; divide by sigma^2 ((m/s)^2) for
    the non-centrality per visit at error sigma
    """
    e = np.atleast_1d(np.asarray(e, float))
    om = np.atleast_1d(np.asarray(omega, float))
    k = np.atleast_1d(np.asarray(k, float))
    ph = np.asarray(phases, float).ravel()
    # c + 1e-9 I: with one phase only, gamma and K are degenerate
    return np.maximum(fisher_lambda_at_phases(e, om, k, ph, 1.0, ridge=1e-9), 0.0)


def choose_exposure(lam_unit, weights, vmag, jitter_ms, inst, *, n_cap: int, loss: float = 0.0,
                    fap: float = 0.01, power: float = 0.8, n_candidates: int = 12, ns=None):
    """Exposure per visit that minimises the hours to reach ``power``, within the instrument limits.

    For candidate exposures spaced geometrically in [exposure_min_s, exposure_max_s], the per-visit
    error sigma(t) follows the instrument's precision model
    (:func:`rhofollow.physics.rvnoise.epoch_precision`); the Fisher estimate of the power at N
    requested visits is the posterior mean of P[chi'^2_2(N (1 - loss) lambda_1 / sigma^2) >
    chi^2_{2,1-fap}] (scipy.stats.ncx2; Wilks 1938). The chosen exposure gives the fewest hours
    N(t) (t + overhead) with N(t) <= ``n_cap``; when no candidate reaches the power within the cap
    the one with the highest power at the cap is taken.

    Parameters
    ----------
    lam_unit : ndarray (S,), :func:`fisher_noncentrality_at` at unit error
    weights : ndarray (S,) or None
    vmag, jitter_ms : host V magnitude and stellar jitter (m/s)
    inst : spectrograph (attributes precision_ref_ms, vmag_ref, exposure_ref_s, floor_ms,
        exposure_min_s, exposure_max_s, overhead_s)
    n_cap : most visits the date range allows
    ns : visit counts tried (default every integer from :data:`N_MIN` to ``n_cap``)

    Returns
    -------
    dict ``exposure_s``, ``sigma_ms``, ``n_fisher`` (int or None), ``reason`` (text).
    """
    lam = np.atleast_1d(np.asarray(lam_unit, float))
    w = np.ones(lam.size) / lam.size if weights is None else np.asarray(weights, float) / np.sum(weights)
    t = np.geomspace(inst.exposure_min_s, inst.exposure_max_s, n_candidates) \
        if inst.exposure_max_s > inst.exposure_min_s else np.array([inst.exposure_min_s])
    # whole seconds inside the limits (the budget counts whole seconds)
    t = np.unique(np.clip(np.round(t), math.ceil(inst.exposure_min_s), math.floor(inst.exposure_max_s)))
    sig = epoch_precision(vmag, t, inst.precision_ref_ms, inst.vmag_ref, inst.exposure_ref_s,
                          inst.floor_ms, jitter_ms)
    thr = stats.chi2.isf(fap, 2)
    n_cap = max(int(n_cap), N_MIN)
    ns = np.arange(N_MIN, n_cap + 1) if ns is None else np.asarray([n for n in ns if n <= n_cap], int)
    if ns.size == 0 or np.any(np.diff(ns) <= 0):
        raise ValueError(f"visit counts must be increasing and include one <= {n_cap}, got {ns.tolist()}")
    p_cap, n_need = _first_reaching(ns, lam, w, sig, loss, thr, power)
    if np.any(n_need < np.iinfo(int).max):
        hours = np.where(n_need < np.iinfo(int).max, n_need * (t + inst.overhead_s), np.inf)
        i = int(np.argmin(hours))
        return {"exposure_s": float(t[i]), "sigma_ms": float(sig[i]), "n_fisher": int(n_need[i]),
                "reason": "fewest hours to the power (Fisher estimate at the reachable epochs)"}
    i = int(np.argmax(p_cap))
    return {"exposure_s": float(t[i]), "sigma_ms": float(sig[i]), "n_fisher": None,
            "reason": "highest power at the most visits the range allows (Fisher estimate)"}


def _fisher_power(n, lam, w, sig, loss, thr):
    """Fisher power at visit counts ``n`` (C,) for per-visit errors ``sig`` (C,): posterior mean."""
    nc = (n[:, None] * (1.0 - loss) * lam[None, :]) / (sig[:, None] ** 2)
    return stats.ncx2.sf(thr, 2, nc) @ w


def _first_reaching(ns, lam, w, sig, loss, thr, power):
    """Per candidate error: the Fisher power at the last count of ``ns`` and the first count whose
    power reaches ``power`` (the int maximum when none does).

    The power rises with N (the non-central chi^2 survival function rises with its
    non-centrality, which is proportional to N), so the first count is found by bisection on
    ``ns``: about log2(len(ns)) evaluations per candidate instead of len(ns), with the same answer
    as scanning every count.
    """
    last = ns.size - 1
    p_cap = _fisher_power(np.full(sig.size, ns[last]), lam, w, sig, loss, thr)
    lo = np.full(sig.size, -1)                  # power below ``power`` at lo (or lo = -1)
    hi = np.where(p_cap >= power, last, -1)     # power reaches it at hi (-1: never)
    while True:
        act = np.flatnonzero((hi >= 0) & (hi - lo > 1))
        if act.size == 0:
            break
        mid = (lo[act] + hi[act]) // 2
        ok = _fisher_power(ns[mid], lam, w, sig[act], loss, thr) >= power
        hi[act[ok]] = mid[ok]
        lo[act[~ok]] = mid[~ok]
    return p_cap, np.where(hi >= 0, ns[np.maximum(hi, 0)], np.iinfo(int).max)


def choose_exposure_uniform(e, omega, k, weights, vmag, jitter_ms, inst, *, fap: float = 0.01,
                            power: float = 0.8, ladder=None, max_samples: int = 1000, seed=0):
    """:func:`choose_exposure` for epochs spread uniformly in phase (no site or date range known).

    The posterior is resampled to at most ``max_samples`` draws by weight (seeded); visit counts
    are tried on ``ladder`` (default :data:`rhofollow.physics.rvconfirm.N_LADDER`).

    Parameters
    ----------
    e, omega, k, weights : posterior samples (omega in rad, K in m/s) and their weights (or None)
    vmag, jitter_ms, inst : as :func:`choose_exposure`
    fap, power, ladder, max_samples, seed : test settings, visit counts tried, resampling

    Returns
    -------
    dict, as :func:`choose_exposure`
    """
    from rhofollow.physics.rvconfirm import N_LADDER

    e = np.atleast_1d(np.asarray(e, float))
    omega, k = np.atleast_1d(np.asarray(omega, float)), np.atleast_1d(np.asarray(k, float))
    rng = np.random.default_rng(seed)
    n = min(max_samples, e.size)
    idx = _draw_indices(weights, n, rng, e.size)
    # uniform phases: the midpoint rule at the e-dependent number of phases of fisher_noncentrality
    lam = np.maximum(fisher_noncentrality(e[idx], omega[idx], k[idx], 1.0), 0.0)
    lad = list(ladder or N_LADDER)
    return choose_exposure(lam, None, vmag, jitter_ms, inst, n_cap=lad[-1], fap=fap, power=power, ns=lad)
