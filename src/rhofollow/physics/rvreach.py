"""The eccentric-vs-circular RV test at the epochs a site can actually observe.

:mod:`rhofollow.physics.rvconfirm` simulates the likelihood-ratio test (LRT) at epochs spread
uniformly in orbital phase. Here the epochs are drawn from a *pool of reachable epochs*: for every
night of the date range on which a visit fits, the orbital phases (from mid-transit, 0..1) of the
visit times the site allows (altitude / airmass, twilight, Moon, horizon mask: the visibility
engine decides, upstream). A visit set of N requested visits takes N distinct nights at random
(one visit per night, as the campaign places them) and one reachable time at random in each; each
requested visit is then lost with probability ``loss`` (weather, technical time), independently.
The test is the one of :mod:`rhofollow.physics.rvconfirm` (profiled K and offset, (e, omega) grid,
Delta chi^2 = chi^2_circ - min chi^2_ecc; Neyman-Pearson likelihood-ratio test, Wilks 1938, Ann.
Math. Stat. 9, 60) with its false-alarm threshold from simulations under the circular null at the
same epoch sets.

Nested epoch sets give common random numbers across N: the first N nights of one random order of
the reachable nights, and the first N noise draws, so the power curve over N is smooth.

Units: phases in cycles from mid-transit, velocities m/s, exposures and overheads s, hours h.
Pure numpy / scipy: no I/O.
"""
from __future__ import annotations

import math

import numpy as np
from scipy import stats

from rhofollow.physics.rv import circular_shape, rv_shape
from rhofollow.physics.rvconfirm import EccGrid, ecc_grid, fisher_lambda_at_phases
from rhofollow.physics.rvnoise import epoch_precision

__all__ = ["EpochPool", "N_MIN", "visit_ladder", "power_curve_at_pool", "visits_for_power",
           "fisher_noncentrality_at", "choose_exposure", "choose_exposure_uniform", "uniform_pool"]

#: Fewest visits the eccentric model can be tested with (gamma, K, e cos w, e sin w and one more).
N_MIN = 5


class EpochPool:
    """Reachable orbital phases, grouped by night.

    Parameters
    ----------
    nights : sequence of 1-d arrays
        For each night with at least one reachable visit time, the orbital phases (0..1) of those
        times. Empty arrays are dropped.
    """

    def __init__(self, nights):
        arrs = [np.asarray(a, float).ravel() % 1.0 for a in nights]
        arrs = [a for a in arrs if a.size]
        self.n_nights = len(arrs)
        self.counts = np.array([a.size for a in arrs], int)
        width = int(self.counts.max()) if arrs else 0
        self.table = np.zeros((self.n_nights, max(width, 1)))
        for i, a in enumerate(arrs):
            self.table[i, :a.size] = a

    @property
    def phases(self) -> np.ndarray:
        """Every reachable phase (flattened)."""
        return np.concatenate([self.table[i, :c] for i, c in enumerate(self.counts)]) if self.n_nights \
            else np.zeros(0)

    def draw(self, n_sets: int, n_visits: int, rng: np.random.Generator) -> np.ndarray:
        """Phases (n_sets, n_visits): distinct nights in random order, one random time in each."""
        if n_visits > self.n_nights:
            raise ValueError(f"{n_visits} visits requested from {self.n_nights} reachable nights")
        order = np.argsort(rng.random((n_sets, self.n_nights)), axis=1)[:, :n_visits]
        pick = np.floor(rng.random((n_sets, n_visits)) * self.counts[order]).astype(int)
        return self.table[order, pick]


def uniform_pool(n_nights: int, per_night: int = 64, seed=0) -> EpochPool:
    """A pool with phases spread uniformly (for cross-checks against the uniform-phase answer)."""
    rng = np.random.default_rng(seed)
    return EpochPool([rng.random(per_night) for _ in range(n_nights)])


def visit_ladder(n_max: int, n_min: int = N_MIN) -> list[int]:
    """Visit counts at which the power curve is evaluated: about 12 % apart, always ending at n_max."""
    if n_max < n_min:
        return []
    out, n = [], n_min
    while n < n_max:
        out.append(n)
        n = max(n + 1, int(round(n * 1.12)))
    out.append(int(n_max))
    return out


def _draw_indices(weights, n, rng, size):
    w = np.ones(size) / size if weights is None else np.asarray(weights, float) / np.sum(weights)
    cw = np.cumsum(w)
    cw[-1] = 1.0
    return rng.permutation(np.searchsorted(cw, (rng.random() + np.arange(n)) / n))


def _chi2(y, s, w):
    """Profiled chi^2 (one offset, K linear) for data y (B, D, N), templates s (B, G, N), weights
    w (B, N) (0 for a lost visit): returns (B, D, G)."""
    sw = w.sum(axis=-1)[:, None, None]
    sw = np.where(sw > 0, sw, 1.0)
    wy = w[:, None, :]
    yp = y - np.sum(y * wy, axis=-1, keepdims=True) / sw
    sp = s - np.sum(s * wy, axis=-1, keepdims=True) / sw
    yy = np.sum(wy * yp * yp, axis=-1)                       # (B, D)
    ss = np.sum(wy * sp * sp, axis=-1)                       # (B, G)
    ys = (yp * wy) @ np.swapaxes(sp, -1, -2)                 # (B, D, G)
    with np.errstate(invalid="ignore", divide="ignore"):
        gain = np.where(ss[:, None, :] > 1e-12, ys * ys / ss[:, None, :], 0.0)
    return yy[..., None] - gain


def power_curve_at_pool(e, omega, k, sigma, pool: EpochPool, ladder, *, loss: float = 0.0,
                        weights=None, fap: float = 0.01, seed=0, n_alt: int = 400, n_null: int = 2000,
                        n_batches: int = 16, grid: EccGrid | None = None) -> dict:
    """Simulated power of the eccentricity LRT at each requested visit count of ``ladder``.

    Parameters
    ----------
    e, omega, k : ndarray (S,), posterior samples (eccentricity, omega [rad], K [m/s])
    sigma : float, per-visit RV error including jitter (m/s)
    pool : reachable epochs (:class:`EpochPool`)
    ladder : increasing visit counts, each at most ``pool.n_nights``
    loss : probability that a requested visit is lost (weather, technical), 0 <= loss < 1
    weights : posterior weights (S,) or None
    fap : false-alarm probability of the test
    seed : int or Generator (the same seed gives the same curve)
    n_alt, n_null : simulated data sets from the posterior and under the circular null, per N
    n_batches : independent epoch sets (data sets are split evenly among them)

    Returns
    -------
    dict ``n`` (list of int), ``power`` (list of float), ``threshold`` (list, Delta chi^2 at the
    false-alarm level per N).
    """
    ladder = [int(n) for n in ladder]
    if not ladder:
        return {"n": [], "power": [], "threshold": []}
    if not 0.0 <= loss < 1.0:
        raise ValueError(f"loss fraction must lie in [0, 1), got {loss}")
    n_max = ladder[-1]
    rng = np.random.default_rng(seed)
    grid = grid or ecc_grid()
    e, omega, k = (np.asarray(a, float) for a in (e, omega, k))
    nb = n_batches
    na, nn = -(-n_alt // nb), -(-n_null // nb)
    ph = pool.draw(nb, n_max, rng)                                        # (B, N)
    kept = (rng.random((nb, n_max)) >= loss).astype(float)                # lost visits weigh 0
    ia = _draw_indices(weights, nb * na, rng, e.size).reshape(nb, na)
    i0 = _draw_indices(weights, nb * nn, rng, e.size).reshape(nb, nn)
    ks = k / float(sigma)                                                 # data in units of sigma
    y_alt = ks[ia][..., None] * rv_shape(ph[:, None, :], e[ia][..., None], omega[ia][..., None]) \
        + rng.standard_normal((nb, na, n_max))
    y_null = ks[i0][..., None] * circular_shape(ph)[:, None, :] + rng.standard_normal((nb, nn, n_max))
    templ = grid.templates(ph)                                            # (B, G, N)
    circ = circular_shape(ph)[:, None, :]                                 # (B, 1, N)
    out = {"n": [], "power": [], "threshold": []}
    for n in ladder:
        w = kept[:, :n]
        sl = (Ellipsis, slice(0, n))
        d = []
        for y in (y_alt, y_null):
            chi_c = _chi2(y[sl], circ[sl], w)[..., 0]
            chi_e = _chi2(y[sl], templ[sl], w).min(axis=-1)
            d.append(np.maximum(chi_c - chi_e, 0.0).ravel())
        d_alt, d_null = d[0][:n_alt], d[1][:n_null]
        thr = float(np.quantile(d_null, 1.0 - fap))
        out["n"].append(n)
        out["power"].append(float(np.mean(d_alt > thr)))
        out["threshold"].append(thr)
    return out


def visits_for_power(curve: dict, power: float):
    """Smallest visit count of a power curve reaching ``power`` (None when none does)."""
    for n, p in zip(curve["n"], curve["power"]):
        if p >= power:
            return int(n)
    return None


def fisher_noncentrality_at(e, omega, k, phases, step: float = 1e-4) -> np.ndarray:
    """Per-visit Fisher non-centrality of the eccentricity test at unit RV error, per sample.

    As :func:`rhofollow.physics.rvconfirm.fisher_noncentrality` but with the Fisher matrix averaged
    over the given ``phases`` (the reachable epochs) instead of a uniform phase grid. Divide by
    sigma^2 (m/s) for the non-centrality per visit at error sigma.
    """
    e = np.atleast_1d(np.asarray(e, float))
    om = np.atleast_1d(np.asarray(omega, float))
    k = np.atleast_1d(np.asarray(k, float))
    ph = np.asarray(phases, float).ravel()
    # c + 1e-9 I: with one phase only, gamma and K are degenerate
    return np.maximum(fisher_lambda_at_phases(e, om, k, ph, 1.0, step, ridge=1e-9), 0.0)


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
    # power (candidates, N) -- posterior mean over samples
    nc = (ns[None, :, None] * (1.0 - loss) * lam[None, None, :]) / (sig[:, None, None] ** 2)
    pw = np.tensordot(stats.ncx2.sf(thr, 2, nc), w, axes=([2], [0]))
    reach = pw >= power
    n_need = np.where(reach.any(axis=1), ns[np.argmax(reach, axis=1)], np.iinfo(int).max)
    if np.any(reach.any(axis=1)):
        hours = np.where(n_need < np.iinfo(int).max, n_need * (t + inst.overhead_s), np.inf)
        i = int(np.argmin(hours))
        return {"exposure_s": float(t[i]), "sigma_ms": float(sig[i]), "n_fisher": int(n_need[i]),
                "reason": "fewest hours to the power (Fisher estimate at the reachable epochs)"}
    i = int(np.argmax(pw[:, -1]))
    return {"exposure_s": float(t[i]), "sigma_ms": float(sig[i]), "n_fisher": None,
            "reason": "highest power at the most visits the range allows (Fisher estimate)"}


def choose_exposure_uniform(e, omega, k, weights, vmag, jitter_ms, inst, *, fap: float = 0.01,
                            power: float = 0.8, ladder=None, max_samples: int = 1000, seed=0):
    """:func:`choose_exposure` for epochs spread uniformly in phase (no site or date range known).

    The posterior is resampled to at most ``max_samples`` draws by weight (seeded); visit counts
    are tried on ``ladder`` (default :data:`rhofollow.physics.rvconfirm.N_LADDER`).
    """
    from rhofollow.physics.rvconfirm import N_LADDER

    e = np.atleast_1d(np.asarray(e, float))
    omega, k = np.atleast_1d(np.asarray(omega, float)), np.atleast_1d(np.asarray(k, float))
    rng = np.random.default_rng(seed)
    n = min(max_samples, e.size)
    idx = _draw_indices(weights, n, rng, e.size)
    ph = (np.arange(256) + 0.5) / 256
    lam = fisher_noncentrality_at(e[idx], omega[idx], k[idx], ph)
    lad = list(ladder or N_LADDER)
    return choose_exposure(lam, None, vmag, jitter_ms, inst, n_cap=lad[-1], fap=fap, power=power, ns=lad)
