"""Random draws from catalogue measurements and an adaptive importance sampler.

Split normal: a measurement value +err_hi/-err_lo is modelled as two half-Gaussians joined at the value
(common practice, no source), truncated to physical bounds by inverse-CDF sampling (exact, no rejection).

The importance sampler works in the unit cube of prior quantiles u (so the prior density is 1 there).
Batch one draws u uniformly; while the Kish effective sample size is below the floor, the proposal is
adapted to a piecewise-constant density on a grid of cells, fitted to the weighted samples and mixed with
the uniform prior (defensive mixture, Hesterberg 1995), and a new batch is drawn. Weights are
likelihood x prior / proposal, so evidences (mean weight) stay unbiased whatever the proposal.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.special import ndtr, ndtri, logsumexp

__all__ = ["split_normal_ppf", "draw_split_normal", "split_normal_logpdf", "ImportanceResult",
           "adaptive_importance_sample"]


def split_normal_ppf(u, mu, s_lo, s_hi):
    """Inverse CDF of the split normal with mode ``mu`` and side widths ``s_lo``, ``s_hi``."""
    u = np.asarray(u, dtype=float)
    p_lo = s_lo / (s_lo + s_hi)
    with np.errstate(divide="ignore", invalid="ignore"):
        lo = mu + s_lo * ndtri(np.clip(u / p_lo * 0.5, 1e-300, 0.5))
        hi = mu + s_hi * ndtri(np.clip(0.5 + (u - p_lo) / (1 - p_lo) * 0.5, 0.5, 1 - 1e-16))
    return np.where(u < p_lo, lo, hi)


def _split_normal_cdf(x, mu, s_lo, s_hi):
    p_lo = s_lo / (s_lo + s_hi)
    return np.where(x < mu, 2 * p_lo * ndtr((x - mu) / s_lo), p_lo + 2 * (1 - p_lo) * (ndtr((x - mu) / s_hi) - 0.5))


def draw_split_normal(rng, n, mu, s_lo, s_hi, lower=-np.inf, upper=np.inf):
    """n draws of a split normal truncated to (lower, upper); zero widths give the constant ``mu``."""
    if s_lo <= 0 and s_hi <= 0:
        return np.full(n, float(mu))
    s_lo = s_lo if s_lo > 0 else s_hi
    s_hi = s_hi if s_hi > 0 else s_lo
    c_lo = float(_split_normal_cdf(lower, mu, s_lo, s_hi)) if np.isfinite(lower) else 0.0
    c_hi = float(_split_normal_cdf(upper, mu, s_lo, s_hi)) if np.isfinite(upper) else 1.0
    if c_hi - c_lo < 1e-12:
        raise ValueError("measurement lies entirely outside its physical bounds")
    u = c_lo + (c_hi - c_lo) * rng.random(n)
    x = split_normal_ppf(u, mu, s_lo, s_hi)
    # guard the open bounds against rounding
    if np.isfinite(lower):
        x = np.maximum(x, np.nextafter(lower, np.inf))
    if np.isfinite(upper):
        x = np.minimum(x, np.nextafter(upper, -np.inf))
    return x


def split_normal_logpdf(x, mu, s_lo, s_hi):
    """Log density of a split normal (normalised) at x; x and mu broadcast."""
    x = np.asarray(x, dtype=float)
    s = np.where(x < mu, s_lo, s_hi)
    z = (x - mu) / s
    return -0.5 * z * z - np.log(0.5 * np.sqrt(2 * np.pi) * (s_lo + s_hi))


@dataclass
class ImportanceResult:
    """Output of :func:`adaptive_importance_sample`.

    ``u`` the (n, d) unit-cube points, ``log_w`` log importance weights (log-likelihood + log prior -
    log proposal), ``aux`` the physical arrays returned by the model, ``log_evidence`` the log of the
    mean weight, ``ess`` the Kish ESS, ``rounds`` how many batches were drawn, ``adapted`` whether the
    proposal was adapted.
    """

    u: np.ndarray
    log_w: np.ndarray
    aux: dict
    log_evidence: float
    ess: float
    rounds: int
    adapted: bool


def _kish(log_w):
    if not np.any(np.isfinite(log_w)):
        return 0.0
    m = np.max(log_w)
    w = np.exp(log_w - m)
    return float(w.sum() ** 2 / np.sum(w * w))


_BINS = {1: (64,), 2: (24, 24), 3: (16, 16, 8), 4: (10, 10, 6, 6)}


class _GridProposal:
    """Piecewise-constant density on a grid over the unit cube, mixed with the uniform density."""

    def __init__(self, u, w, d, defensive=0.2):
        bins = _BINS.get(d, (6,) * d)
        self.bins = np.array(bins)
        idx = np.minimum((u * self.bins).astype(int), self.bins - 1)
        flat = np.ravel_multi_index(idx.T, bins)
        ncell = int(np.prod(bins))
        mass = np.bincount(flat, weights=w, minlength=ncell)
        mass = mass / mass.sum()
        # spread each cell's mass a little to its neighbours to cover the posterior's edges
        m = mass.reshape(bins)
        sm = m.copy()
        for ax in range(d):
            sm = sm + 0.5 * (np.roll(m, 1, axis=ax) + np.roll(m, -1, axis=ax))
        sm = sm.ravel() / sm.sum()
        self.cell_mass = (1 - defensive) * sm + defensive / ncell
        self.cdf = np.cumsum(self.cell_mass)
        self.cdf[-1] = 1.0
        self.ncell = ncell
        self.d = d

    def sample(self, rng, n):
        cells = np.searchsorted(self.cdf, rng.random(n))
        idx = np.array(np.unravel_index(cells, tuple(self.bins))).T
        u = (idx + rng.random((n, self.d))) / self.bins
        return u, np.log(self.cell_mass[cells] * self.ncell)  # log density in the unit cube


def adaptive_importance_sample(model, d, n, rng, ess_floor=2000.0, max_rounds=4):
    """Importance-sample ``model`` over the d-dimensional unit cube of prior quantiles.

    Parameters
    ----------
    model : callable(u, rng) -> (log_like, aux)
        Vectorised: u is (n, d); returns log-likelihood (n,) (with any prior factor beyond the unit-cube
        prior folded in) and a dict of physical arrays (n,).
    d : int
        Number of adapted dimensions (d >= 1).
    n : int
        Samples per batch (and in the result, unless the final stage grows the sample).
    ess_floor : float
        Target Kish effective sample size; the proposal is adapted (up to ``max_rounds`` batches) and,
        failing that, the last proposal's batches are pooled.
    """
    u = rng.random((n, d))
    ll, aux = model(u, rng)
    log_w = ll
    ess = _kish(log_w)
    rounds, adapted = 1, False
    best = (u, log_w, aux, ess)
    proposal = None
    while ess < ess_floor and rounds < max_rounds and np.any(np.isfinite(log_w)):
        w = np.exp(log_w - np.max(log_w))
        proposal = _GridProposal(u, w, d)
        u, log_q = proposal.sample(rng, n)
        ll, aux = model(u, rng)
        log_w = ll - log_q
        ess = _kish(log_w)
        rounds += 1
        adapted = True
        if ess > best[3]:
            best = (u, log_w, aux, ess)
    u, log_w, aux, ess = best
    # pool extra batches from the best proposal if still short (same proposal => same weight scale)
    pooled = 0
    while ess < ess_floor and proposal is not None and pooled < 3 and np.any(np.isfinite(log_w)):
        u2, log_q2 = proposal.sample(rng, n)
        ll2, aux2 = model(u2, rng)
        u = np.vstack([u, u2])
        log_w = np.concatenate([log_w, ll2 - log_q2])
        aux = {k: np.concatenate([aux[k], aux2[k]]) for k in aux}
        ess = _kish(log_w)
        pooled += 1
        rounds += 1
    finite = np.isfinite(log_w)
    log_z = float(logsumexp(log_w[finite]) - np.log(len(log_w))) if finite.any() else -np.inf
    return ImportanceResult(u, log_w, aux, log_z, ess, rounds, adapted)
