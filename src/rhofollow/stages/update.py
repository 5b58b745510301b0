"""Learn from the ledger: re-weight a target's posterior samples with its measured RVs and its
occultation timings and non-detections, and store the new posterior version.

The density-based samples (from :mod:`rhofollow.stages.assess`) are the prior; each measurement adds a
log-likelihood per sample (:mod:`rhofollow.stages.update_likelihood`, whose names stay importable
from here): RVs, measured occultation mid-times, and non-detections over a window.
"""
from __future__ import annotations

import hashlib
import json
import math
from dataclasses import dataclass, field

import numpy as np

from rhofollow.io.ledger import Ledger
from rhofollow.core.types import Measurement, Target
from rhofollow.core.samples import SampleSet, quantile_dict
from rhofollow.core.defaults import DEFAULT_SAMPLES, DEFAULT_SEED
from rhofollow.errors import LedgerError
from rhofollow.stages.update_likelihood import (CONFLICT_SIGMA, DEFAULT_BAND_UM, data_log_like,  # noqa: F401
                                                occultation_log_like, rv_log_like)

__all__ = ["LedgerUpdate", "LedgerUpdateError", "DEFAULT_BAND_UM", "rv_log_like",
           "occultation_log_like", "posterior_summary", "update_from_ledger", "data_log_like",
           "target_from_catalogue_row", "update_targets", "apply_to_assessments", "MIN_ESS_WARNING", "CONFLICT_SIGMA"]

#: Below this effective sample size an update warns that more samples are needed.
MIN_ESS_WARNING = 200.0
#: Below this effective sample size after re-weighting, the posterior is drawn afresh with the data.
RESAMPLE_ESS = 1000.0


class LedgerUpdateError(LedgerError, ValueError):
    """The measurements cannot be reconciled with any sample (all weights vanish)."""


@dataclass
class LedgerUpdate:
    """The result of re-weighting one target with its ledger data."""

    target: str
    samples: SampleSet
    prior_ess: float
    n_rv: int
    n_detections: int
    n_non_detections: int
    source_hash: str
    summary: dict
    log_like: dict[str, np.ndarray] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    stored: bool = False

    @property
    def ess(self) -> float:
        """Kish effective sample size of the updated samples.

        Returns
        -------
        float
            Effective number of samples.
        """
        return self.samples.ess

    def record(self) -> dict:
        """JSON record (name, ok, errors, warnings, and the posterior summary).

        Returns
        -------
        dict
            ``name``, ``ok``, ``errors``, ``warnings``, ``prior_ess`` (samples), the measurement
            counts, ``source_hash``, ``stored_new_version`` and :func:`posterior_summary`'s keys.
        """
        return {"name": self.target, "ok": True, "errors": [], "warnings": list(self.warnings),
                "prior_ess": self.prior_ess, "n_rv": self.n_rv,
                "n_occ_detections": self.n_detections,
                "n_occ_non_detections": self.n_non_detections, "source_hash": self.source_hash,
                "stored_new_version": self.stored, **self.summary}


def _failure(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


def posterior_summary(samples: SampleSet) -> dict:
    """Quantiles of e, e cos omega, e sin omega, P(e < 0.05), N and ESS of a sample set.

    Parameters
    ----------
    samples : SampleSet
        Weighted posterior samples (omega in radians).

    Returns
    -------
    dict
        ``n_samples``, ``ess`` (samples), ``reliable`` (and ``reliability_note``), quantiles of
        ``ecc``, ``ecosw``, ``esinw`` (dimensionless) and ``p_ecc_below_0p05`` (probability).
    """
    s = samples
    w = s.weights
    from rhofollow.core.samples import reliability

    ok, why = reliability(s.ess)
    return {"n_samples": int(s.n), "ess": float(s.ess), "reliable": ok,
            **({"reliability_note": why} if why else {}),
            "ecc": quantile_dict(s.e, w),
            "ecosw": quantile_dict(s.e * np.cos(s.omega), w),
            "esinw": quantile_dict(s.e * np.sin(s.omega), w),
            "p_ecc_below_0p05": float(np.sum(w[s.e < 0.05]))}


def _source_hash(samples: SampleSet, rvs, timings, settings: dict) -> str:
    h = hashlib.sha256()
    for c in ("e", "omega", "period", "t0", "a_rs", "inc", "k", "rstar", "teff", "weights"):
        h.update(np.ascontiguousarray(getattr(samples, c), dtype=float).tobytes())
    h.update(json.dumps([list(r) for r in zip(rvs.bjd_tdb.tolist(), rvs.rv_ms.tolist(),
                                              rvs.rv_err_ms.tolist(), rvs.instrument.tolist())]
                        ).encode())
    h.update(json.dumps([list(o.__dict__.values()) for o in timings]).encode())
    h.update(json.dumps(settings, sort_keys=True).encode())
    return h.hexdigest()


def _drawn_afresh(target: Target, n: int, reweighted: SampleSet, loglike, prior, seed: int,
                  warnings: list) -> SampleSet:
    """The posterior drawn afresh with the data in the sampler's likelihood, when that gives more
    effective samples than re-weighting did (``reweighted``); else ``reweighted``."""
    from rhofollow.stages.assess import assess_target

    kw = {} if prior is None else {"prior": prior}
    fresh = assess_target(target, n_samples=n, seed=seed, hypotheses=("eccentric",), extra_loglike=loglike, **kw)
    if fresh.ok and fresh.samples is not None and fresh.samples.ess > reweighted.ess:
        warnings.append(f"re-weighting left {reweighted.ess:.0f} effective samples; the posterior was drawn "
                        f"afresh with the data in the likelihood (effective sample size "
                        f"{fresh.samples.ess:.0f})")
        return fresh.samples
    return reweighted


def update_from_ledger(ledger: Ledger, samples: SampleSet, *, jitter_ms: float = 0.0,
                       threshold_sigma: float = 3.0, store: bool = True, target: Target | None = None,
                       prior=None, seed: int = DEFAULT_SEED) -> LedgerUpdate:
    """Re-weight ``samples`` with everything the ledger holds for ``samples.name``.

    When the data are so informative that the re-weighted effective sample size falls below
    :data:`RESAMPLE_ESS` and the catalogue ``target`` is known, the posterior is drawn afresh with
    the data inside the sampler's likelihood (the adaptive proposal then follows the joint
    posterior), instead of keeping a handful of surviving samples.

    With ``store`` the summary is written as a posterior version (the same inputs twice add
    nothing: the version is keyed by a hash of the samples, the data and the settings).

    Parameters
    ----------
    ledger : Ledger
        The campaign ledger.
    samples : SampleSet
        The target's posterior (the prior of the update).
    jitter_ms : float
        Stellar jitter added in quadrature (m/s).
    threshold_sigma : float
        Detection threshold of a non-detection (sigmas).
    store : bool
        Write the summary as a posterior version.
    target : Target or None
        The catalogue row, needed to draw the posterior afresh.
    prior : str, EccPrior or None
        The eccentricity prior of a fresh draw (None: the default).
    seed : int
        The run seed of a fresh draw.

    Returns
    -------
    LedgerUpdate
        The updated samples, the log-likelihoods per sample, the summary and the warnings.

    Raises
    ------
    LedgerUpdateError
        The measurements exclude every sample.
    """
    name = samples.name
    rvs = ledger.rv_series(name)
    timings = ledger.occultation_timings(name)
    ll_rv = rv_log_like(samples, rvs, jitter_ms=jitter_ms)
    ll_det, ll_non, warnings = occultation_log_like(samples, timings,
                                                    threshold_sigma=threshold_sigma)
    total = ll_rv + ll_det + ll_non
    if not np.any(np.isfinite(total) & (samples.weights > 0)):
        raise LedgerUpdateError(f"{name}: the ledger's measurements exclude every posterior "
                                "sample; check the data or draw more samples")
    new = samples.reweighted(total)
    if new.ess < RESAMPLE_ESS and target is not None:
        loglike = data_log_like(name, rvs, timings, jitter_ms=jitter_ms, threshold_sigma=threshold_sigma)
        new = _drawn_afresh(target, samples.n, new, loglike, prior, seed, warnings)
    if new.ess < MIN_ESS_WARNING:
        warnings.append(f"effective sample size fell to {new.ess:.0f} of {new.n}; the updated "
                        "posterior is noisy (draw more samples)")
    settings = {"jitter_ms": jitter_ms, "threshold_sigma": threshold_sigma}
    src = _source_hash(samples, rvs, timings, settings)
    summary = posterior_summary(new)
    res = LedgerUpdate(target=name, samples=new, prior_ess=samples.ess, n_rv=rvs.n,
                       n_detections=sum(o.kind == "detection" for o in timings),
                       n_non_detections=sum(o.kind == "non_detection" for o in timings),
                       source_hash=src, summary=summary,
                       log_like={"rv": ll_rv, "occultation_timing": ll_det,
                                 "occultation_non_detection": ll_non},
                       warnings=warnings)
    if store:
        rep = ledger.add_posterior_version(name, source_hash=src, n_samples=new.n, ess=new.ess,
                                           summary=dict(summary, n_rv=res.n_rv,
                                                        n_occ_detections=res.n_detections,
                                                        n_occ_non_detections=res.n_non_detections,
                                                        **settings))
        res.stored = bool(rep.counts.get("posterior_versions"))
    return res


def target_from_catalogue_row(name: str, row: dict) -> Target:
    """Rebuild the catalogue :class:`Target` stored in the ledger (inverse of the ledger's JSON).

    Parameters
    ----------
    name : str
        The target.
    row : dict
        The ledger's stored row: ``values`` (column -> [value, err_lo, err_hi] in the reader's
        units, None for NaN), ``row`` and ``source``.

    Returns
    -------
    Target
        The row as the catalogue reader gave it.
    """
    def f(x):
        return math.nan if x is None else float(x)
    values = {k: Measurement(f(v[0]), f(v[1]), f(v[2])) for k, v in row["values"].items()}
    return Target(name=name, row=int(row.get("row", 0)), source=str(row.get("source", "")),
                  values=values)


def update_targets(ledger: Ledger, names: list[str] | None = None, *, n_samples: int = DEFAULT_SAMPLES,
                   prior=None, seed: int = DEFAULT_SEED, jitter_ms: float = 0.0, store: bool = True
                   ) -> list[dict]:
    """Assess each ledger target from its stored catalogue row, then re-weight with its data.

    Targets without a catalogue row are reported, not updated.

    Parameters
    ----------
    ledger : Ledger
        The campaign ledger.
    names : list of str or None
        The targets (None: every ledger target).
    n_samples : int
        Posterior samples per target.
    prior : str, EccPrior or None
        The eccentricity prior (None: the default).
    seed : int
        The run seed.
    jitter_ms : float
        Stellar jitter added in quadrature (m/s).
    store : bool
        Write each summary as a posterior version.

    Returns
    -------
    list of dict
        One JSON record per target in the order of ``names`` (``name``, ``ok``, ``errors``,
        ``warnings`` and the summary of :meth:`LedgerUpdate.record`).
    """
    from rhofollow.stages.assess import assess_catalogue

    out = []
    names = ledger.targets() if names is None else names
    todo = []
    for n in names:
        row = ledger.catalogue_row(n)
        if row is None:
            why = ("not in the ledger" if n not in ledger.targets() else
                   "no catalogue row in the ledger (add it with 'rhofollow log targets CATALOGUE')")
            out.append({"name": n, "ok": False, "errors": [why], "warnings": []})
        else:
            try:
                todo.append(target_from_catalogue_row(n, row))
            except (KeyError, TypeError, ValueError, IndexError) as exc:
                out.append({"name": n, "ok": False, "warnings": [],
                            "errors": [f"the ledger's catalogue row cannot be read ({_failure(exc)})"]})
    kw = {} if prior is None else {"prior": prior}
    for a in assess_catalogue(todo, n_samples=n_samples, seed=seed, **kw):
        if not a.ok or a.samples is None:
            out.append({"name": a.name, "ok": False, "errors": list(a.errors),
                        "warnings": list(a.warnings)})
            continue
        try:
            res = update_from_ledger(ledger, a.samples, jitter_ms=jitter_ms, store=store, target=a.target,
                                     prior=prior, seed=seed)
        except LedgerUpdateError as exc:
            out.append({"name": a.name, "ok": False, "errors": [str(exc)],
                        "warnings": list(a.warnings)})
            continue
        except Exception as exc:  # noqa: BLE001 - one target's failure stays with that target
            out.append({"name": a.name, "ok": False, "warnings": list(a.warnings),
                        "errors": [f"update from the ledger failed for this target: {_failure(exc)}"]})
            continue
        rec = res.record()
        rec["warnings"] = list(a.warnings) + rec["warnings"]
        out.append(rec)
    order = {n: i for i, n in enumerate(names)}
    return sorted(out, key=lambda r: order.get(r["name"], len(order)))


def apply_to_assessments(ledger: Ledger, assessments, *, jitter_ms: float = 0.0,
                         store: bool = False, seed: int = DEFAULT_SEED) -> dict[str, LedgerUpdate]:
    """For the planners: replace, in place, the samples of each assessment that has RVs or
    occultation data in the ledger by the re-weighted samples, and add the update's warnings.

    Assessments that failed, or whose target has no measurements in the ledger, are left as they
    are. A target whose data exclude every sample keeps its samples and gets a warning.

    Parameters
    ----------
    ledger : Ledger
        The campaign ledger.
    assessments : list of Assessment
        The planners' assessments (changed in place).
    jitter_ms : float
        Stellar jitter added in quadrature (m/s).
    store : bool
        Write each summary as a posterior version.
    seed : int
        The run seed of a fresh draw.

    Returns
    -------
    dict
        Target name -> :class:`LedgerUpdate`, for the targets that were updated.
    """
    out = {}
    for a in assessments:
        if not a.ok or a.samples is None:
            continue
        if not ledger.rv_measurements(a.name) and not ledger.occultation_timings(a.name):
            continue
        try:
            res = update_from_ledger(ledger, a.samples, jitter_ms=jitter_ms, store=store,
                                     target=getattr(a, "target", None),
                                     prior=(a.record or {}).get("prior"), seed=seed)
        except LedgerUpdateError as exc:
            a.warnings.append(f"ledger data not applied: {exc}")
            continue
        except Exception as exc:  # noqa: BLE001 - keep the prior samples, say why
            a.warnings.append(f"ledger data not applied: the update failed ({_failure(exc)})")
            continue
        a.samples = res.samples
        a.warnings.extend(res.warnings)
        out[a.name] = res
    return out
