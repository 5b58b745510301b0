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
the reachable nights, and the first N noise draws, so the power curve over N is smooth. Nesting
also lets the statistic grow with N: weighted sums over the visits are carried from one visit
count to the next (:class:`_RunningLRT`), so the products with the (e, omega) grid cost one pass
over the visits for the whole curve; the reported point is checked against the direct
computation (:func:`power_curve_at_pool`, ``power``).

Units: phases in cycles from mid-transit, velocities m/s, exposures and overheads s, hours h.
Pure numpy / scipy: no I/O.
"""
from __future__ import annotations

import numpy as np

from rhofollow.physics.rv import circular_shape, rv_shape
from rhofollow.physics.rvconfirm import EccGrid, ecc_grid
# the exposure choice lives in rvexposure (re-exported here, where callers find it)
from rhofollow.physics.rvexposure import (N_MIN, _draw_indices, choose_exposure,  # noqa: F401
                                          choose_exposure_uniform, fisher_noncentrality_at)

__all__ = ["EpochPool", "N_MIN", "visit_ladder", "power_curve_at_pool", "visits_for_power",
           "fisher_noncentrality_at", "choose_exposure", "choose_exposure_uniform", "uniform_pool"]



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
        """Epoch sets: distinct nights in random order, one random reachable time in each.

        Parameters
        ----------
        n_sets, n_visits : number of epoch sets and visits per set (at most ``n_nights``)
        rng : numpy Generator

        Returns
        -------
        ndarray (n_sets, n_visits), orbital phases (cycles from mid-transit)
        """
        if n_visits > self.n_nights:
            raise ValueError(f"{n_visits} visits requested from {self.n_nights} reachable nights")
        order = np.argsort(rng.random((n_sets, self.n_nights)), axis=1)[:, :n_visits]
        pick = np.floor(rng.random((n_sets, n_visits)) * self.counts[order]).astype(int)
        return self.table[order, pick]


def uniform_pool(n_nights: int, per_night: int = 64, seed=0) -> EpochPool:
    """A pool with phases spread uniformly (for cross-checks against the uniform-phase answer).

    Parameters
    ----------
    n_nights, per_night : nights and random phases per night
    seed : seed of the phases

    Returns
    -------
    EpochPool
    """
    rng = np.random.default_rng(seed)
    return EpochPool([rng.random(per_night) for _ in range(n_nights)])


def visit_ladder(n_max: int, n_min: int = N_MIN) -> list[int]:
    """Visit counts at which the power curve is evaluated: about 12 % apart, always ending at n_max.

    Parameters
    ----------
    n_max, n_min : largest and smallest visit count

    Returns
    -------
    list of int, increasing (empty when n_max < n_min)
    """
    if n_max < n_min:
        return []
    out, n = [], n_min
    while n < n_max:
        out.append(n)
        n = max(n + 1, int(round(n * 1.12)))
    out.append(int(n_max))
    return out


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


def _direct_step(sims, n):
    """Delta chi^2 of the alternative and null data sets at the first ``n`` visits, each visit count
    computed from scratch (centred sums): the reference the running sums are checked against."""
    y_alt, y_null, templ, circ, kept, n_alt, n_null, off = sims
    n = n + off
    w = kept[:, :n]
    sl = (Ellipsis, slice(0, n))
    d = []
    for y in (y_alt, y_null):
        chi_c = _chi2(y[sl], circ[sl], w)[..., 0]
        chi_e = _chi2(y[sl], templ[sl], w).min(axis=-1)
        d.append(np.maximum(chi_c - chi_e, 0.0).ravel())
    return d[0][:n_alt], d[1][:n_null]


class _RunningLRT:
    """Delta chi^2 at increasing visit counts from running weighted sums.

    With offsets profiled, chi^2 = S_yy - S_y^2/S_w - (S_ys - S_y S_s / S_w)^2 / (S_ss - S_s^2/S_w)
    (the centred sums of :func:`_chi2` written with raw sums; Frisch-Waugh-Lovell), so
    Delta chi^2 = max_grid gain_ecc - gain_circ and S_yy cancels. Going from n to n' visits adds
    the sums of visits n..n'-1 only: the products over the (e, omega) grid cost one pass over the
    visits in all instead of one per visit count. Equal to :func:`_direct_step` up to rounding:
    raw instead of centred sums lose digits of the size of the gains, ~(K / sigma)^2 N, so a
    threshold may differ by ~1e-16 of that (1e-10 at K / sigma = 80, N = 20).
    """

    def __init__(self, y_alt, y_null, templ, circ, kept):
        self.na = y_alt.shape[1]
        self.y = np.concatenate([y_alt, y_null], axis=1)                 # (B, D, N)
        self.s = np.concatenate([circ, templ], axis=1)                   # (B, 1 + G, N), circular first
        self.ws = self.s * kept[:, None, :]
        self.kept = kept
        nb, nd, _ = self.y.shape
        ng = self.s.shape[1]
        self.sw = np.zeros(nb)
        self.sy = np.zeros((nb, nd))
        self.ss = np.zeros((nb, ng))
        self.sss = np.zeros((nb, ng))
        self.sys = np.zeros((nb, nd, ng))
        self.buf = np.empty((nd, ng))
        self.m = 0

    def advance(self, n):
        """Delta chi^2 at the first ``n`` visits, after adding the visits since the last call.

        Parameters
        ----------
        n : int, visit count (at least the previous call's)

        Returns
        -------
        (ndarray (B, Da), ndarray (B, Dn)): Delta chi^2 (dimensionless) of the alternative and the
        null data sets.
        """
        seg = slice(self.m, n)
        y, ws, kp = self.y[..., seg], self.ws[..., seg], self.kept[:, seg]
        self.sw += kp.sum(axis=-1)
        self.sy += np.sum(y * kp[:, None, :], axis=-1)
        self.ss += ws.sum(axis=-1)
        self.sss += np.sum(ws * self.s[..., seg], axis=-1)
        self.sys += y @ np.swapaxes(ws, -1, -2)
        self.m = n
        sw = np.where(self.sw > 0, self.sw, 1.0)[:, None]
        ss = self.sss - self.ss * self.ss / sw                            # (B, 1 + G)
        with np.errstate(divide="ignore"):
            inv = np.where(ss > 1e-12, 1.0 / np.where(ss > 1e-12, ss, 1.0), 0.0)
        mean_y = self.sy / sw
        d = np.empty(self.sy.shape)
        b = self.buf
        for i in range(d.shape[0]):       # one epoch set at a time: its (D, G) block stays in cache
            np.multiply(mean_y[i][:, None], self.ss[i][None, :], out=b)
            np.subtract(self.sys[i], b, out=b)                            # centred S_ys
            np.square(b, out=b)
            np.multiply(b, inv[i][None, :], out=b)                        # gain per template
            d[i] = b[:, 1:].max(axis=-1) - b[:, 0]
        np.maximum(d, 0.0, out=d)
        return d[:, :self.na], d[:, self.na:]


def _simulate(e, omega, k, sigma, pool, n_max, loss, weights, rng, n_alt, n_null, n_batches, grid,
              prior=None):
    """Epoch sets, kept visits and simulated data sets (in units of sigma) of one power curve.

    ``prior`` = (phases, errors in m/s) of the RV epochs already in hand, or None: they come first
    in every epoch set, are never lost, weigh (sigma / error)^2, and their data are drawn from the
    same truth as the new visits (after every other draw, so the new visits' draws do not change).
    """
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
    off = 0
    if prior is not None and np.size(prior[0]):
        pp = np.asarray(prior[0], float).ravel() % 1.0
        rel = np.broadcast_to(np.asarray(prior[1], float) / float(sigma), pp.shape)
        if not np.all(np.isfinite(rel) & (rel > 0)):
            raise ValueError("the errors of the RV epochs in hand must be positive and finite")
        off = pp.size
        ya = ks[ia][..., None] * rv_shape(pp, e[ia][..., None], omega[ia][..., None]) \
            + rel * rng.standard_normal((nb, na, off))
        yn = ks[i0][..., None] * circular_shape(pp) + rel * rng.standard_normal((nb, nn, off))
        y_alt, y_null = np.concatenate([ya, y_alt], axis=-1), np.concatenate([yn, y_null], axis=-1)
        templ = np.concatenate([np.broadcast_to(grid.templates(pp), (nb, grid.size, off)), templ], axis=-1)
        circ = np.concatenate([np.broadcast_to(circular_shape(pp), (nb, 1, off)), circ], axis=-1)
        kept = np.concatenate([np.broadcast_to(1.0 / rel**2, (nb, off)), kept], axis=-1)
    return y_alt, y_null, templ, circ, kept, n_alt, n_null, off


def power_curve_at_pool(e, omega, k, sigma, pool: EpochPool, ladder, *, loss: float = 0.0,
                        weights=None, fap: float = 0.01, seed=0, n_alt: int = 400, n_null: int = 2000,
                        n_batches: int = 16, grid: EccGrid | None = None, power: float | None = None,
                        method: str = "running", prior_phases=None, prior_sigma=None) -> dict:
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
    power : the power wanted, or None. When given, the first count reaching it (the last count
        when none does) is recomputed from scratch: its power and threshold are exactly those of
        ``method="direct"`` (the running sums differ from them by rounding only, see
        :class:`_RunningLRT`);
        should its power differ, the whole curve is recomputed directly.
    method : ``"running"`` (running sums over the visits, :class:`_RunningLRT`) or ``"direct"``
        (every count from scratch; the reference, several times slower)
    prior_phases, prior_sigma : phases (0..1) and errors (m/s, jitter included) of the RV epochs
        already in hand, or None. They enter every simulated data set (never lost; their values
        drawn from the same truth as the new visits'), and the counts of ``ladder`` are the new
        visits on top of them.

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
    if method not in ("running", "direct"):
        raise ValueError(f"method must be 'running' or 'direct', got {method!r}")
    rng = np.random.default_rng(seed)
    e, omega, k = (np.asarray(a, float) for a in (e, omega, k))
    sims = _simulate(e, omega, k, sigma, pool, ladder[-1], loss, weights, rng, n_alt, n_null, n_batches,
                     grid or ecc_grid(), None if prior_phases is None else (prior_phases, prior_sigma))
    step = (lambda n: _direct_step(sims, n)) if method == "direct" else _running_steps(sims)
    out = _curve(ladder, step, fap)
    if power is not None and method == "running":
        i = next((j for j, p in enumerate(out["power"]) if p >= power), len(ladder) - 1)
        p_i, thr_i = _point(*_direct_step(sims, ladder[i]), fap)
        if p_i != out["power"][i]:
            return _curve(ladder, lambda n: _direct_step(sims, n), fap)
        out["threshold"][i] = thr_i
    return out


def _running_steps(sims):
    y_alt, y_null, templ, circ, kept, n_alt, n_null, off = sims
    run = _RunningLRT(y_alt, y_null, templ, circ, kept)

    def step(n):
        d_alt, d_null = run.advance(n + off)
        return d_alt.ravel()[:n_alt], d_null.ravel()[:n_null]
    return step


def _point(d_alt, d_null, fap):
    thr = float(np.quantile(d_null, 1.0 - fap))
    return float(np.mean(d_alt > thr)), thr


def _curve(ladder, step, fap):
    out = {"n": [], "power": [], "threshold": []}
    for n in ladder:
        p, thr = _point(*step(n), fap)
        out["n"].append(n)
        out["power"].append(p)
        out["threshold"].append(thr)
    return out


def visits_for_power(curve: dict, power: float):
    """Smallest visit count of a power curve reaching ``power``.

    Parameters
    ----------
    curve : :func:`power_curve_at_pool` result
    power : the power wanted (0..1)

    Returns
    -------
    int or None (None when no count reaches it)
    """
    for n, p in zip(curve["n"], curve["power"]):
        if p >= power:
            return int(n)
    return None
