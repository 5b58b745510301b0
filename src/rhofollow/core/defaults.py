"""The run defaults every command and library stage shares: one seed, the sample and simulation counts.

The command line and the library use the same values, so ``rhofollow assess CAT`` and
``assess_catalogue(targets)`` give the same numbers. Change a default here and nowhere else.
"""
from __future__ import annotations

__all__ = ["DEFAULT_SEED", "DEFAULT_SAMPLES", "QUICK_SAMPLES", "MIN_SAMPLES", "MIN_PLANNING_SAMPLES",
           "DEFAULT_SIMS", "QUICK_SIMS", "MIN_SIMS"]

#: The run seed when none is given (``--seed``; every library stage's ``seed`` argument). The same
#: inputs and seed give the same outputs, whatever the order, chunking or number of workers.
DEFAULT_SEED = 20261202

#: Posterior samples per target (``--samples`` of assess, eclipses, rv, night, campaign, plan, log update).
DEFAULT_SAMPLES = 20000
#: Posterior samples per target of the short runs: ``rhofollow demo`` and :class:`rhofollow.pipeline.PipelineOptions`.
QUICK_SAMPLES = 8000
#: Fewest samples the assessment's quantiles accept (assess, eclipses, plan, demo; every command that
#: runs the assessment through :func:`rhofollow.cli.common.checked_prior`).
MIN_SAMPLES = 500
#: Fewest samples the rv, night and campaign commands accept before their own checks.
MIN_PLANNING_SAMPLES = 200

#: Simulated null data sets per RV test (``--sims`` of rv and plan).
DEFAULT_SIMS = 2000
#: Simulated null data sets per RV test of ``rhofollow demo``.
QUICK_SIMS = 500
#: Fewest simulated data sets the RV test accepts (``--sims``).
MIN_SIMS = 100
