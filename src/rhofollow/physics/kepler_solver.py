"""Kepler's equation E - e sin E = M, solved exactly and vectorised (radians, e in [0, 0.999]).

The solver follows Markley (1995, Celest. Mech. Dyn. Astron. 63, 101): a cubic starter built
from a Pade approximation of sin E, then one fifth-order correction. Its result is checked on the
residual |E - e sin E - M|; the few elements above the tolerance (if any) get safeguarded Newton
steps, and :class:`KeplerConvergenceError` is raised if any still fail: never a silent NaN.
The anomalies and conjunction times built on it are in :mod:`rhofollow.physics.kepler`.
"""
from __future__ import annotations

import numpy as np

from rhofollow.errors import NumericalError

__all__ = ["KeplerConvergenceError", "E_MAX", "RESIDUAL_TOL", "solve_kepler"]

#: Largest eccentricity accepted by the solver.
E_MAX = 0.999
#: Required accuracy of the solution: |E - e sin E - M| <= RESIDUAL_TOL (radians).
RESIDUAL_TOL = 1e-12

_TWO_PI = 2.0 * np.pi
_CHUNK = 1 << 14  # elements per block: the temporaries of one block stay in the CPU cache


class KeplerConvergenceError(NumericalError, ArithmeticError):
    """Raised when Kepler's equation could not be solved to :data:`RESIDUAL_TOL`."""


_P = np.float32  # constants of the float32 starter (Markley 1995, eq. 20)
_C0 = _P(3.0 * np.pi**2 / (np.pi**2 - 6.0))
_C1 = _P(1.6 * np.pi / (np.pi**2 - 6.0))
_PI32 = _P(np.pi)


def _markley_block(m, e):
    """Solve E - e sin E = m for m in [0, pi] (one block of float64 arrays).

    Returns ``(E, res)``: the eccentric anomaly and its residual E - e sin E - m, from the float32
    cubic starter (:func:`_markley_starter`) and one float64 fifth-order correction
    (:func:`_markley_correct`).
    """
    return _markley_correct(m, e, _markley_starter(m, e))


def _markley_starter(m, e):
    """Markley's (1995) cubic starter E1 (float64 array) for m in [0, pi], evaluated in float32.

    It only needs ~1e-4 accuracy before the fifth-order correction. Operations are in place to keep
    the temporaries of a block few.
    """
    m32 = m.astype(np.float32)
    e32 = e.astype(np.float32)
    # Markley (1995) eqs. (20)-(21) in float32: alpha, then d, q, r of the cubic.
    alpha = _PI32 - m32
    alpha *= _C1
    ome = _P(1.0) - e32
    alpha /= _P(1.0) + e32
    alpha += _C0
    d = alpha * e32
    d += _P(3.0) * ome
    ad = alpha * d
    m2 = m32 * m32
    q = ad * ome
    q *= _P(2.0)
    q -= m2
    r = d - ome
    r *= ad
    r *= _P(3.0)
    r += m2
    r *= m32
    w = q * q
    w *= q
    w += r * r
    np.maximum(w, _P(0.0), out=w)
    np.sqrt(w, out=w)
    w += np.abs(r)
    np.cbrt(w, out=w)
    w *= w                                   # w^(2/3)
    den = w + q
    den *= w
    den += q * q
    w *= r
    w *= _P(2.0)
    w /= den
    w += m32
    w /= d
    return w.astype(np.float64)


def _markley_correct(m, e, e1):
    """One fifth-order correction of the starter ``e1``, Markley (1995) eqs. (27)-(29), float64.

    Returns ``(E, res)`` with the residual E - e sin E - m. The sine and cosine of the starter come
    from one tangent of the half angle (sin x = 2t/(1+t^2), cos x = (1-t^2)/(1+t^2), t = tan(x/2);
    numpy's tangent is vectorised where its sine and cosine are not, which made the solver three
    times faster). The residual uses them and Taylor series of the (small) correction dd, truncated
    after dd^5 and dd^4 (error below 1e-15 for |dd| <= 0.01); larger corrections are flagged by an
    infinite residual so that the caller re-checks them with a direct sine. Operations are in place
    to keep the temporaries of a block few.
    """
    # sin and cos of e1 from one tangent of the half angle (one libm call instead of two)
    t = np.tan(0.5 * e1)
    t2 = t * t
    inv = 1.0 + t2
    np.divide(e, inv, out=inv)               # e / (1 + t^2)
    es = t * inv
    es *= 2.0                                # e sin e1 = e 2t / (1 + t^2)
    ec = 1.0 - t2
    ec *= inv                                # e cos e1 = e (1 - t^2) / (1 + t^2)
    f0 = e1 - es
    f0 -= m
    f1 = 1.0 - ec
    hes = 0.5 * es
    ec6 = ec / 6.0
    d3 = f0 * hes
    d3 /= f1
    d3 -= f1
    np.divide(f0, d3, out=d3)                # d3 = -f0 / (f1 - f0 es / (2 f1))
    d4 = d3 * ec6
    d4 += hes
    d4 *= d3
    d4 += f1
    np.divide(f0, d4, out=d4)
    np.negative(d4, out=d4)                  # d4 = -f0 / (f1 + d3 es / 2 + d3^2 ec / 6)
    d5 = es * (d4 / 24.0)
    np.subtract(ec6, d5, out=d5)
    d5 *= d4
    d5 += hes
    d5 *= d4
    d5 += f1
    np.divide(f0, d5, out=d5)
    np.negative(d5, out=d5)                  # d5 = -f0 / (f1 + d4 es / 2 + d4^2 (ec / 6 - d4 es / 24))
    big_e = e1 + d5
    dd = big_e - e1
    d2 = dd * dd
    sin_d = d2 * (1.0 / 120.0)
    sin_d -= 1.0 / 6.0
    sin_d *= d2
    sin_d += 1.0
    sin_d *= dd                              # dd - dd^3/6 + dd^5/120
    cos_d = d2 * (1.0 / 24.0)
    cos_d -= 0.5
    cos_d *= d2                              # cos dd - 1 = -dd^2/2 + dd^4/24
    # E - e sin E - m with sin(e1 + dd) = sin e1 cos dd + cos e1 sin dd
    res = f0 + dd
    cos_d *= es
    res -= cos_d
    sin_d *= ec
    res -= sin_d
    res[np.abs(dd) > 0.01] = np.inf
    return big_e, res


def _polish(m, e, big_e, max_iter=8):
    """Safeguarded Newton steps on the elements that miss the tolerance (m in [0, pi])."""
    lo = np.zeros_like(m)
    hi = np.full_like(m, np.pi)
    for _ in range(max_iter):
        res = big_e - e * np.sin(big_e) - m
        bad = np.abs(res) > RESIDUAL_TOL
        if not bad.any():
            return big_e, bad
        # The residual is increasing in E: keep a bracket and bisect when Newton leaves it.
        hi = np.where(res > 0, np.minimum(hi, big_e), hi)
        lo = np.where(res < 0, np.maximum(lo, big_e), lo)
        step = big_e - res / (1.0 - e * np.cos(big_e))
        outside = (step <= lo) | (step >= hi)
        big_e = np.where(bad, np.where(outside, 0.5 * (lo + hi), step), big_e)
    res = big_e - e * np.sin(big_e) - m
    return big_e, np.abs(res) > RESIDUAL_TOL


def solve_kepler(M, e, *, check: bool = True) -> np.ndarray:
    """Eccentric anomaly E solving Kepler's equation M = E - e sin E.

    Parameters
    ----------
    M : float or ndarray
        Mean anomaly, radians (any real value; the result keeps the same number of turns).
    e : float or ndarray
        Eccentricity in [0, 0.999], broadcast against ``M``.
    check : bool
        Verify |E - e sin E - M| <= 1e-12 and repair or raise (default). Only turn this off in
        benchmarks of the bare kernel.

    Returns
    -------
    ndarray (or float for scalar input)
        Eccentric anomaly in radians, with |E - e sin E - M| <= 1e-12.

    Raises
    ------
    ValueError
        If an eccentricity is outside [0, 0.999] or a value is not finite.
    KeplerConvergenceError
        If some element cannot be brought to the tolerance (not expected for valid input).
    """
    M_arr, e_arr = np.broadcast_arrays(np.asarray(M, dtype=float), np.asarray(e, dtype=float))
    scalar = M_arr.ndim == 0
    M_flat = np.ascontiguousarray(M_arr).ravel()
    e_flat = np.ascontiguousarray(e_arr).ravel()
    if not (np.all(np.isfinite(M_flat)) and np.all(np.isfinite(e_flat))):
        raise ValueError("solve_kepler: mean anomaly and eccentricity must be finite")
    if e_flat.size and (e_flat.min() < 0.0 or e_flat.max() > E_MAX):
        raise ValueError(f"solve_kepler: eccentricity must lie in [0, {E_MAX}]")
    out = np.empty_like(M_flat)
    for s in range(0, M_flat.size, _CHUNK):
        m = M_flat[s:s + _CHUNK]
        ee = e_flat[s:s + _CHUNK]
        # Reduce to [-pi, pi), then use the odd symmetry E(-M) = -E(M) to work on [0, pi].
        turns = np.floor((m + np.pi) / _TWO_PI)
        mr = m - turns * _TWO_PI
        ma = np.abs(mr)
        np.minimum(ma, np.pi, out=ma)
        big_e, res = _markley_block(ma, ee)
        if check:
            bad = ~(np.abs(res) <= RESIDUAL_TOL)
            if bad.any():
                fixed, still = _polish(ma[bad], ee[bad], big_e[bad])
                if still.any():
                    i = np.flatnonzero(bad)[np.flatnonzero(still)[0]]
                    raise KeplerConvergenceError(
                        f"Kepler's equation did not converge for M={ma[i]!r}, e={ee[i]!r}")
                big_e[bad] = fixed
        out[s:s + _CHUNK] = np.copysign(big_e, mr) + turns * _TWO_PI
    out = out.reshape(M_arr.shape)
    return float(out) if scalar else out
