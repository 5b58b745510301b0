"""The measured-orbit ("cut") sampler of the eccentric explanation.

With a published orbit (e, w with errors) the eccentric explanation samples (e, w) from the
measurement and lets the transit inform only the star and the geometry: a "cut" of the transit's
feedback on the orbit (Plummer 2015, Stat. Comput. 25, 37), so the RV orbit stands whatever the
density says.
"""
from __future__ import annotations

import numpy as np
from rhofollow.physics.sampling import ImportanceResult, _kish, logsumexp

__all__ = ["CUT_GROUP", "CUT_BUDGET", "cut_sample"]

#: Members per group of the measured-orbit ("cut") sampler: each drawn (e, w) carries this many draws
#: of the star and geometry.
CUT_GROUP = 4


def cut_batch(model, ng, group, rng):
    """One batch of ``ng`` groups for :func:`cut_sample`: (u, log_w, cut log weights, aux).

    Parameters
    ----------
    model : callable(u, rng) -> (log_w, aux)
        The hypothesis model over the two quantile axes of (e, w).
    ng : int
        Number of groups.
    group : int
        Members per group.
    rng : numpy.random.Generator
        Source of the draws.

    Returns
    -------
    (ndarray, ndarray, ndarray, dict)
        Unit-cube points (ng * group, 2), log weights, group-normalised ("cut") log weights and the
        model's physical arrays.
    """
    ug = np.empty((ng, 2))
    for j in range(2):
        ug[:, j] = (rng.permutation(ng) + rng.random(ng)) / ng
    u = np.repeat(ug, group, axis=0)
    log_w, aux = model(u, rng)
    finite = np.isfinite(log_w)
    extra = aux.pop("_extra", None)
    lw_t = log_w if extra is None else np.where(finite, log_w - extra, -np.inf)
    g = lw_t.reshape(ng, group)
    with np.errstate(invalid="ignore"):
        mx = np.max(g, axis=1, keepdims=True)
        norm = mx + np.log(np.sum(np.exp(g - np.where(np.isfinite(mx), mx, 0.0)), axis=1, keepdims=True))
    ok = np.isfinite(norm)
    cut = np.where(ok, g - np.where(ok, norm, 0.0), -np.inf).ravel()
    if extra is not None:
        cut = cut + extra
    cut = np.where(np.isfinite(cut), cut, -np.inf)
    return u, log_w, cut, aux


#: Most groups the measured-orbit sampler draws, in units of the first batch.
CUT_BUDGET = 12


def cut_sample(model, n, rng, group=CUT_GROUP, ess_floor=0.0):
    """Measured-orbit sampler: groups of ``group`` draws share one (e, w) from the measurement (Latin
    hypercube over its two quantile axes); each group's weights are normalised to the same total, so
    the (e, w) marginal is the measurement's whatever the transit says (a cut, Plummer 2015). Further
    data (``aux['_extra']``, RVs or occultation timings) re-weight the groups. The evidence is the mean
    of the un-normalised weights (exact importance sampling: (e, w) are drawn from their prior).

    The Kish ESS of the final pooled set is checked: while it is below ``ess_floor``, another batch of
    groups (sized from the shortfall) is drawn and pooled, up to ``CUT_BUDGET`` x the first batch.
    Without further data each group contributes between 1 and ``group`` effective samples, so the
    floor is met once the finite groups number ``ess_floor``.

    Parameters
    ----------
    model : callable(u, rng) -> (log_w, aux)
        The hypothesis model over the two quantile axes of (e, w).
    n : int
        Samples of the first batch.
    rng : numpy.random.Generator
        Source of the draws.
    group : int
        Members per group.
    ess_floor : float
        Target Kish effective sample size.

    Returns
    -------
    ImportanceResult
        Cut weights, the evidence (natural log) and the physical arrays.
    """
    ng = max(1, -(-n // group))
    u, log_w, cut, aux = cut_batch(model, ng, group, rng)
    ess, rounds, total = _kish(cut), 1, ng
    while ess < ess_floor and total < CUT_BUDGET * ng and np.any(np.isfinite(cut)):
        more = int(np.clip(np.ceil(total * (ess_floor / max(ess, 1.0) - 1.0) * 1.1), max(1, ng // 8), 4 * ng))
        more = min(more, CUT_BUDGET * ng - total)
        u2, lw2, cut2, aux2 = cut_batch(model, more, group, rng)
        u = np.vstack([u, u2])
        log_w = np.concatenate([log_w, lw2])
        cut = np.concatenate([cut, cut2])
        aux = {k: np.concatenate([aux[k], aux2[k]]) for k in aux}
        ess, rounds, total = _kish(cut), rounds + 1, total + more
    finite = np.isfinite(log_w)
    log_z = float(logsumexp(log_w[finite]) - np.log(len(log_w))) if finite.any() else -np.inf
    return ImportanceResult(u, cut, aux, log_z, ess, rounds, False)
