"""Eccentricity priors, tabulated for fast inverse-CDF sampling.

Each prior is a density on e in [0, e_max) (e_max = 0.99 unless the prior says otherwise), tabulated on a
fine grid so that drawing is a single ``np.interp`` (no per-sample special functions).

Published priors (names used on the command line):

``kipping13``         Beta(a=0.867, b=3.03), Kipping 2013, MNRAS 434, L51 (RV planets). Default.
``vaneylen19-single`` half-Gaussian sigma = 0.32, Van Eylen et al. 2019, AJ 157, 61 (single transiting
                      small planets with asteroseismic densities).
``vaneylen19-multi``  half-Gaussian sigma = 0.083, same paper (multi-planet systems).
``vaneylen15``        Rayleigh sigma = 0.049, Van Eylen & Albrecht 2015, ApJ 808, 126 (Kepler multis).
``uniform``           uniform on [0, 0.99) (common practice; Dawson & Johnson 2012 used it).
Parametric forms: ``beta:A,B``, ``halfnormal:SIGMA``, ``rayleigh:SIGMA``, ``uniform:EMAX``.

These are population priors, not yet conditioned on the planet transiting: the sampler multiplies by the
transit-probability factor (1 + e sin w)/(1 - e^2) (Barnes 2007; Kipping 2014b) when asked to.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats

__all__ = ["EccPrior", "MeasuredEcc", "parse_prior", "PRIOR_NAMES", "DEFAULT_PRIOR", "measured_prior",
           "reweight_to_prior", "measured_ecc_problem", "MEASURED_ECC_DEFAULT_ERR"]

DEFAULT_PRIOR = "kipping13"
E_MAX = 0.99
_NGRID = 8193

PRIOR_NAMES = {
    "kipping13": ("beta", (0.867, 3.03), "Beta(0.867, 3.03), Kipping 2013"),
    "vaneylen19-single": ("halfnormal", (0.32,), "half-Gaussian sigma 0.32, Van Eylen et al. 2019 (singles)"),
    "vaneylen19-multi": ("halfnormal", (0.083,), "half-Gaussian sigma 0.083, Van Eylen et al. 2019 (multis)"),
    "vaneylen15": ("rayleigh", (0.049,), "Rayleigh sigma 0.049, Van Eylen & Albrecht 2015"),
    "uniform": ("uniform", (E_MAX,), "uniform on [0, 0.99)"),
}


@dataclass(frozen=True)
class EccPrior:
    """A tabulated eccentricity prior on [0, e_max).

    Attributes
    ----------
    name : str
        Label used in reports.
    e_grid, cdf : ndarray
        The tabulated CDF (monotone, 0 at e = 0, 1 at e_max).
    mean_transit_boost : float
        Prior mean of 1/(1 - e^2): the normalisation of the transit-probability factor, so that the
        eccentric hypothesis' evidence is comparable with the circular one.
    """

    name: str
    e_grid: np.ndarray
    cdf: np.ndarray
    mean_transit_boost: float
    description: str = ""

    def ppf(self, u):
        """Eccentricity at prior quantile u in [0, 1] (vectorised inverse CDF).

        Uses a table of e on a uniform grid of u (built once), so each call is arithmetic indexing and
        a linear interpolation, with no search.

        Parameters
        ----------
        u : float or ndarray
            Prior quantile in [0, 1] (clipped).

        Returns
        -------
        ndarray
            Eccentricity (dimensionless).
        """
        table = self._ppf_table()
        n = len(table) - 1
        x = np.clip(np.asarray(u, dtype=float), 0.0, 1.0) * n
        i = np.minimum(x.astype(int), n - 1)
        f = x - i
        return table[i] * (1 - f) + table[i + 1] * f

    def _ppf_table(self):
        t = self.__dict__.get("_table")
        if t is None:
            t = np.interp(np.linspace(0, 1, 65537), self.cdf, self.e_grid)
            object.__setattr__(self, "_table", t)
        return t

    def mean(self) -> float:
        """Prior mean of the eccentricity (from the tabulated CDF, midpoint rule).

        Returns
        -------
        float
            Mean e (dimensionless).
        """
        pdf_mass = np.diff(self.cdf)
        mid = 0.5 * (self.e_grid[1:] + self.e_grid[:-1])
        return float(np.sum(pdf_mass * mid))

    def pdf(self, e):
        """Prior density at e (per unit e): the tabulated CDF's cell slope (0 outside [0, e_max)).

        Parameters
        ----------
        e : float or ndarray
            Eccentricity (dimensionless).

        Returns
        -------
        ndarray
            Prior density, per unit e.
        """
        e = np.asarray(e, dtype=float)
        dens = np.diff(self.cdf) / np.diff(self.e_grid)
        return np.where((e >= 0) & (e < self.e_grid[-1]), dens[self._cell(e)], 0.0)

    def _cell(self, e):
        """Index of the grid cell holding each e: searchsorted(e_grid, e, "right") - 1, clipped to the
        cells. On a uniform grid the index comes from arithmetic, corrected by one comparison with
        each neighbouring edge (the same index as the search, without it)."""
        grid = self.e_grid
        last = len(grid) - 2
        step = (grid[-1] - grid[0]) / (last + 1)
        uniform = self.__dict__.get("_uniform")
        if uniform is None:
            uniform = bool(step > 0 and np.allclose(np.diff(grid), step, rtol=1e-9, atol=0))
            object.__setattr__(self, "_uniform", uniform)
        if e.ndim == 0 or not uniform:
            return np.clip(np.searchsorted(grid, e, side="right") - 1, 0, last)
        with np.errstate(invalid="ignore"):
            i = np.clip(np.nan_to_num((e - grid[0]) / step, nan=last), 0, last).astype(np.intp)
        i -= grid[i] > e                      # the estimate was one cell too high
        np.clip(i, 0, last, out=i)
        i += (i < last) & (grid[np.minimum(i + 1, last + 1)] <= e)   # one cell too low
        return i

    def prob_above(self, e_cut: float, transit_prob: bool = False) -> float:
        """P(e > e_cut) under the prior, optionally times the transit-probability factor.

        The factor (1 + e sin w)/(1 - e^2) averages to 1/(1 - e^2) over a uniform w, so the transit-
        weighted prior on e is p(e)/(1 - e^2) normalised by ``mean_transit_boost`` (Kipping 2014b).

        Parameters
        ----------
        e_cut : float
            Eccentricity threshold (dimensionless).
        transit_prob : bool
            Weight the prior by the transit-probability factor.

        Returns
        -------
        float
            Probability (dimensionless, in [0, 1]).
        """
        mass = np.diff(self.cdf)
        mid = 0.5 * (self.e_grid[1:] + self.e_grid[:-1])
        if transit_prob:
            mass = mass / (1.0 - mid**2)
        mass = mass / mass.sum()
        return float(np.sum(mass[mid > e_cut]))


def _tabulate(name: str, pdf, e_max: float, description: str) -> EccPrior:
    e = np.linspace(0.0, e_max, _NGRID)
    p = np.asarray(pdf(e), dtype=float)
    p = np.where(np.isfinite(p), p, 0.0)
    # trapezoid CDF, with the integrable singularity of Beta(a<1) at 0 handled by the first cell's
    # analytic mass when available (cdf callable), else by the trapezoid of a tiny first cell
    mid = 0.5 * (e[1:] + e[:-1])
    pm = np.asarray(pdf(mid), dtype=float)
    cell = pm * np.diff(e)  # midpoint rule, robust to the singularity at e = 0
    cdf = np.concatenate([[0.0], np.cumsum(cell)])
    cdf /= cdf[-1]
    boost = float(np.sum(np.diff(cdf) / (1.0 - mid**2)))
    return EccPrior(name, e, cdf, boost, description)


def parse_prior(spec: str | None) -> EccPrior:
    """Build a prior from a name (see module docstring) or ``KIND:PARAMS``; raise ValueError if unknown.

    Parameters
    ----------
    spec : str or None
        A name of ``PRIOR_NAMES`` or ``beta:A,B``, ``halfnormal:S``, ``rayleigh:S``, ``uniform:EMAX``
        (None: the default prior).

    Returns
    -------
    EccPrior
        The tabulated prior on e (dimensionless).
    """
    spec = (spec or DEFAULT_PRIOR).strip()
    if spec in PRIOR_NAMES:
        kind, params, desc = PRIOR_NAMES[spec]
        name = spec
    else:
        kind, _, rest = spec.partition(":")
        kind = kind.strip().lower()
        try:
            params = tuple(float(x) for x in rest.split(",")) if rest.strip() else ()
        except ValueError:
            raise ValueError(f"eccentricity prior '{spec}': parameters must be numbers") from None
        name, desc = spec, spec
    nparams = {"beta": 2, "halfnormal": 1, "rayleigh": 1, "uniform": 1}
    if kind not in nparams:
        known = ", ".join(list(PRIOR_NAMES) + ["beta:A,B", "halfnormal:S", "rayleigh:S", "uniform:EMAX"])
        raise ValueError(f"unknown eccentricity prior '{spec}'; choose one of {known}")
    if len(params) != nparams[kind] or any(not np.isfinite(p) or p <= 0 for p in params):
        raise ValueError(f"eccentricity prior '{spec}' needs {nparams[kind]} positive number(s)")
    if kind == "beta":
        a, b = params
        return _tabulate(name, lambda e: stats.beta.pdf(e, a, b), E_MAX, desc)
    if kind == "halfnormal":
        (s,) = params
        return _tabulate(name, lambda e: np.exp(-0.5 * (e / s) ** 2), E_MAX, desc)
    if kind == "rayleigh":
        (s,) = params
        return _tabulate(name, lambda e: e / s**2 * np.exp(-0.5 * (e / s) ** 2), E_MAX, desc)
    (emax,) = params
    if emax >= 1:
        raise ValueError(f"eccentricity prior '{spec}': EMAX must be below 1")
    return _tabulate(name, lambda e: np.ones_like(e), emax, desc)


@dataclass(frozen=True)
class MeasuredEcc(EccPrior):
    """A published eccentricity measurement used as the distribution of e: a split normal with mode
    ``value`` and widths ``err_lo``/``err_hi``, truncated to [0, e_max).

    The inverse CDF is exact (closed form through the normal quantile function, scipy.special.ndtri),
    so every draw lies where the measurement puts it: no tabulated cell can map a sliver of u onto a
    wide range of e.
    """

    value: float = 0.0
    err_lo: float = 0.01
    err_hi: float = 0.01

    def _bounds(self):
        from rhofollow.physics.sampling import split_normal_cdf
        c0 = float(split_normal_cdf(0.0, self.value, self.err_lo, self.err_hi))
        c1 = float(split_normal_cdf(self.e_grid[-1], self.value, self.err_lo, self.err_hi))
        return c0, c1

    def ppf(self, u):
        """Eccentricity at quantile u of the truncated split normal (exact inverse CDF).

        Parameters
        ----------
        u : float or ndarray
            Quantile in [0, 1] (clipped).

        Returns
        -------
        ndarray
            Eccentricity (dimensionless), in [0, e_max).
        """
        from rhofollow.physics.sampling import split_normal_ppf
        c0, c1 = self._bounds()
        uu = c0 + (c1 - c0) * np.clip(np.asarray(u, dtype=float), 0.0, 1.0)
        e = split_normal_ppf(uu, self.value, self.err_lo, self.err_hi)
        return np.clip(e, 0.0, np.nextafter(self.e_grid[-1], 0))

    def pdf(self, e):
        """Density of the truncated split normal at e.

        Parameters
        ----------
        e : float or ndarray
            Eccentricity (dimensionless).

        Returns
        -------
        ndarray
            Density per unit e (0 outside [0, e_max)).
        """
        from rhofollow.physics.sampling import split_normal_logpdf
        c0, c1 = self._bounds()
        e = np.asarray(e, dtype=float)
        dens = np.exp(split_normal_logpdf(e, self.value, self.err_lo, self.err_hi)) / (c1 - c0)
        return np.where((e >= 0) & (e < self.e_grid[-1]), dens, 0.0)


#: 1-sigma error of a measured eccentricity given without one (common practice, no source).
MEASURED_ECC_DEFAULT_ERR = 0.01


def measured_ecc_problem(value: float, err_lo: float, err_hi: float) -> str:
    """Why a measured eccentricity (value and its 1-sigma errors) cannot be used, or "".

    The measurement is unusable when its split normal puts (almost) no probability in [0, E_MAX), the
    range every sampler covers. The catalogue reader and :func:`measured_prior` share this test, so a
    row that ``check`` accepts is one ``assess`` can use (both give an error left out
    :data:`MEASURED_ECC_DEFAULT_ERR`).

    Parameters
    ----------
    value : float
        Measured eccentricity (dimensionless).
    err_lo, err_hi : float
        Its lower and upper 1-sigma errors (dimensionless).

    Returns
    -------
    str
        The reason, or "" when the measurement can be used.
    """
    from rhofollow.physics.sampling import split_normal_cdf
    slo = max(err_lo, 1e-4)
    shi = max(err_hi, 1e-4)
    if split_normal_cdf(E_MAX, value, slo, shi) - split_normal_cdf(0.0, value, slo, shi) < 1e-12:
        err = f"{slo:g}" if slo == shi else f"-{slo:g}/+{shi:g}"
        return (f"measured eccentricity {value:g} +- {err} lies entirely outside [0, {E_MAX:g}), the range "
                "the eccentricity samplers cover")
    return ""


def measured_prior(value: float, err_lo: float, err_hi: float) -> EccPrior:
    """The distribution of e from a published measurement (``ecc`` with its errors): split normal
    truncated to [0, 0.99), with an exact inverse CDF (:class:`MeasuredEcc`).

    Used when the catalogue gives ``ecc`` (a known orbit): the measurement replaces the population prior.
    The table (``e_grid``, ``cdf``) is kept for the moments; draws use the closed form.

    Parameters
    ----------
    value : float
        Measured eccentricity (dimensionless).
    err_lo, err_hi : float
        Its lower and upper 1-sigma errors (dimensionless, > 0).

    Returns
    -------
    EccPrior
        A :class:`MeasuredEcc`.
    """
    problem = measured_ecc_problem(value, err_lo, err_hi)
    if problem:
        raise ValueError(problem)
    slo = max(err_lo, 1e-4)
    shi = max(err_hi, 1e-4)
    from rhofollow.physics.sampling import split_normal_cdf
    if split_normal_cdf(E_MAX, value, slo, shi) - split_normal_cdf(0.0, value, slo, shi) < 1e-12:
        raise ValueError(f"measured eccentricity {value:g} lies entirely outside [0, {E_MAX:g})")
    # the table must resolve the measurement: grid from the bounds, dense around the value
    lo_e = max(0.0, value - 12 * slo)
    hi_e = min(E_MAX, value + 12 * shi)
    e = np.unique(np.concatenate([np.linspace(0.0, E_MAX, 513), np.linspace(lo_e, hi_e, 4097)]))
    cdf = split_normal_cdf(e, value, slo, shi)
    cdf = (cdf - cdf[0]) / (cdf[-1] - cdf[0])
    mid = 0.5 * (e[1:] + e[:-1])
    boost = float(np.sum(np.diff(cdf) / (1.0 - mid**2)))
    return MeasuredEcc(f"measured e={value:g}", e, cdf, boost, "published orbit", float(value), slo, shi)


def reweight_to_prior(e, weights, prior: EccPrior, other: EccPrior):
    """Weights of the same posterior samples under ``other`` instead of ``prior`` (normalised to 1).

    Importance re-weighting by the prior ratio: w' = w p_other(e) / p_prior(e) (the likelihood and
    every other prior factor cancel). Returns None when no sample keeps weight (``other`` puts no
    mass where the samples are). e dimensionless, weights any positive scale.

    Parameters
    ----------
    e : ndarray
        Eccentricities of the samples (dimensionless).
    weights : ndarray
        Their weights under ``prior`` (any positive scale).
    prior, other : EccPrior
        The prior the samples were drawn under and the one to re-weight to.

    Returns
    -------
    ndarray or None
        Weights under ``other``, summing to 1 (dimensionless).
    """
    e = np.asarray(e, dtype=float)
    p_def = prior.pdf(e)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(p_def > 0, other.pdf(e) / p_def, 0.0)
    wu = np.asarray(weights, dtype=float) * ratio
    total = wu.sum()
    if not total > 0:
        return None
    return wu / total
