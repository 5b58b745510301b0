"""Random draws from catalogue measurements and an adaptive importance sampler.

Split normal: a measurement value +err_hi/-err_lo is modelled as two half-Gaussians joined at the value
(common practice, no source), truncated to physical bounds by inverse-CDF sampling (exact, no rejection).

The importance sampler works in the unit cube of prior quantiles u (so the prior density is 1 there).
Batch one draws u uniformly (or from a proposal fitted to a cheap proxy); while the Kish effective sample
size of the pooled set is below the floor, a new proposal is fitted to the pooled weighted samples (a
piecewise-constant density on a grid of cells, mixed with the uniform prior: defensive mixture,
Hesterberg 1995) and a new batch is drawn. All batches are kept and weighted by likelihood x prior /
(deterministic mixture of the proposals), so evidences (mean weight) stay accurate whatever the
proposals.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.special import logsumexp as _scipy_logsumexp
from scipy.special import ndtr, ndtri

from rhofollow.physics.grid_proposal import _GridProposal, grid_bins  # noqa: F401 (grid_bins re-exported)

__all__ = ["split_normal_ppf", "split_normal_cdf", "draw_split_normal", "split_normal_logpdf", "ImportanceResult",
           "adaptive_importance_sample"]


def split_normal_ppf(u, mu, s_lo, s_hi):
    """Inverse CDF of the split normal with mode ``mu`` and side widths ``s_lo``, ``s_hi``.

    Parameters
    ----------
    u : float or ndarray
        Quantile in [0, 1].
    mu : float or ndarray
        Mode, in the unit of the measured quantity.
    s_lo, s_hi : float or ndarray
        Lower and upper 1-sigma widths (> 0), same unit.

    Returns
    -------
    ndarray
        Values at the quantiles, unit of ``mu``.
    """
    u = np.asarray(u, dtype=float)
    p_lo = s_lo / (s_lo + s_hi)
    with np.errstate(divide="ignore", invalid="ignore"):
        if u.ndim == 0 or np.ndim(mu) or np.ndim(s_lo) or np.ndim(s_hi):
            lo = mu + s_lo * ndtri(np.clip(u / p_lo * 0.5, 1e-300, 0.5))
            hi = mu + s_hi * ndtri(np.clip(0.5 + (u - p_lo) / (1 - p_lo) * 0.5, 0.5, 1 - 1e-16))
            return np.where(u < p_lo, lo, hi)
        # scalar parameters: each element needs only its own side (the same values, half the work)
        low = u < p_lo
        out = np.empty(u.shape)
        ul, uh = u[low], u[~low]
        out[low] = mu + s_lo * ndtri(np.clip(ul / p_lo * 0.5, 1e-300, 0.5))
        out[~low] = mu + s_hi * ndtri(np.clip(0.5 + (uh - p_lo) / (1 - p_lo) * 0.5, 0.5, 1 - 1e-16))
    return out


def split_normal_cdf(x, mu, s_lo, s_hi):
    """CDF of the split normal (see :func:`split_normal_ppf`).

    Parameters
    ----------
    x : float or ndarray
        Values, unit of ``mu``.
    mu : float
        Mode.
    s_lo, s_hi : float
        Lower and upper 1-sigma widths (> 0), unit of ``mu``.

    Returns
    -------
    ndarray
        Cumulative probability in [0, 1].
    """
    p_lo = s_lo / (s_lo + s_hi)
    return np.where(x < mu, 2 * p_lo * ndtr((x - mu) / s_lo), p_lo + 2 * (1 - p_lo) * (ndtr((x - mu) / s_hi) - 0.5))


def draw_split_normal(rng, n, mu, s_lo, s_hi, lower=-np.inf, upper=np.inf):
    """n draws of a split normal truncated to (lower, upper); zero widths give the constant ``mu``.

    Parameters
    ----------
    rng : numpy.random.Generator
        Source of the draws.
    n : int
        Number of draws.
    mu : float
        Mode, in the unit of the measured quantity.
    s_lo, s_hi : float
        Lower and upper 1-sigma widths, same unit (a zero width takes the other side's).
    lower, upper : float
        Open physical bounds, same unit (default unbounded).

    Returns
    -------
    ndarray
        n draws, unit of ``mu``, strictly inside (lower, upper).
    """
    if s_lo <= 0 and s_hi <= 0:
        return np.full(n, float(mu))
    s_lo = s_lo if s_lo > 0 else s_hi
    s_hi = s_hi if s_hi > 0 else s_lo
    c_lo = float(split_normal_cdf(lower, mu, s_lo, s_hi)) if np.isfinite(lower) else 0.0
    c_hi = float(split_normal_cdf(upper, mu, s_lo, s_hi)) if np.isfinite(upper) else 1.0
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
    """Log density of a split normal (normalised) at x; x and mu broadcast.

    Parameters
    ----------
    x : float or ndarray
        Values, unit of ``mu``.
    mu : float or ndarray
        Mode.
    s_lo, s_hi : float
        Lower and upper 1-sigma widths (> 0), unit of ``mu``.

    Returns
    -------
    ndarray
        Natural log of the density, per unit of ``x``.
    """
    x = np.asarray(x, dtype=float)
    s = np.where(x < mu, s_lo, s_hi)
    z = (x - mu) / s
    out = -0.5 * z
    out *= z
    out -= np.log(0.5 * np.sqrt(2 * np.pi) * (s_lo + s_hi))
    return out


def logsumexp(a, axis=None):
    """log(sum(exp(a))) over ``axis`` (all elements by default) of a real float array, stably.

    The same operations, in the same order, as :func:`scipy.special.logsumexp` (the largest term is
    taken out of the sum and enters through log1p, Blanchard, Higham & Higham 2021, IMA J. Numer.
    Anal. 41, 2311), so the result is the same to the last bit, without that function's extra pass
    for infinite results; a result that is not finite is handed to scipy for its edge cases.

    Parameters
    ----------
    a : ndarray
        Real float values (any unit of log weight); not empty.
    axis : int, optional
        Axis of the sum (None: every element).

    Returns
    -------
    float or ndarray
        The log of the sum, in the unit of ``a`` (a float for ``axis=None``).
    """
    a = np.asarray(a, dtype=float)
    if a.size == 0 or a.ndim == 0:
        return _scipy_logsumexp(a, axis=axis)
    ax = tuple(range(a.ndim)) if axis is None else axis
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        a_max = np.max(a, axis=ax, keepdims=True)
        top = a == a_max
        rest = np.where(top, -np.inf, a)
        m = np.sum(top.astype(float), axis=ax, keepdims=True, dtype=float)
        s = np.sum(np.exp(rest - a_max), axis=ax, keepdims=True, dtype=float)
        s = np.where(s == 0, s, s / m)
        out = np.log1p(s) + np.log(m) + a_max
    if not np.all(np.isfinite(out)):
        return _scipy_logsumexp(a, axis=axis)
    out = np.squeeze(out, axis=ax)
    return out[()] if out.ndim == 0 else out


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


#: Most draws (in units of the batch size n) the final pooling stage may add up to.
POOL_BUDGET = 12

def adaptive_importance_sample(model, d, n, rng, ess_floor=2000.0, max_rounds=4, proxy=None,
                               pool=True):
    """Importance-sample ``model`` over the d-dimensional unit cube of prior quantiles.

    Every batch is kept. The weights of the pooled set use the deterministic mixture of all the
    proposals drawn from (the balance heuristic: q_mix(u) = sum_k (n_k / N) q_k(u); Veach & Guibas
    1995, SIGGRAPH; Owen & Zhou 2000, JASA 95, 135), so a point that an early, poorly placed proposal
    drew in a region a later proposal covers well carries a moderate weight instead of swamping the
    set; each new proposal is fitted to the pooled weighted set (adaptive multiple importance
    sampling, Cornuet et al. 2012, Scand. J. Stat. 39, 798). The Kish ESS is that of the returned,
    pooled weights.

    Parameters
    ----------
    model : callable(u, rng) -> (log_like, aux)
        Vectorised: u is (n, d); returns log-likelihood (n,) (with any prior factor beyond the unit-cube
        prior folded in) and a dict of physical arrays (n,).
    d : int
        Number of adapted dimensions (d >= 1).
    n : int
        Samples per batch; the result holds every batch drawn (n when the first meets the floor).
    ess_floor : float
        Target Kish effective sample size. Up to ``max_rounds`` batches of n are drawn while the
        pooled ESS is short; with ``pool``, further batches sized from the shortfall follow until the
        pooled ESS meets the floor or ``POOL_BUDGET`` x n draws are spent.
    proxy : callable(u) -> log weight, optional
        A cheap approximation of the log-likelihood; the first proposal is fitted to it on uniform
        points, so the first batch already lands where the posterior is.
    pool : bool
        Keep drawing past ``max_rounds`` while the ESS is short (off for hypotheses whose evidence
        alone is wanted).
    """
    batches = _Batches(model, d, rng)
    first = None
    if proxy is not None:
        u0 = rng.random((n, d))
        lp = proxy(u0)
        first = _GridProposal(u0, np.exp(lp - np.max(lp)), d)
    batches.draw(first, n)
    u, log_w = batches.pooled()
    ess = _kish(log_w)
    adapted = proxy is not None
    while ess < ess_floor and np.any(np.isfinite(log_w)):
        m = _next_batch_size(batches.counts, n, ess, ess_floor, max_rounds, pool)
        if m is None:
            break
        w = np.exp(log_w - np.max(log_w))
        batches.draw(_GridProposal(u, w, d), m)
        adapted = True
        u, log_w = batches.pooled()
        ess = _kish(log_w)
    auxes = batches.auxes
    aux = auxes[0] if len(auxes) == 1 else {k: np.concatenate([a[k] for a in auxes]) for k in auxes[0]}
    finite = np.isfinite(log_w)
    log_z = float(logsumexp(log_w[finite]) - np.log(len(log_w))) if finite.any() else -np.inf
    return ImportanceResult(u, log_w, aux, log_z, ess, len(batches.counts), adapted)


def _next_batch_size(counts, n, ess, ess_floor, max_rounds, pool):
    """Size of the next batch, or None to stop: n while rounds remain, then (with ``pool``) a batch
    sized from the ESS shortfall (the pooled ESS grows about linearly with the draws) until
    ``POOL_BUDGET`` x n draws are spent."""
    drawn = sum(counts)
    if len(counts) < max_rounds:
        return n
    if pool and drawn < POOL_BUDGET * n and ess > 0:
        m = int(np.clip(math.ceil(drawn * (ess_floor / ess - 1.0) * 1.1), n // 4, 4 * n))
        return max(1, min(m, POOL_BUDGET * n - drawn))
    return None


class _Batches:
    """The batches drawn so far and their proposals; pooled with the balance-heuristic weights."""

    def __init__(self, model, d, rng):
        self.model, self.d, self.rng = model, d, rng
        self.proposals, self.counts, self.us, self.lls, self.auxes = [], [], [], [], []
        self.logq = []  # logq[k][j]: log density of proposal k at the points of batch j (None: uniform)

    def draw(self, proposal, m):
        """Draw m points from ``proposal`` (None: the uniform prior) and evaluate the model there.

        Each proposal's density is evaluated once at each batch's points and kept for the pooling.

        Parameters
        ----------
        proposal : _GridProposal or None
            Where to draw from.
        m : int
            Number of points.
        """
        if proposal is None:
            u, lq_new = self.rng.random((m, self.d)), None
        else:
            u, lq_new = proposal.sample(self.rng, m)
        ll, aux = self.model(u, self.rng)
        for q, lqs in zip(self.proposals, self.logq):
            lqs.append(None if q is None else q.log_density(u))
        self.logq.append([None if proposal is None else proposal.log_density(uj) for uj in self.us] + [lq_new])
        self.proposals.append(proposal)
        self.counts.append(m)
        self.us.append(u)
        self.lls.append(ll)
        self.auxes.append(aux)

    def pooled(self):
        """(u, log w) of every point drawn, weighted against the deterministic mixture of proposals."""
        us, lls = self.us, self.lls
        u = us[0] if len(us) == 1 else np.vstack(us)
        ll = lls[0] if len(lls) == 1 else np.concatenate(lls)
        total = float(sum(self.counts))
        comps = [np.log(c / total) + (np.zeros(len(u)) if q is None else lqs[0] if len(lqs) == 1
                                      else np.concatenate(lqs))
                 for q, c, lqs in zip(self.proposals, self.counts, self.logq)]
        log_q = comps[0] if len(comps) == 1 else logsumexp(np.stack(comps), axis=0)
        log_w = np.where(np.isfinite(ll), ll - log_q, -np.inf)
        return u, log_w
