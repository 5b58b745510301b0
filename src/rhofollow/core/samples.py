"""The per-target posterior sample set: the one object that flows through the pipeline.

Every downstream number (occultation window, K range, RV hours, priority) is computed from the
same weighted samples, so uncertainties propagate consistently.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np

__all__ = ["SampleSet", "SAMPLE_COLUMNS", "weighted_quantiles", "quantile_dict", "QUANTILE_LEVELS",
           "kish_ess", "RELIABLE_ESS", "reliability"]

#: Column name -> unit (internal units). All arrays have the same length N.
SAMPLE_COLUMNS = {
    "e": "",                 # eccentricity
    "omega": "rad",          # argument of periastron, RV convention (transit at f = pi/2 - omega)
    "b": "",                 # transit impact parameter (sky-projected, in stellar radii)
    "k": "",                 # planet-to-star radius ratio Rp/R* (undiluted, of the host star)
    "period": "d",           # orbital period
    "t0": "d",               # mid-transit epoch, BJD_TDB
    "rho_star": "g/cm3",     # density of the host star
    "mstar": "solMass",      # host mass
    "rstar": "solRad",       # host radius
    "a_rs": "",              # true semi-major axis in stellar radii, from rho_star and period
    "inc": "rad",            # orbital inclination
    "teff": "K",             # host effective temperature (NaN when unknown)
}

QUANTILE_LEVELS = {"q025": 0.025, "q16": 0.16, "q50": 0.5, "q84": 0.84, "q975": 0.975}

#: Effective sample size below which a target's quantiles are reported as unreliable.
#: With ESS effective draws the CDF level of a quantile p is known to about
#: sqrt(p (1 - p) / ESS) (binomial standard error): at ESS = 100 the 2.5 % tail holds about 2.5
#: effective samples and its level is uncertain by +-1.6 percentage points, so q025 / q975 are
#: barely defined below it. Vehtari et al. (2021, Bayesian Analysis 16, 667) ask for an ESS of at
#: least 100 per chain before quantiles are trusted (value from memory); the floor follows them.
RELIABLE_ESS = 100.0


def kish_ess(weights: np.ndarray) -> float:
    """Kish effective sample size (sum w)^2 / sum w^2 of importance weights (0 when the weights
    are empty, all zero or not finite).

    Parameters
    ----------
    weights : ndarray
        Importance weights (any positive scale).

    Returns
    -------
    float
        Effective number of samples.
    """
    w = np.asarray(weights, dtype=float)
    if w.size == 0 or not np.all(np.isfinite(w)):
        return 0.0
    s = w.sum()
    if not np.isfinite(s) or s <= 0:
        return 0.0
    return float(s * s / np.sum(w * w))


def reliability(ess: float | None, floor: float = RELIABLE_ESS) -> tuple[bool, str]:
    """``(reliable, reason)``: whether quantiles from ``ess`` effective samples can be trusted.

    ``reason`` is empty when reliable, else one sentence naming the ESS and the floor.

    Parameters
    ----------
    ess : float or None
        Effective sample size (None or NaN: unknown).
    floor : float
        Smallest ESS that counts as reliable.

    Returns
    -------
    (bool, str)
        Whether reliable, and the reason when not.
    """
    try:
        e = float(ess)
    except (TypeError, ValueError):
        e = float("nan")
    if math.isfinite(e) and e >= floor:
        return True, ""
    shown = f"{e:.1f}" if math.isfinite(e) else "unknown"
    return False, (f"effective sample size {shown} is below {floor:.0f}: the quantiles rest on too "
                   "few effective samples to be trusted (draw more samples)")


def weighted_quantiles(x: np.ndarray, weights: np.ndarray | None, q) -> np.ndarray:
    """Quantiles of weighted samples (inverse of the weighted empirical CDF, midpoint rule).

    Parameters
    ----------
    x : array (N,) or (T, N)
        Samples; a 2-D array gives quantiles per row.
    weights : array like x, or None for equal weights
    q : float or array of probabilities in [0, 1]

    Samples that are not finite, or whose weight is not finite and positive, are left out. A row
    with nothing left (no samples, all weights zero) gives NaN quantiles: "not available", never
    an exception.
    """
    x = np.asarray(x, dtype=float)
    qa = np.atleast_1d(np.asarray(q, dtype=float))
    if weights is None:
        weights = np.ones_like(x)
    w = np.broadcast_to(np.asarray(weights, dtype=float), x.shape)
    if x.ndim == 1:
        return _weighted_quantiles_1d(x, w, qa, q)
    x2, w2 = x, w
    good = np.isfinite(x2) & np.isfinite(w2) & (w2 > 0)
    w2 = np.where(good, w2, 0.0)
    x2 = np.where(good, x2, np.inf)          # sorted to the end, with zero weight
    order = np.argsort(x2, axis=-1)
    xs = np.take_along_axis(x2, order, axis=-1)
    ws = np.take_along_axis(w2, order, axis=-1)
    cw = np.cumsum(ws, axis=-1)
    out = np.full((x2.shape[0], qa.size), np.nan)
    for i in range(x2.shape[0]):
        m = int(np.count_nonzero(good[i]))
        tot = cw[i, -1] if cw.shape[1] else 0.0
        if m == 0 or not (np.isfinite(tot) and tot > 0):
            continue
        cdf = (cw[i, :m] - 0.5 * ws[i, :m]) / tot
        out[i] = np.interp(qa, cdf, xs[i, :m])
    return out if np.ndim(q) else out[..., 0]


def _weighted_quantiles_1d(x, w, qa, q):
    """:func:`weighted_quantiles` of one row: the same operations without the 2-D bookkeeping (and
    without copies when every sample counts)."""
    good = np.isfinite(x) & np.isfinite(w) & (w > 0)
    m = int(np.count_nonzero(good))
    if m < x.size:
        w = np.where(good, w, 0.0)
        x = np.where(good, x, np.inf)        # sorted to the end, with zero weight
    order = np.argsort(x)
    xs = x[order]
    ws = w[order]
    cw = np.cumsum(ws)
    out = np.full(qa.size, np.nan)
    tot = cw[-1] if cw.size else 0.0
    if m and np.isfinite(tot) and tot > 0:
        cdf = (cw[:m] - 0.5 * ws[:m]) / tot
        out[:] = np.interp(qa, cdf, xs[:m])
    return out if np.ndim(q) else out[..., 0]


def quantile_dict(x: np.ndarray, weights: np.ndarray | None = None, scale: float = 1.0) -> dict:
    """Quantile object of the JSON contract: keys q025, q16, q50, q84, q975.

    Every value is None ("not available", null in JSON) when there is nothing to summarise (no
    finite sample with positive weight), or when a quantile is not finite.

    Parameters
    ----------
    x : ndarray
        Sample values (any unit).
    weights : ndarray, optional
        Sample weights (any positive scale; None: equal).
    scale : float
        Factor applied to the quantiles (e.g. a unit conversion).

    Returns
    -------
    dict
        Keys q025, q16, q50, q84, q975: floats in the unit of ``x`` times ``scale``, or None.
    """
    x = np.asarray(x, dtype=float).ravel()
    if weights is not None:
        weights = np.broadcast_to(np.asarray(weights, dtype=float), x.shape) if x.size else \
            np.asarray(weights, dtype=float).ravel()[:0]
    if x.size == 0:
        return {k: None for k in QUANTILE_LEVELS}
    with np.errstate(over="ignore", invalid="ignore"):
        vals = weighted_quantiles(x, weights, list(QUANTILE_LEVELS.values())) * scale
    return {k: (float(v) if np.isfinite(v) else None) for k, v in zip(QUANTILE_LEVELS, vals)}


@dataclass
class SampleSet:
    """Weighted posterior samples of one target.

    Attributes are numpy arrays of equal length N in the units of :data:`SAMPLE_COLUMNS`;
    ``weights`` are normalised to sum to 1. ``ess`` is the Kish effective sample size.
    ``meta`` carries scalars of the target used downstream (for example ``vmag``, ``logg``,
    ``ra_deg``, ``dec_deg``, ``star_route``), never per-sample arrays.
    """

    name: str
    e: np.ndarray
    omega: np.ndarray
    b: np.ndarray
    k: np.ndarray
    period: np.ndarray
    t0: np.ndarray
    rho_star: np.ndarray
    mstar: np.ndarray
    rstar: np.ndarray
    a_rs: np.ndarray
    inc: np.ndarray
    teff: np.ndarray
    weights: np.ndarray
    meta: dict = field(default_factory=dict)

    def __post_init__(self):
        n = len(self.weights)
        for c in SAMPLE_COLUMNS:
            arr = np.asarray(getattr(self, c), dtype=float)
            if arr.shape != (n,):
                arr = np.broadcast_to(arr, (n,)).copy()
            setattr(self, c, arr)
        w = np.asarray(self.weights, dtype=float)
        w = np.where(np.isfinite(w) & (w > 0), w, 0.0)   # NaN or negative weights carry nothing
        s = w.sum()
        self.weights = w / s if np.isfinite(s) and s > 0 else w

    @property
    def n(self) -> int:
        """Number of samples.

        Returns
        -------
        int
            Samples held (weighted or not).
        """
        return len(self.weights)

    @property
    def ess(self) -> float:
        """Kish effective sample size of the weights.

        Returns
        -------
        float
            Effective number of samples.
        """
        return kish_ess(self.weights)

    @property
    def reliable(self) -> bool:
        """Whether the effective sample size reaches :data:`RELIABLE_ESS`."""
        return reliability(self.ess)[0]

    def quantiles(self, column: str, scale: float = 1.0) -> dict:
        """Quantile object (q025..q975) of one column, weighted.

        Parameters
        ----------
        column : str
            A column of ``SAMPLE_COLUMNS`` (internal units: days, radians, g/cm^3, Msun, Rsun, K).
        scale : float
            Factor applied to the quantiles.

        Returns
        -------
        dict
            Keys q025..q975, unit of the column times ``scale`` (None: not available).
        """
        return quantile_dict(getattr(self, column), self.weights, scale)

    def reweighted(self, log_like: np.ndarray) -> "SampleSet":
        """A copy with weights multiplied by exp(log_like) (numerically stabilised).

        Parameters
        ----------
        log_like : ndarray (n,)
            Log-likelihood of further data per sample (natural log; -inf or NaN drops the sample).

        Returns
        -------
        SampleSet
            The same samples with the new weights (normalised to 1).
        """
        ll = np.asarray(log_like, dtype=float)
        ll = np.where(np.isfinite(ll), ll, -np.inf)
        m = np.max(ll)
        w = self.weights * np.exp(ll - m) if np.isfinite(m) else np.zeros_like(self.weights)
        kw = {c: getattr(self, c) for c in SAMPLE_COLUMNS}
        return SampleSet(name=self.name, weights=w, meta=dict(self.meta), **kw)

    def resample(self, n: int, rng: np.random.Generator) -> dict:
        """Equal-weight draws (systematic resampling): dict column -> array (n,).

        Parameters
        ----------
        n : int
            Number of draws.
        rng : numpy.random.Generator
            Source of the one uniform offset.

        Returns
        -------
        dict
            Column name -> array (n,) in the column's internal unit.
        """
        if self.n == 0 or not self.weights.sum() > 0:
            raise ValueError(f"{self.name}: no sample carries weight; nothing to resample")
        cw = np.cumsum(self.weights)
        cw[-1] = 1.0
        u = (rng.random() + np.arange(n)) / n
        idx = np.searchsorted(cw, u)
        return {c: getattr(self, c)[idx] for c in SAMPLE_COLUMNS}

    def to_table(self):
        """astropy Table with units (for ECSV export)."""
        from astropy.table import Table
        import astropy.units as u

        t = Table()
        for c, unit in SAMPLE_COLUMNS.items():
            vals = getattr(self, c)
            if c in ("omega", "inc"):
                t[c + "_deg"] = np.degrees(vals) * u.deg
            else:
                t[c] = vals * u.Unit(unit) if unit else vals
        t["weight"] = self.weights
        t.meta["name"] = self.name
        t.meta["ess"] = self.ess
        t.meta.update({k: v for k, v in self.meta.items() if isinstance(v, (int, float, str, bool))})
        return t

    def to_ecsv_text(self) -> str:
        """The ECSV file of :meth:`to_table`, written fast: astropy writes the header (column
        names, units, meta) and the body is formatted in one pass over plain floats, each as its
        shortest repr that reads back to the same float64 (Python's ``repr``; astropy writes the
        same text but formats cell by cell). Readable by ``astropy.table.Table.read(...,
        format="ascii.ecsv")``, and :meth:`from_table` of that gives these samples back exactly."""
        import io

        t = self.to_table()
        buf = io.StringIO()
        t[:0].write(buf, format="ascii.ecsv")
        if not self.n:
            return buf.getvalue()
        rows = np.column_stack([np.asarray(t[c], dtype=float) for c in t.colnames]).tolist()
        fmt = " ".join(["%r"] * len(t.colnames))
        buf.write("\n".join([fmt % tuple(r) for r in rows]))
        buf.write("\n")
        return buf.getvalue()

    def to_fits_bytes(self) -> bytes:
        """The FITS file of :meth:`to_table` (a binary table, float64 columns, units as ``TUNITn``,
        the meta as ``HIERARCH`` cards; see :mod:`rhofollow.core.sample_fits`), as bytes.
        ``astropy.table.Table.read`` reads it; every value comes back bit for bit, and
        :meth:`from_table` of it gives what :meth:`from_table` of :meth:`to_table` gives.

        Returns
        -------
        bytes
            The file's bytes (the same samples give the same bytes).
        """
        from rhofollow.core.sample_fits import table_fits_bytes

        return table_fits_bytes(self.to_table())

    @classmethod
    def from_table(cls, t) -> "SampleSet":
        """Inverse of :meth:`to_table`.

        Parameters
        ----------
        t : astropy.table.Table
            A table written by :meth:`to_table` (omega and inc in degrees), or read from the ECSV
            or FITS file of one (:meth:`to_ecsv_text`, :meth:`to_fits_bytes`).

        Returns
        -------
        SampleSet
            The samples (internal units: radians for omega and inc).
        """
        kw = {}
        for c, unit in SAMPLE_COLUMNS.items():
            if c in ("omega", "inc"):
                kw[c] = np.radians(np.asarray(t[c + "_deg"], dtype=float))
            else:
                kw[c] = np.asarray(t[c], dtype=float)
        from rhofollow.core.sample_fits import decode_fits_meta

        table_meta = decode_fits_meta(t.meta)
        meta = {k: v for k, v in table_meta.items() if k not in ("name", "ess")}
        return cls(name=table_meta["name"], weights=np.asarray(t["weight"], dtype=float), meta=meta, **kw)
