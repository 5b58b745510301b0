"""The ledger's measurements as log-likelihoods per posterior sample (part of :mod:`rhofollow.stages.update`).

* RVs: :func:`rhofollow.physics.rvupdate.rv_log_likelihood` (per-instrument offsets and K > 0
  marginalised analytically, jitter in quadrature);
* a measured occultation mid-time: :func:`rhofollow.physics.occultation_timing.timing_log_like`;
* a non-detection over a window: :func:`rhofollow.physics.occultation_timing.non_detection_log_like`
  with each sample's predicted depth in the observation's band.
"""
from __future__ import annotations

import numpy as np

from rhofollow.core.samples import SampleSet
from rhofollow.core.types import RVSeries
from rhofollow.io.ledger import OccultationTiming
from rhofollow.physics import occultation_timing as ot

__all__ = ["DEFAULT_BAND_UM", "CONFLICT_SIGMA", "rv_log_like", "occultation_log_like", "data_log_like"]

#: Band assumed for a non-detection recorded without one (microns); each use is a warning.
DEFAULT_BAND_UM = 4.5
#: A measured occultation time further than this (in its own sigmas) from every sample warns.
CONFLICT_SIGMA = 5.0


def rv_log_like(samples: SampleSet, rvs: RVSeries, *, jitter_ms: float = 0.0) -> np.ndarray:
    """RV log-likelihood per sample (zeros without RVs).

    Parameters
    ----------
    samples : SampleSet
        Posterior samples (period in days, t0 BJD_TDB, e, omega in radians).
    rvs : RVSeries
        The target's RVs (BJD_TDB days, m/s), e.g. :meth:`Ledger.rv_series`.
    jitter_ms : float
        Stellar jitter added in quadrature (m/s).

    Returns
    -------
    ndarray (S,)
        One log-likelihood per sample; instruments get offsets indexed in name order.
    """
    if not rvs.n:
        return np.zeros(samples.n)
    from rhofollow.physics.rvupdate import rv_log_likelihood

    names = rvs.instrument.tolist()
    insts = sorted(set(names))
    groups = np.array([insts.index(i) for i in names])
    return rv_log_likelihood(rvs.bjd_tdb, rvs.rv_ms, rvs.rv_err_ms, groups, samples.period,
                             samples.t0, samples.e, samples.omega, jitter_ms=jitter_ms)


def occultation_log_like(samples: SampleSet, timings: list[OccultationTiming], *,
                         threshold_sigma: float = 3.0, depth_kw: dict | None = None
                         ) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """Log-likelihoods per sample of the detections and of the non-detections, and warnings.

    Parameters
    ----------
    samples : SampleSet
        Posterior samples (period in days, t0 BJD_TDB, e, omega in radians, a/R*, R* in Rsun,
        inclination in radians, k, Teff in K).
    timings : list of OccultationTiming
        The ledger's occultation timings (mid-times and windows in BJD_TDB, errors in days, depth
        limits in ppm, bands in microns).
    threshold_sigma : float
        Detection threshold of a non-detection (sigmas of its depth limit).
    depth_kw : dict or None
        Options of the predicted depth (albedos, redistribution).

    Returns
    -------
    ll_det, ll_non : ndarray (S,)
        Log-likelihood per sample of the detections and of the non-detections.
    warnings : list of str
        Conflicting timings, non-detections without a band or without a depth.
    """
    s = samples
    geom = dict(a_rs=s.a_rs, rstar=s.rstar, inc=s.inc, k=s.k)
    ll_det = np.zeros(s.n)
    ll_non = np.zeros(s.n)
    warnings: list[str] = []
    for o in timings:
        if o.kind == "detection":
            ll = ot.timing_log_like(s.t0, s.period, s.e, s.omega, o.mid_bjd_tdb, o.mid_err_d,
                                    **geom)
            best = np.max(np.where(s.weights > 0, ll, -np.inf))
            if best < -0.5 * CONFLICT_SIGMA**2:
                warnings.append(f"no posterior sample predicts the occultation at "
                                f"{o.mid_bjd_tdb} BJD_TDB within {CONFLICT_SIGMA:.0f} sigma; the "
                                "timing conflicts with the posterior (check the ephemeris)")
            ll_det += ll
            continue
        band = o.band_um
        if band is None:
            band = DEFAULT_BAND_UM
            warnings.append(f"non-detection {o.window_start_bjd_tdb}-{o.window_end_bjd_tdb} has no "
                            f"band; its depth was predicted at {DEFAULT_BAND_UM} micron")
        depth = ot.predicted_depth_ppm(s.k, s.a_rs, s.e, s.omega, s.teff, band,
                                       **(depth_kw or {}))
        if not np.any(np.isfinite(depth)):
            warnings.append(f"non-detection {o.window_start_bjd_tdb}-{o.window_end_bjd_tdb} "
                            "ignored: the stellar Teff is unknown, so no depth can be predicted")
            continue
        ll_non += ot.non_detection_log_like(s.t0, s.period, s.e, s.omega, o.window_start_bjd_tdb,
                                            o.window_end_bjd_tdb, depth, o.depth_limit_ppm,
                                            threshold_sigma=threshold_sigma, **geom)
    return ll_det, ll_non, warnings


def data_log_like(name: str, rvs, timings, *, jitter_ms: float = 0.0, threshold_sigma: float = 3.0):
    """The ledger data's log-likelihood as a function of the sampler's physical arrays (for
    :func:`rhofollow.stages.assess.assess_target`'s ``extra_loglike``).

    Parameters
    ----------
    name : str
        The target.
    rvs : RVSeries
        Its RVs (BJD_TDB days, m/s).
    timings : list of OccultationTiming
        Its occultation timings (BJD_TDB, days).
    jitter_ms : float
        Stellar jitter added in quadrature (m/s).
    threshold_sigma : float
        Detection threshold of a non-detection (sigmas).

    Returns
    -------
    callable
        ``f(aux) -> ndarray``: the summed log-likelihood per sample of the sampler's arrays
        (:data:`rhofollow.core.samples.SAMPLE_COLUMNS`).
    """
    from rhofollow.core.samples import SAMPLE_COLUMNS

    def f(aux: dict) -> np.ndarray:
        m = len(aux["e"])
        s = SampleSet(name=name, weights=np.ones(m), **{c: aux[c] for c in SAMPLE_COLUMNS})
        ll = rv_log_like(s, rvs, jitter_ms=jitter_ms)
        det, non, _ = occultation_log_like(s, timings, threshold_sigma=threshold_sigma)
        return ll + det + non

    return f
