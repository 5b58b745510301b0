"""The assessment's outputs: the posterior SampleSet, the JSON record of a row and the data weight.

Part of :mod:`rhofollow.stages.assess`. :func:`posterior_samples` turns the eccentric explanation's
importance weights into the :class:`~rhofollow.core.samples.SampleSet` that flows downstream;
:func:`build_record` writes the ``assess`` record; :func:`data_weight` is the one definition of what the
data add to the prior (used by the record, the ranking and the planners).
"""
from __future__ import annotations

import math

import numpy as np

from rhofollow.core.samples import SampleSet, quantile_dict, reliability
from rhofollow.core.types import Target
from rhofollow.physics.priors import EccPrior, parse_prior, reweight_to_prior
from rhofollow.physics.transit import ecc_min_from_ratio
from rhofollow.stages.assess_models import READINGS, evidence_strength

__all__ = ["PRIOR_DRIVEN_DELTA", "posterior_samples", "build_record", "data_weight", "record_data_weight",
           "refresh_data_keys"]

#: A bound of the 95 % e interval is called prior-driven when the same samples re-weighted to a
#: uniform e prior move it by more than this (in e; common practice, no source).
PRIOR_DRIVEN_DELTA = 0.05

#: Catalogue values copied into the samples' ``meta`` when the row has them.
_META_KEYS = ("ra_deg", "dec_deg", "vmag", "logg_cgs", "feh_dex", "jitter_ms", "mp_mearth", "teff_k",
              "contam_frac")


def posterior_samples(t: Target, ecc_res, inputs, prior: EccPrior, transit_prob: bool,
                      measured: bool) -> tuple[SampleSet, np.ndarray]:
    """The weighted posterior of one row: the eccentric explanation's samples and normalised weights.

    Parameters
    ----------
    t : Target
        The validated row (name, row number, source and the catalogue values kept in ``meta``).
    ecc_res : ImportanceResult
        The eccentric explanation's samples (``aux``: e, omega in radians, b, k, period in days, t0 in
        BJD_TDB, rho_star in g/cm^3, mstar in Msun, rstar in Rsun, a_rs, inc in radians, teff in K)
        and their log weights.
    inputs : RowInputs
        The row's inputs (:func:`rhofollow.stages.assess_inputs.read_row`): route names and k_assumed.
    prior : EccPrior
        The eccentricity prior of the run (its name goes into ``meta``).
    transit_prob : bool
        Whether the transit-probability weighting was on.
    measured : bool
        Whether the row's orbit was measured.

    Returns
    -------
    samples : SampleSet
        ``meta`` holds the routes, the prior, the row and catalogue values.
    w : ndarray
        The normalised weights (dimensionless, sum 1) as computed here, before the SampleSet's own
        renormalisation; the record's weighted sums use these.
    """
    lw = ecc_res.log_w
    w = np.exp(lw - np.max(lw))
    w = w / w.sum()
    aux = ecc_res.aux
    meta = {"route_transit": inputs.route, "route_star": inputs.star_label, "prior": prior.name,
            "transit_prob": bool(transit_prob),
            "row": t.row, "source": t.source, "k_assumed": bool(inputs.k_assumed), "orbit_measured": bool(measured)}
    for key in _META_KEYS:
        if t.has(key):
            meta[key] = t.value(key)
    if t.has("mp_mearth"):
        meta["mp_mearth_err"] = t.get("mp_mearth").err
    samples = SampleSet(name=t.name, e=aux["e"], omega=aux["omega"], b=aux["b"], k=aux["k"],
                        period=aux["period"], t0=aux["t0"], rho_star=aux["rho_star"], mstar=aux["mstar"],
                        rstar=aux["rstar"], a_rs=aux["a_rs"], inc=aux["inc"], teff=aux["teff"],
                        weights=w, meta=meta)
    return samples, w


def build_record(t: Target, inputs, samples: SampleSet, w: np.ndarray, dr, cmp, prior: EccPrior,
                 transit_prob: bool, measured: bool, warnings: list) -> dict:
    """The ``assess`` JSON record of one row that ran.

    Parameters
    ----------
    t : Target
        The validated row.
    inputs : RowInputs
        Its inputs (routes, host-star draws in g/cm^3, circular-orbit density draws in g/cm^3).
    samples : SampleSet
        Its posterior (:func:`posterior_samples`).
    w : ndarray
        The weights :func:`posterior_samples` returned beside it (dimensionless, sum 1).
    dr : DensityRatio
        The observed mismatch (:func:`rhofollow.stages.assess_models.density_ratio`).
    cmp : Comparison
        The explanations compared (:func:`rhofollow.stages.assess_models.compare`).
    prior : EccPrior
        The eccentricity prior of the run.
    transit_prob : bool
        Whether the transit-probability weighting was on.
    measured : bool
        Whether the row's orbit was measured.
    warnings : list of str
        The row's warnings (the record holds this list itself).

    Returns
    -------
    dict
        JSON-ready record: densities in g/cm^3, e and omega (degrees) quantiles, probabilities,
        evidences and Bayes factors in nats, the finding and its reading.
    """
    ess = samples.ess
    p_gt = min(1.0, float(np.sum(w[samples.e > 0.1])))   # a probability: no rounding above 1
    p_gt_prior = float(prior.prob_above(0.1, transit_prob=transit_prob))
    ecc_q = samples.quantiles("e")
    uni = _uniform_prior_interval(samples.e, w, prior, measured, ecc_q)
    ok, why = reliability(ess)
    ln_b = cmp.ln_b
    return {
        "name": t.name, "ok": True, "errors": [], "warnings": warnings,
        "route_transit": (inputs.rho_circ_label if inputs.route == "density"
                          else "durations (forward model, b marginalised)"),
        "route_star": inputs.star_label,
        "rho_circ_cgs": quantile_dict(inputs.rho_circ_draws),
        "rho_star_cgs": quantile_dict(inputs.star.rho),
        "density_ratio": quantile_dict(dr.ratio),
        "density_ratio_sigma": dr.sigma,
        "ecc": ecc_q,
        "omega_deg": _omega_quantiles(samples.omega, w),
        "ecc_min": float(ecc_min_from_ratio(np.median(dr.ratio))),
        "p_ecc_gt_0p1": p_gt,
        "p_ecc_gt_0p1_prior": p_gt_prior,
        "ecc_odds_ratio": _odds_ratio(p_gt, p_gt_prior, ess),
        "ecc_data_weight": data_weight(p_gt, p_gt_prior, ess),
        **uni,
        "ess": float(ess),
        "reliable": ok,
        **({"reliability_note": why} if not ok else {}),
        "n_samples": int(samples.n),
        "prior": prior.name,
        "orbit_measured": bool(measured),
        "radius_ratio_assumed": bool(inputs.k_assumed),
        "log_evidence": {h: (v if math.isfinite(v) else None) for h, v in cmp.logz.items()},
        "chi2_best": {h: (v if math.isfinite(v) else None) for h, v in cmp.chi2.items()},
        "p_explanation": cmp.p_expl,
        "p_explanation_prior": {h: 1.0 / len(cmp.p_expl) for h in cmp.p_expl} if cmp.p_expl else {},
        "favoured": cmp.favoured,
        "ln_bayes_factor": ln_b if math.isfinite(ln_b) else None,
        "evidence_strength": evidence_strength(ln_b) if math.isfinite(ln_b) else "only one explanation fits",
        "star_density_ln_bayes_factor": cmp.star_ln_b,
        "fits": cmp.finding == "fits",
        "finding": cmp.finding,
        "consistency": cmp.consistency,
        "reading": READINGS[cmp.favoured],
    }


def _omega_quantiles(omega: np.ndarray, w: np.ndarray) -> dict:
    """Quantiles of omega (deg), unwrapped about the weighted circular mean (may leave [0, 360))."""
    mean = math.atan2(float(np.sum(w * np.sin(omega))), float(np.sum(w * np.cos(omega))))
    unwrapped = mean + np.mod(omega - mean + np.pi, 2 * np.pi) - np.pi
    q = quantile_dict(np.degrees(unwrapped), w)
    shift = 360.0 * math.floor(q["q50"] / 360.0)
    return {k: v - shift for k, v in q.items()}


def data_weight(p: float, p0: float, ess: float) -> float:
    """W = B/(1 + B), B the posterior-to-prior odds of e above the threshold (:func:`_odds_ratio`):
    what the data add to the prior, 0.5 when they say nothing, towards 1 when they favour e above
    it, towards 0 when they disfavour it. The one definition used by the record
    (``ecc_data_weight``), the ranking (:func:`rhofollow.report.tables.rank_targets`) and the night
    and campaign block values (:func:`rhofollow.planning.night.science_from_records`).

    Parameters
    ----------
    p : float
        Posterior probability of e above the threshold.
    p0 : float
        The prior's probability of e above it.
    ess : float
        Effective sample size of the posterior (samples; bounds p away from 0 and 1).

    Returns
    -------
    float
        W in [0, 1] (dimensionless).
    """
    b = _odds_ratio(p, p0, ess)
    return b / (1 + b) if math.isfinite(b) else 1.0


def record_data_weight(record: dict) -> float:
    """W of an assessment record from its ``p_ecc_gt_0p1``, ``p_ecc_gt_0p1_prior`` and ``ess``
    (:func:`data_weight`), so a record whose posterior was updated (ledger RVs, occultation timings)
    gives the updated W. A record without the prior's value falls back to its ``ecc_data_weight``,
    then (a record written before either key) to its ``p_ecc_gt_0p1``, and one without a posterior
    to 0.0.

    Parameters
    ----------
    record : dict
        An assessment record.

    Returns
    -------
    float
        W in [0, 1] (dimensionless).
    """
    p, p0 = record.get("p_ecc_gt_0p1"), record.get("p_ecc_gt_0p1_prior")
    if p is not None and p0 is not None:
        return data_weight(float(p), float(p0), float(record.get("ess") or 1.0))
    for key in ("ecc_data_weight", "p_ecc_gt_0p1"):
        w = record.get(key)
        if w is not None and math.isfinite(float(w)):
            return float(w)
    return 0.0


def refresh_data_keys(record: dict) -> None:
    """Recompute ``ecc_odds_ratio`` and ``ecc_data_weight`` after ``p_ecc_gt_0p1`` or ``ess`` changed.

    Parameters
    ----------
    record : dict
        An assessment record, changed in place (left as it is without ``p_ecc_gt_0p1`` and
        ``p_ecc_gt_0p1_prior``).
    """
    p, p0 = record.get("p_ecc_gt_0p1"), record.get("p_ecc_gt_0p1_prior")
    if p is None or p0 is None:
        return
    ess = float(record.get("ess") or 1.0)
    record["ecc_odds_ratio"] = _odds_ratio(float(p), float(p0), ess)
    record["ecc_data_weight"] = data_weight(float(p), float(p0), ess)


def _odds_ratio(p: float, p0: float, ess: float) -> float:
    """Posterior-to-prior odds of e > 0.1 (the Bayes factor of e > 0.1 against e <= 0.1), with the
    posterior probability kept at least half a sample from 0 and 1."""
    eps = 0.5 / max(ess, 1.0)
    p = min(max(p, eps), 1 - eps)
    p0 = min(max(p0, 1e-12), 1 - 1e-12)
    return float((p / (1 - p)) / (p0 / (1 - p0)))


_UNIFORM = None


def _uniform_prior_interval(e, w, prior: EccPrior, measured: bool, ecc_q: dict) -> dict:
    """The e interval under a uniform prior beside the default one (same samples re-weighted by the
    prior ratio), and which bounds of the 95 % interval the prior sets."""
    global _UNIFORM
    if measured:
        return {"ecc_uniform_prior": None, "ess_uniform_prior": None,
                "ecc_bounds": {"lower": "measured orbit", "upper": "measured orbit"}}
    if _UNIFORM is None:
        _UNIFORM = parse_prior("uniform")
    wu = reweight_to_prior(e, w, prior, _UNIFORM)
    if wu is None:
        return {"ecc_uniform_prior": None, "ess_uniform_prior": 0.0,
                "ecc_bounds": {"lower": "unknown", "upper": "unknown"}}
    qu = quantile_dict(e, wu)
    ess_u = float(1.0 / np.sum(wu * wu))
    bounds = {side: ("prior" if abs(ecc_q[key] - qu[key]) > PRIOR_DRIVEN_DELTA else "data")
              for side, key in (("lower", "q025"), ("upper", "q975"))}
    return {"ecc_uniform_prior": qu, "ess_uniform_prior": ess_u, "ecc_bounds": bounds}
