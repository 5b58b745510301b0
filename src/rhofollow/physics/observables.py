"""What the hypotheses are sampled against: measurements, the transit's observables, the host star's draws.

``Obs`` is one catalogue measurement as a split normal (Obs.value +hi/-lo); ``TransitObservables``
collects the transit fit's numbers (days for times and durations); ``StarPool`` holds joint draws of
the host star from its independent characterisation. Plain floats and numpy arrays, internal units
(days, radians, g/cm^3, solar units, K).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rhofollow.physics.constants import RHO_SUN_CGS
from rhofollow.physics.sampling import split_normal_logpdf, split_normal_ppf

__all__ = ["Obs", "TransitObservables", "StarPool"]


@dataclass(frozen=True)
class Obs:
    """A measured value with split-normal 1-sigma widths (lo, hi > 0)."""

    value: float
    lo: float
    hi: float

    def ppf(self, u):
        """Values at quantiles u of the measurement's split normal.

        Parameters
        ----------
        u : float or ndarray
            Quantile in [0, 1].

        Returns
        -------
        ndarray
            Values in the unit of ``value``.
        """
        return split_normal_ppf(u, self.value, self.lo, self.hi)

    def logpdf(self, x):
        """Log density of the measurement's split normal at x.

        Parameters
        ----------
        x : float or ndarray
            Values in the unit of ``value``.

        Returns
        -------
        ndarray
            Natural log of the density, per unit of ``value``.
        """
        return split_normal_logpdf(x, self.value, self.lo, self.hi)

    def draw(self, rng, m):
        """m random draws (untruncated); symmetric errors take the fast normal path.

        Parameters
        ----------
        rng : numpy.random.Generator
            Source of the draws.
        m : int
            Number of draws.

        Returns
        -------
        ndarray
            m values in the unit of ``value`` (the constant value when both widths are zero).
        """
        if self.lo <= 0 and self.hi <= 0:
            return np.full(m, self.value)
        if self.lo == self.hi:
            return self.value + self.lo * rng.standard_normal(m)
        return self.ppf(rng.random(m))


@dataclass(frozen=True)
class TransitObservables:
    """What the transit fit measured (days for times and durations).

    ``route`` is "durations" (needs t14) or "density" (needs ln_rho_circ: the split-normal description
    of log rho_circ in ln(g/cm^3)). With the durations route, ``ln_rho_circ`` (optional) only shapes
    the sampler's first proposal; the likelihood uses the durations. ``k`` is the observed (possibly diluted) radius ratio.
    ``dilution_known`` is D_known = 1/(1 - contam_frac) >= 1.
    """

    route: str
    period: Obs
    t0: Obs
    k: Obs
    t14: Obs | None = None
    t23: Obs | None = None
    b: Obs | None = None
    ln_rho_circ: Obs | None = None
    dilution_known: float = 1.0
    b_circ: Obs | None = None


@dataclass
class StarPool:
    """Joint draws of a star (rho g/cm^3, mstar Msun, rstar Rsun, teff K), sorted by density.

    A unit-cube coordinate u maps to the draw at quantile u of density, so the sampler can adapt to the
    part of the star's density distribution that the transit favours.
    """

    rho: np.ndarray
    mstar: np.ndarray
    rstar: np.ndarray
    teff: np.ndarray

    def __post_init__(self):
        order = np.argsort(self.rho)
        for name in ("rho", "mstar", "rstar", "teff"):
            setattr(self, name, np.asarray(getattr(self, name), dtype=float)[order])

    def take(self, u):
        """The joint draw at density quantile u of the pool.

        Parameters
        ----------
        u : ndarray
            Quantiles in [0, 1] (dimensionless).

        Returns
        -------
        (ndarray, ndarray, ndarray, ndarray)
            Density (g/cm^3), mass (Msun), radius (Rsun) and Teff (K).
        """
        idx = np.minimum((np.asarray(u) * len(self.rho)).astype(int), len(self.rho) - 1)
        return self.rho[idx], self.mstar[idx], self.rstar[idx], self.teff[idx]

    def _fit(self):
        if not hasattr(self, "_sn"):
            q16, q50, q84 = np.quantile(np.log(self.rho), [0.15865, 0.5, 0.84135])
            self._sn = (q50, max(q50 - q16, 1e-4), max(q84 - q50, 1e-4))
        return self._sn

    def log_density_ln(self, ln_rho):
        """Log density of ln(rho) under the star's measurement: a split normal fitted to the draws'
        16/50/84 % quantiles (smooth, with tails, so evidences of poor fits stay finite).

        Parameters
        ----------
        ln_rho : float or ndarray
            Natural log of the density in g/cm^3.

        Returns
        -------
        ndarray
            Log density per unit ln(rho).
        """
        mu, lo, hi = self._fit()
        return split_normal_logpdf(ln_rho, mu, lo, hi)

    def _bins(self):
        if not hasattr(self, "_b"):
            ln = np.log(self.rho)
            nb = 48
            lo, hi = ln[0], ln[-1] + 1e-9
            idx = np.minimum(((ln - lo) / (hi - lo) * nb).astype(int), nb - 1)
            cnt = np.maximum(np.bincount(idx, minlength=nb), 1)
            lnm = np.log(self.mstar)
            mean_m = np.bincount(idx, weights=lnm, minlength=nb) / cnt
            sd_m = np.sqrt(np.maximum(np.bincount(idx, weights=lnm**2, minlength=nb) / cnt - mean_m**2, 0))
            tf = np.nan_to_num(self.teff, nan=0.0)
            mean_t = np.bincount(idx, weights=tf, minlength=nb) / cnt
            empty = np.bincount(idx, minlength=nb) == 0
            for arr in (mean_m, sd_m, mean_t):  # empty bins borrow the nearest filled bin
                filled = np.flatnonzero(~empty)
                arr[empty] = arr[filled[np.abs(filled[:, None] - np.flatnonzero(empty)[None, :]).argmin(0)]] \
                    if empty.any() else arr[empty]
            self._b = (lo, (hi - lo) / nb, nb, mean_m, sd_m, mean_t, bool(np.isnan(self.teff).all()))
        return self._b

    def at_density(self, rho, rng=None):
        """Mass, radius and Teff for given densities (g/cm^3).

        The mass follows the star's joint draws: its log-mean and spread in the density bin of each
        sample (48 bins over the pool's range; O(1) per sample). The radius then makes the density
        exact: R = (M / (rho/rho_sun))^(1/3) in solar units.

        Parameters
        ----------
        rho : ndarray
            Stellar densities, g/cm^3.
        rng : numpy.random.Generator, optional
            Draws the mass's scatter within its bin (None: the bin's mean).

        Returns
        -------
        (ndarray, ndarray, ndarray)
            Mass (Msun), radius (Rsun) and Teff (K; NaN when the pool has none).
        """
        lo, width, nb, mean_m, sd_m, mean_t, no_teff = self._bins()
        i = np.clip(((np.log(rho) - lo) / width).astype(int), 0, nb - 1)
        lnm = mean_m[i]
        if rng is not None:
            lnm = lnm + sd_m[i] * rng.standard_normal(len(i))
        mstar = np.exp(lnm)
        rstar = np.cbrt(mstar / (rho / RHO_SUN_CGS))
        teff = np.full(len(i), np.nan) if no_teff else mean_t[i]
        return mstar, rstar, teff
