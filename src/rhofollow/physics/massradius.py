"""Planet mass draws from planet radius (Earth units), with the relations' scatter. Seeded.

Relations (R, M in Earth radii / Earth masses):

- ``wrf16`` — Wolfgang, Rogers & Ford 2016, ApJ 825, 19: M = 2.7 R^1.3 with a Gaussian intrinsic
  mass scatter of 1.9 M_earth, truncated to physically plausible masses (R < 4). We truncate at
  M > 0 and at a pure-iron-like upper bound taken as twice the Otegi et al. rocky relation
  (construction standing in for their iron-composition limit; not a published prefactor).
- ``otegi20-rocky`` / ``otegi20-volatile`` — Otegi, Bouchy & Helled 2020, A&A 634, A43:
  rocky M = (0.90 +- 0.06) R^(3.45 +- 0.12); volatile-rich M = (1.74 +- 0.38) R^(1.58 +- 0.10)
  (M <~ 120). The paper quotes coefficient uncertainties rather than an intrinsic scatter; the
  spread of the draws comes from drawing the coefficients (independent Gaussians) per sample.
- ``giant`` — radius barely constrains mass above the break of Bashi et al. 2017, A&A 604, A83
  (R ∝ M^0.55 below, R ∝ M^0.01 above 124 M_earth / 12.1 R_earth). For R >= 10 R_earth we
  therefore draw from a broad log-uniform mass prior over 0.1 - 13 Jupiter masses (the lower
  edge keeps inflated Saturn-mass planets, the upper edge is the deuterium-burning limit;
  common practice, no source for the edges).

``auto`` picks per sample: R < 1.5 Otegi rocky; 1.5 <= R < 4 Wolfgang, Rogers & Ford;
4 <= R < 10 Otegi volatile-rich; R >= 10 the giant prior.
"""
from __future__ import annotations

import numpy as np

from rhofollow.physics.constants import GM_EARTH_SI, GM_JUP_SI

__all__ = ["RELATIONS", "GIANT_RADIUS_REARTH", "GIANT_MASS_RANGE_MEARTH", "wrf16_mean",
           "otegi20_rocky_mean", "otegi20_volatile_mean", "bashi17_radius", "draw_planet_mass",
           "relation_for_radius"]

RELATIONS = ("auto", "wrf16", "otegi20-rocky", "otegi20-volatile", "giant")

#: Radius (Earth radii) above which the giant-planet prior is used in ``auto``.
GIANT_RADIUS_REARTH = 10.0
_MJUP_MEARTH = GM_JUP_SI / GM_EARTH_SI
#: Edges of the log-uniform giant-planet mass prior (Earth masses): 0.1 and 13 Jupiter masses.
GIANT_MASS_RANGE_MEARTH = (0.1 * _MJUP_MEARTH, 13.0 * _MJUP_MEARTH)

_WRF_C, _WRF_G, _WRF_SIG = 2.7, 1.3, 1.9
_OT_ROCKY = (0.90, 0.06, 3.45, 0.12)
_OT_VOL = (1.74, 0.38, 1.58, 0.10)
_BASHI_M, _BASHI_R, _BASHI_LO, _BASHI_HI = 124.0, 12.1, 0.55, 0.01


def wrf16_mean(r):
    """Mean mass (M_earth) of Wolfgang, Rogers & Ford 2016: M = 2.7 R^1.3.

    Parameters
    ----------
    r : float or ndarray
        Planet radius, R_earth.

    Returns
    -------
    ndarray
        Mass, M_earth.
    """
    return _WRF_C * np.asarray(r, float) ** _WRF_G


def otegi20_rocky_mean(r):
    """Otegi, Bouchy & Helled 2020 rocky population: M = 0.9 R^3.45 (M_earth).

    Parameters
    ----------
    r : float or ndarray
        Planet radius, R_earth.

    Returns
    -------
    ndarray
        Mass, M_earth.
    """
    return _OT_ROCKY[0] * np.asarray(r, float) ** _OT_ROCKY[2]


def otegi20_volatile_mean(r):
    """Otegi, Bouchy & Helled 2020 volatile-rich population: M = 1.74 R^1.58 (M_earth).

    Parameters
    ----------
    r : float or ndarray
        Planet radius, R_earth.

    Returns
    -------
    ndarray
        Mass, M_earth.
    """
    return _OT_VOL[0] * np.asarray(r, float) ** _OT_VOL[2]


def bashi17_radius(m):
    """Radius (R_earth) from the two power laws of Bashi et al. 2017 joined at their break.

    Slopes 0.55 and 0.01 and the break (124 M_earth, 12.1 R_earth) are published; joining them
    continuously at the break is our construction (no published prefactor is used).

    Parameters
    ----------
    m : float or ndarray
        Planet mass, M_earth.

    Returns
    -------
    ndarray
        Radius, R_earth.
    """
    m = np.asarray(m, float)
    slope = np.where(m < _BASHI_M, _BASHI_LO, _BASHI_HI)
    return _BASHI_R * (m / _BASHI_M) ** slope


def relation_for_radius(r):
    """Names of the relation ``auto`` uses per radius (array of str).

    Parameters
    ----------
    r : float or ndarray
        Planet radius, R_earth.

    Returns
    -------
    ndarray of str
        Relation names.
    """
    r = np.asarray(r, float)
    return np.select([r < 1.5, r < 4.0, r < GIANT_RADIUS_REARTH],
                     ["otegi20-rocky", "wrf16", "otegi20-volatile"], "giant")


def _draw_wrf16(r, rng):
    mean = wrf16_mean(r)
    upper = np.maximum(2.0 * otegi20_rocky_mean(r), mean + _WRF_SIG)
    # Inverse-CDF draw of the truncated normal on (0, upper]: exact, vectorised, no rejection loop.
    from scipy.stats import norm

    lo = norm.cdf((0.0 - mean) / _WRF_SIG)
    hi = norm.cdf((upper - mean) / _WRF_SIG)
    u = lo + (hi - lo) * rng.random(np.shape(r))
    m = mean + _WRF_SIG * norm.ppf(u)
    return np.clip(m, 1e-3, upper)


def _draw_otegi(r, rng, coeffs):
    c, sc, g, sg = coeffs
    cc = np.maximum(c + sc * rng.standard_normal(np.shape(r)), 0.05 * c)
    gg = g + sg * rng.standard_normal(np.shape(r))
    return cc * np.asarray(r, float) ** gg


def _draw_giant(r, rng):
    lo, hi = GIANT_MASS_RANGE_MEARTH
    return np.exp(np.log(lo) + (np.log(hi) - np.log(lo)) * rng.random(np.shape(r)))


def draw_planet_mass(rp_rearth, rng: np.random.Generator, relation: str = "auto",
                     known_mp_mearth: float | None = None, known_err: float = 0.0):
    """Draw one planet mass (Earth masses) per radius sample.

    Parameters
    ----------
    rp_rearth : ndarray (N,), planet radius in Earth radii (one per posterior sample)
    rng : numpy Generator (all randomness comes from it)
    relation : one of :data:`RELATIONS`
    known_mp_mearth : a measured mass; when given it is used instead of any relation
    known_err : its 1-sigma error (Gaussian, truncated at 1 % of the mass)

    Returns
    -------
    mass : ndarray (N,), Earth masses
    used : ndarray (N,) of str, the relation name per sample (``"known"`` for a measured mass)
    """
    r = np.atleast_1d(np.asarray(rp_rearth, dtype=float))
    if relation not in RELATIONS:
        raise ValueError(f"unknown mass-radius relation {relation!r}; choose one of {', '.join(RELATIONS)}")
    if known_mp_mearth is not None and np.isfinite(known_mp_mearth):
        if known_mp_mearth <= 0:
            raise ValueError(f"planet mass must be positive, got {known_mp_mearth} M_earth")
        m = known_mp_mearth + max(known_err, 0.0) * rng.standard_normal(r.shape)
        return np.maximum(m, 0.01 * known_mp_mearth), np.full(r.shape, "known")
    if np.any(~np.isfinite(r) | (r <= 0)):
        raise ValueError("planet radius must be positive and finite for every sample")
    used = relation_for_radius(r) if relation == "auto" else np.full(r.shape, relation)
    m = np.empty_like(r)
    # One draw per relation group; the Generator is consumed in a fixed order (reproducible).
    for name, fn in (("otegi20-rocky", lambda x: _draw_otegi(x, rng, _OT_ROCKY)),
                     ("wrf16", lambda x: _draw_wrf16(x, rng)),
                     ("otegi20-volatile", lambda x: _draw_otegi(x, rng, _OT_VOL)),
                     ("giant", lambda x: _draw_giant(x, rng))):
        sel = used == name
        if np.any(sel):
            m[sel] = fn(r[sel])
    return m, used
