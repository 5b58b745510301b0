"""The transit's likelihood and the host-density proposal of the hypotheses.

``log_like_transit`` scores physical parameters against the transit observables (durations route:
Winn 2010 eqs. 14-16; density route: the photo-eccentric and photo-blend relations, Kipping 2014,
MNRAS 440, 2164). ``transit_ln_rho`` gives the host density the transit implies for a given orbit and
geometry, and ``overlap_draw`` proposes the host density where that and the star's measurement overlap
(a defensive mixture, Hesterberg 1995). Internal units: days, radians, g/cm^3.
"""
from __future__ import annotations

import numpy as np

from rhofollow.physics.observables import TransitObservables
from rhofollow.physics.sampling import split_normal_logpdf, split_normal_ppf
from rhofollow.physics.transit import ars_from_rho, durations_from_sin, rho_from_ars

__all__ = ["best_possible_loglike", "log_like_transit", "transit_ln_rho", "overlap_draw", "normal_logpdf",
           "STAR_FREE_SIGMA_LN"]

_RHO_PER_ARS3 = float(rho_from_ars(1.0, 1.0))  # g/cm^3 per (a/R*)^3 at P = 1 d
#: Broad prior of the ``star_density`` explanation: ln rho* normal about the measured value with this
#: spread, 0.5 dex in density (a dwarf read as a subgiant or the reverse; common practice, no source).
STAR_FREE_SIGMA_LN = 0.5 * 2.302585092994046


def best_possible_loglike(obs: TransitObservables) -> float:
    """Log-likelihood of a model that reproduces every transit observable exactly (chi^2 = 0).

    Parameters
    ----------
    obs : TransitObservables
        The transit's measurements (days; ln g/cm^3 for the density route).

    Returns
    -------
    float
        Log-likelihood (natural log, per the observables' units).
    """
    if obs.route == "durations":
        ll = float(obs.t14.logpdf(obs.t14.value))
        if obs.t23 is not None:
            ll += float(obs.t23.logpdf(obs.t23.value))
        elif obs.b is not None:
            ll += float(obs.b.logpdf(obs.b.value))
        return ll
    return float(obs.ln_rho_circ.logpdf(obs.ln_rho_circ.value))


def log_like_transit(obs: TransitObservables, rho_host, period, k_true, b, e, w, dilution, *, sin_w=None,
                     a_rs=None):
    """Log-likelihood of the transit observables for arrays of physical parameters.

    Parameters
    ----------
    obs : TransitObservables
        The transit's measurements (days; ln g/cm^3 for the density route).
    rho_host : ndarray
        Host density, g/cm^3.
    period : ndarray
        Orbital period, days.
    k_true : ndarray
        True radius ratio Rp/R* of the host.
    b : ndarray
        Transit impact parameter, stellar radii (unused by the density route).
    e, w : ndarray
        Eccentricity and argument of periastron (radians, RV convention).
    dilution : ndarray
        Dilution D >= 1 (dimensionless).
    sin_w, a_rs : ndarray, optional
        sin(w) and the host's a/R* when the caller has them already (the same values either way).

    Returns
    -------
    ndarray
        Log-likelihood per sample (-inf for impossible geometry).
    """
    sin_w = np.sin(w) if sin_w is None else sin_w
    if obs.route == "durations":
        a_rs = ars_from_rho(rho_host, period) if a_rs is None else a_rs
        t14, t23, fac = durations_from_sin(a_rs, b, k_true, period, e, sin_w, full=obs.t23 is not None)
        ll = obs.t14.logpdf(t14)
        if obs.t23 is not None:
            ll = ll + obs.t23.logpdf(t23)
        elif obs.b is not None:
            ll = ll + obs.b.logpdf(b)
        # impossible geometry (planet inside the star, no inclination gives this b)
        bad = (b >= a_rs * fac) | (a_rs * (1 - e) <= 1 + k_true)
        return np.where(bad, -np.inf, ll)
    g3 = ((1.0 + e * sin_w) / np.sqrt(1.0 - e * e)) ** 3   # g_factor(e, w)^3 with the given sine
    ln_model = np.log(rho_host * g3) - 0.75 * np.log(dilution)
    return obs.ln_rho_circ.logpdf(ln_model)


def normal_logpdf(x, mu, sd):
    """Log density of a normal distribution.

    Parameters
    ----------
    x, mu, sd : float or ndarray
        Values, mean and standard deviation (sd > 0), one unit.

    Returns
    -------
    ndarray
        Natural log of the density, per unit of x.
    """
    z = (x - mu) / sd
    return -0.5 * z * z - np.log(np.sqrt(2 * np.pi) * sd)


def _normal_logpdf_inplace(x, mu, sd):
    """:func:`normal_logpdf` of arrays with two temporaries (the same operations, in place)."""
    z = x - mu
    z /= sd
    out = -0.5 * z
    out *= z
    lg = np.sqrt(2 * np.pi) * sd
    np.log(lg, out=lg)
    out -= lg
    return out


def transit_ln_rho(obs: TransitObservables, period, k_true, b, ln_g3, dilution):
    """The host density the transit implies for given orbit and geometry: (mean, sd) of ln rho (g/cm^3).

    Durations: the exact circular a/R* at the measured T14, this b and k (Seager & Mallen-Ornelas 2003),
    linearised in T14, moved by the photo-eccentric factor -3 ln g (Kipping 2010). Density route:
    ln rho_circ - 3 ln g + (3/4) ln D (Kipping 2014, MNRAS 440, 2164).

    Parameters
    ----------
    obs : TransitObservables
        The transit's measurements.
    period : ndarray
        Orbital period, days.
    k_true : ndarray
        True radius ratio Rp/R*.
    b : ndarray
        Impact parameter, stellar radii.
    ln_g3 : ndarray
        3 ln g, the photo-eccentric shift (dimensionless).
    dilution : ndarray
        Dilution D >= 1 (dimensionless).

    Returns
    -------
    (ndarray, ndarray)
        Mean and standard deviation of ln rho (rho in g/cm^3).
    """
    if obs.route == "durations":
        t14 = np.clip(np.full_like(period, obs.t14.value), 1e-6 * period, 0.499 * period)
        t14_sd = 0.5 * (obs.t14.lo + obs.t14.hi)
        x = np.pi * t14 / period
        sx = np.sin(x)
        chord2 = np.clip((1 + k_true) ** 2 - b * b, 1e-12, None)
        a2 = b * b + chord2 / (sx * sx)
        ln_rc = np.log(_RHO_PER_ARS3 * a2 ** 1.5 / period**2)
        dln_dt = 1.5 * (-2 * chord2 * np.cos(x) / sx**3 * np.pi / period) / a2
        sd = np.maximum(np.abs(dln_dt) * t14_sd, 1e-4)
        return ln_rc - ln_g3, sd
    rc = obs.ln_rho_circ
    return rc.value - ln_g3 + 0.75 * np.log(dilution), np.full_like(ln_g3, 0.5 * (rc.lo + rc.hi))


def overlap_draw(rng_, m_t, s_t, star_sn, broad):
    """Draw ln rho from the overlap proposal; return (ln_rho, log q, log prior).

    The prior is the star's split normal (or, ``broad``, a normal about its mode with
    STAR_FREE_SIGMA_LN). The proposal mixes 70 % of the Gaussian product of prior and transit (widened
    1.3x), 15 % transit alone and 15 % prior alone (defensive mixture, Hesterberg 1995).

    Parameters
    ----------
    rng_ : numpy.random.Generator
        Source of the draws.
    m_t, s_t : ndarray
        Mean and sd of the ln rho the transit implies (rho in g/cm^3).
    star_sn : tuple of float
        The star's split normal of ln rho: (mode, lower width, upper width).
    broad : bool
        Use the broad prior of the ``star_density`` explanation.

    Returns
    -------
    (ndarray, ndarray, ndarray)
        ln rho (g/cm^3), the proposal's log density and the star prior's log density (both per unit
        ln rho).
    """
    mu, lo, hi = star_sn
    m = m_t.shape[0]
    if broad:
        lo = hi = STAR_FREE_SIGMA_LN
    s_s = np.where(m_t < mu, lo, hi)
    var_t, var_s = s_t**2, s_s**2
    prec = 1.0 / var_t + 1.0 / var_s
    m_p = (m_t / var_t + mu / var_s) / prec
    s_p = 1.3 / np.sqrt(prec)
    s_t2 = 1.2 * s_t
    pick = rng_.random(m)
    z = rng_.standard_normal(m)
    u_prior = rng_.random(m)
    ln_rho = np.where(pick < 0.7, m_p + s_p * z, m_t + s_t2 * z)
    tail = pick >= 0.85  # only these take the prior's draw (evaluated for them alone)
    ln_rho[tail] = split_normal_ppf(u_prior[tail], mu, lo, hi)
    log_prior = split_normal_logpdf(ln_rho, mu, lo, hi)
    # log of the mixture density, the three components combined in place (log-sum-exp about their max)
    c0 = _normal_logpdf_inplace(ln_rho, m_p, s_p)
    c0 += np.log(0.7)
    c1 = _normal_logpdf_inplace(ln_rho, m_t, s_t2)
    c1 += np.log(0.15)
    c2 = np.log(0.15) + log_prior
    mx = np.maximum(c0, c1)
    np.maximum(mx, c2, out=mx)
    for c in (c0, c1, c2):
        c -= mx
        np.exp(c, out=c)
    c0 += c1
    c0 += c2
    log_q = np.log(c0, out=c0)
    log_q += mx
    return ln_rho, log_q, log_prior
