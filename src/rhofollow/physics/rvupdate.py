"""Re-weighting posterior samples with measured RVs, and testing e > 0 on the data.

Likelihood (Gaussian; errors include stellar jitter in quadrature, sigma^2 = err^2 + jitter^2):
each posterior sample j fixes P, T0, e, omega and so the unit RV shape s_j(t). The per-instrument
offsets have flat priors and are marginalised analytically, which for Gaussian errors reduces to
the chi^2 of the residuals after removing each instrument's weighted mean (plus a constant that is
the same for every sample). The semi-amplitude is either

- ``"mass"``: K_j from the sample's planet mass draw (mass-radius relation or known mass), or
- ``"marginal"`` (default): marginalised analytically with a flat prior on K > 0:
  ln L_j = -chi2_perp(K_hat_j)/2 - ln(sqrt(a_j)) + ln Phi(K_hat_j sqrt(a_j)), a_j = |s_perp,j|^2_w,
  which leaves the eccentricity inference independent of the mass-radius relation.

Eccentricity is called *confirmed* when the likelihood-ratio test of the data (eccentric model
maximised over an (e, omega) grid vs circular, offsets and K profiled; see
:mod:`rhofollow.physics.rvconfirm`) rejects the circular orbit with p-value below the chosen
false-alarm probability, the p-value coming from simulations under the circular null at the actual
epochs and errors with K fixed at its circular best fit. The posterior P(e < 0.05) is reported as
well, for information.
"""
from __future__ import annotations

import numpy as np
from scipy.special import log_ndtr
from scipy.stats import norm

from rhofollow.physics.rv import circular_shape, rv_shape
from rhofollow.physics.rvconfirm import EccGrid, _project_offsets, ecc_grid, lrt_statistic

__all__ = ["rv_log_likelihood", "conditional_k", "lrt_on_data"]


def _shapes(t, period, t0, e, omega):
    ph = (np.asarray(t, float)[None, :] - np.asarray(t0, float)[:, None]) / np.asarray(period, float)[:, None]
    return rv_shape(ph, np.asarray(e, float)[:, None], np.asarray(omega, float)[:, None])


def _perp_terms(t, y, err, groups, period, t0, e, omega, jitter_ms):
    w = 1.0 / (np.asarray(err, float) ** 2 + jitter_ms**2)
    g = np.asarray(groups, int)
    ng = int(g.max()) + 1
    yp = _project_offsets(np.asarray(y, float), w, g, ng)
    sp = _project_offsets(_shapes(t, period, t0, e, omega), w, g, ng)
    return w, yp, sp


def rv_log_likelihood(t, y, err, groups, period, t0, e, omega, k_ms=None, jitter_ms=0.0, chunk=4096):
    """Log-likelihood of the RVs for every posterior sample (up to one common constant).

    Parameters
    ----------
    t, y, err : ndarray (N,), BJD_TDB (days), RV and error (m/s)
    groups : ndarray (N,) of int, instrument index (one marginalised offset per instrument)
    period, t0, e, omega : ndarray (S,), samples (days, BJD_TDB, -, radians)
    k_ms : ndarray (S,) for K mode ``"mass"``; None marginalises K (flat prior, K > 0)
    jitter_ms : stellar jitter added in quadrature (m/s)
    chunk : samples per block (bounds memory at chunk x N)

    Returns
    -------
    ndarray (S,), natural-log likelihood (dimensionless), up to one constant common to all samples
    """
    s_all = len(np.atleast_1d(e))
    out = np.empty(s_all)
    for a in range(0, s_all, chunk):
        sl = slice(a, a + chunk)
        w, yp, sp = _perp_terms(t, y, err, groups, np.atleast_1d(period)[sl], np.atleast_1d(t0)[sl],
                                np.atleast_1d(e)[sl], np.atleast_1d(omega)[sl], jitter_ms)
        if k_ms is not None:
            r = yp[None, :] - np.atleast_1d(k_ms)[sl, None] * sp
            out[sl] = -0.5 * np.sum(w * r * r, axis=1)
        else:
            aa = np.sum(w * sp * sp, axis=1)
            bb = sp @ (w * yp)
            khat = bb / aa
            chi = np.sum(w * yp * yp) - bb * khat
            out[sl] = -0.5 * chi - 0.5 * np.log(aa) + log_ndtr(khat * np.sqrt(aa))
    return out


def conditional_k(t, y, err, groups, period, t0, e, omega, jitter_ms, rng: np.random.Generator):
    """One draw of K per sample from its conditional posterior (flat prior, K > 0), m/s.

    Given the sample's orbit, K is Gaussian with mean K_hat and variance 1/a, truncated at 0;
    drawn by the inverse CDF (seeded).

    Parameters
    ----------
    t, y, err : ndarray (N,), BJD_TDB (days), RV and error (m/s)
    groups : ndarray (N,) of int, instrument index (one marginalised offset per instrument)
    period, t0, e, omega : ndarray (S,), samples (days, BJD_TDB, -, radians)
    jitter_ms : float, stellar jitter added in quadrature, m/s
    rng : numpy.random.Generator, source of the draws

    Returns
    -------
    ndarray (S,), semi-amplitude K >= 0, m/s
    """
    w, yp, sp = _perp_terms(t, y, err, groups, period, t0, e, omega, jitter_ms)
    aa = np.sum(w * sp * sp, axis=1)
    khat = sp @ (w * yp) / aa
    sd = 1.0 / np.sqrt(aa)
    lo = norm.cdf(-khat / sd)
    u = lo + (1.0 - lo) * rng.random(khat.shape)
    return np.maximum(khat + sd * norm.ppf(np.clip(u, 1e-300, 1 - 1e-16)), 0.0)


def lrt_on_data(t, y, err, groups, period, t0, jitter_ms=0.0, *, grid: EccGrid | None = None,
                n_null=2000, seed=0):
    """Eccentric-vs-circular likelihood-ratio test on measured RVs.

    Parameters
    ----------
    t, y, err : ndarray (N,), BJD_TDB (days), RV and error (m/s)
    groups : ndarray (N,) of int, instrument index (one profiled offset per instrument)
    period : float, orbital period, days
    t0 : float, mid-transit epoch, BJD_TDB (days)
    jitter_ms : float, stellar jitter added in quadrature, m/s
    grid : EccGrid, optional, (e, omega) grid of the eccentric model (default :func:`ecc_grid`)
    n_null : int, number of circular-null simulations
    seed : int, seed of the null simulations

    Returns
    -------
    dict
        ``delta_chi2`` (observed, dimensionless), ``p_value`` (fraction of circular-null
        simulations at least as large, +1 smoothed: (1 + n_exceed) / (1 + n_null)), ``e_best``,
        ``omega_best`` (grid maximum, radians), ``k_circ`` (circular best-fit K, m/s).
    """
    grid = grid or ecc_grid()
    w = 1.0 / (np.asarray(err, float) ** 2 + jitter_ms**2)
    g = np.asarray(groups, int)
    ph = (np.asarray(t, float) - float(t0)) / float(period)
    templ = grid.templates(ph)
    d_obs, best = lrt_statistic(np.asarray(y, float)[None, :], ph, grid, w, g, ecc_templates=templ)
    circ = circular_shape(ph)
    cp = _project_offsets(circ, w, g, int(g.max()) + 1)
    yp = _project_offsets(np.asarray(y, float), w, g, int(g.max()) + 1)
    k_circ = float(np.sum(w * cp * yp) / np.sum(w * cp * cp))
    rng = np.random.default_rng(seed)
    sims = k_circ * circ[None, :] + rng.standard_normal((n_null, ph.size)) / np.sqrt(w)[None, :]
    d_null, _ = lrt_statistic(sims, ph, grid, w, g, ecc_templates=templ)
    n_exc = int(np.sum(d_null >= d_obs[0]))
    return {"delta_chi2": float(d_obs[0]), "p_value": (1.0 + n_exc) / (1.0 + n_null),
            "e_best": float(grid.e[best[0]]), "omega_best": float(grid.omega[best[0]]), "k_circ": k_circ}
