"""The density-mismatch assessment: catalogue rows -> posterior samples and explanations.

This module is the boundary between the catalogue (units already converted by the reader) and the
numerical core in :mod:`rhofollow.physics`. One row runs in four steps, each in its own module:

* :mod:`rhofollow.stages.assess_inputs`: the row's measurements, circular-orbit density routes, host-star
  draws, transit observables and hypothesis set-up;
* :mod:`rhofollow.stages.assess_models`: the importance-sampled explanations, the observed density
  mismatch, and their comparison (finding, favoured explanation, what to check);
* :mod:`rhofollow.stages.assess_record`: the posterior SampleSet and the JSON record of the ``assess``
  command, and the data weight W;
* here: :func:`assess_target` (one row, never raises for a bad row) and :func:`assess_catalogue`.

The public names of those modules stay importable from here. No printing.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from rhofollow.core.defaults import DEFAULT_SAMPLES, DEFAULT_SEED
from rhofollow.core.samples import SampleSet
from rhofollow.core.seeds import target_seed  # the per-target generator (re-exported here)
from rhofollow.core.types import Notice, Target
from rhofollow.physics.eccentricity import HYPOTHESES
from rhofollow.physics.priors import DEFAULT_PRIOR, EccPrior, parse_prior
from rhofollow.stages.assess_inputs import DEFAULT_RADIUS_RATIO, RowProblem, hypothesis_setup, read_row
from rhofollow.stages.assess_models import (CHI2_REJECT, LABELS, ORBIT_TENSION_SIGMA, READINGS, REMAINING_LN_B,
                                            chi2_best, compare, density_ratio, evidence_strength, run_hypotheses)
from rhofollow.stages.assess_record import (PRIOR_DRIVEN_DELTA, build_record, data_weight, posterior_samples,
                                            record_data_weight, refresh_data_keys)

__all__ = ["Assessment", "assess_target", "assess_catalogue", "target_seed", "READINGS", "LABELS",
           "evidence_strength", "DEFAULT_N_SAMPLES", "ESS_FLOOR", "CHI2_REJECT", "DEFAULT_RADIUS_RATIO",
           "PRIOR_DRIVEN_DELTA", "REMAINING_LN_B", "ORBIT_TENSION_SIGMA", "data_weight", "record_data_weight",
           "refresh_data_keys"]

DEFAULT_N_SAMPLES = DEFAULT_SAMPLES
#: Effective sample size (samples) the eccentric explanation adapts its proposal towards.
ESS_FLOOR = 2000.0

_RowProblem = RowProblem   # the name tests and callers have used for a bad row


@dataclass
class Assessment:
    """Result for one target: the JSON record, the eccentric-hypothesis samples, and all evidences."""

    name: str
    target: Target | None
    ok: bool
    errors: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    samples: SampleSet | None = None
    record: dict = field(default_factory=dict)


def assess_target(t: Target, n_samples: int = DEFAULT_N_SAMPLES, prior: str | EccPrior = DEFAULT_PRIOR,
                  seed: int = DEFAULT_SEED, transit_prob: bool = True, ess_floor: float = ESS_FLOOR,
                  hypotheses=HYPOTHESES, extra_loglike=None) -> Assessment:
    """Assess one validated target. Never raises for a bad row: problems land in ``errors``.

    Parameters
    ----------
    t : Target
        The validated catalogue row (units already converted by the reader).
    n_samples : int
        Posterior samples of the eccentric explanation.
    prior : str or EccPrior
        The eccentricity prior (a registry name such as ``"kipping13"`` or an :class:`EccPrior`).
    seed : int
        The run seed; the target's generator is :func:`target_seed` of it and the name.
    transit_prob : bool
        Weight (e, omega) by the transit probability (Barnes 2007).
    ess_floor : float
        Effective sample size (samples) the sampler adapts towards; below it the row warns.
    hypotheses : tuple of str
        The explanations to run (``"eccentric"`` is required).
    extra_loglike : callable or None
        ``extra_loglike(aux) -> array`` folds further measurements of the target (RVs,
        occultation timings; see :mod:`rhofollow.stages.update`) into every hypothesis' likelihood.

    Returns
    -------
    Assessment
        ``ok`` with the record and the samples, or not ok with the row's error (file, row, name).
    """
    rng = target_seed(seed, t.name)
    warnings = list(t.warnings)
    try:
        prior_obj = prior if isinstance(prior, EccPrior) else parse_prior(prior)
        return _assess(t, n_samples, prior_obj, rng, transit_prob, ess_floor, warnings, hypotheses,
                       extra_loglike)
    except _RowProblem as exc:
        msg = f"{t.source}, row {t.row} ({t.name}): {exc}"
        return Assessment(t.name, t, False, [msg], warnings,
                          record={"name": t.name, "ok": False, "errors": [msg], "warnings": warnings})


def _assess(t, n, prior, rng, transit_prob, ess_floor, warnings, hypotheses, extra_loglike=None) -> Assessment:
    """One row through the four steps (inputs, explanations, comparison, record); raises RowProblem."""
    inputs = read_row(t, n, rng, warnings)
    setup = hypothesis_setup(t, prior, transit_prob, rng, n, warnings)
    measured = setup.orbit_measured
    results = run_hypotheses(hypotheses, inputs.obs, inputs.star, setup, n, rng, ess_floor, extra_loglike)
    chi2 = chi2_best(results, inputs.obs)
    samples, w = posterior_samples(t, results["eccentric"], inputs, prior, transit_prob, measured)
    ess = samples.ess
    if ess < ess_floor:
        warnings.append(Notice(f"effective sample size {ess:.0f} is below the floor {ess_floor:.0f} even "
                               "after adapting the proposal; quantiles are noisier than usual", "sampling", t.name))
    dr = density_ratio(inputs.rho_circ_draws, inputs.star, setup, rng)
    cmp = compare(results, chi2, dr, measured)
    if cmp.finding != "fits":
        warnings.append(Notice(cmp.consistency["check"], "finding", t.name))
    record = build_record(t, inputs, samples, w, dr, cmp, prior, transit_prob, measured, warnings)
    return Assessment(t.name, t, True, [], warnings, samples, record)


def assess_catalogue(targets, n_samples: int = DEFAULT_N_SAMPLES, prior: str | EccPrior = DEFAULT_PRIOR,
                     seed: int = DEFAULT_SEED, transit_prob: bool = True, ess_floor: float = ESS_FLOOR,
                     progress=None) -> list[Assessment]:
    """Assess every target (serially; see :mod:`rhofollow.core.executor` for pools and clusters).

    Parameters
    ----------
    targets : iterable of Target
        Validated catalogue rows.
    n_samples, prior, seed, transit_prob, ess_floor
        As :func:`assess_target` (samples, prior name or object, seed, bool, samples).
    progress : callable or None
        Called with no argument once per finished target.

    Returns
    -------
    list of Assessment
        One per target, in input order.
    """
    prior_obj = prior if isinstance(prior, EccPrior) else parse_prior(prior)
    out = []
    for t in targets:
        out.append(assess_target(t, n_samples, prior_obj, seed, transit_prob, ess_floor))
        if progress is not None:
            progress()
    return out
