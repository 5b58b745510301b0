"""The chained run's option and result types: :class:`PipelineOptions` in, :class:`Stages` and
:class:`PipelineResult` out, :class:`PipelineError` for bad inputs, :data:`StageProgress` for bars."""
from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field
from typing import Callable

from rhofollow.core.defaults import DEFAULT_SEED, QUICK_SAMPLES
from rhofollow.errors import InputError

__all__ = ["PipelineOptions", "Stages", "PipelineResult", "StageProgress", "PipelineError"]

#: ``progress(stage_label, total)`` starts a stage and returns ``advance(k=1)``.
StageProgress = Callable[[str, int], Callable[..., None]]


class PipelineError(InputError, ValueError):
    """A problem with the inputs of the chained run (message names the option or file)."""


@dataclass
class PipelineOptions:
    """Options of the chained run.

    samples : posterior samples per target; seed : run seed; ecc_prior : prior name or KIND:PARAMS;
    transit_weight : weight the prior by the transit probability; workers : processes for the
    assessment; dask_address : scheduler address of a dask.distributed cluster (overrides workers);
    coverage : probability held by each occultation window; fap, power : the RV eccentricity test;
    sims : simulated null data sets per RV test; rv_data : target name -> RVData (measured RVs);
    ledger : path of a campaign ledger (SQLite): its RVs and occultation timings re-weight the
    posteriors, its visits count as done, and targets whose occultation was measured get no more
    occultation windows.
    """

    samples: int = QUICK_SAMPLES
    seed: int = DEFAULT_SEED
    ecc_prior: str | None = None
    transit_weight: bool = True
    workers: int = 1
    dask_address: str | None = None
    coverage: float = 0.9
    fap: float = 0.01
    power: float = 0.8
    sims: int = 2000
    rv_data: dict | None = None
    ledger: str | None = None
    rv_hours: dict | None = None    # spectrograph -> RV budget (h); None: gain-per-hour threshold


@dataclass
class Stages:
    """assess -> eclipses -> rv outputs plus the planners' inputs.

    assessments : list of :class:`rhofollow.stages.assess.Assessment` (input order);
    occultations : the dict of :func:`rhofollow.stages.occultations.predict_occultations`;
    rv : list of RV records (:func:`rhofollow.stages.rv.plan_rv`), empty without a spectrograph;
    science, skipped : :func:`rhofollow.planning.night.science_from_records`;
    instruments : ``{"occultation": name, "rv": name}``; overhead_h : slew + setup per block (h);
    model : the planners' :class:`~rhofollow.planning.tasks.ValueModel`; notices : run-level messages
    (including one per target that failed a stage after its assessment; those are also in ``failures``);
    prior : the eccentricity prior used (:class:`~rhofollow.physics.priors.EccPrior`);
    unreachable : name -> warning for targets that never reach the site's altitude limit
    (:func:`rhofollow.planning.reach.unreachable_targets`); timings : seconds per stage (assess_s,
    occultations_s, rv_s: summed over the processes that ran them); spool : the
    :class:`~rhofollow.pipeline.spool.SampleSpool` holding the assessments' samples.
    """

    assessments: list
    occultations: dict
    rv: list
    science: list
    skipped: list
    instruments: dict
    overhead_h: float
    model: object
    notices: list
    prior: object
    timings: dict = field(default_factory=dict)
    failures: list = field(default_factory=list)
    unreachable: dict = field(default_factory=dict)
    spool: object = None


@dataclass
class PipelineResult:
    """Everything of a ``plan`` run: the stages, the engine, the nights and both plans.

    night : the night JSON (``date`` added) or None when the first evening has no dark time;
    night_grid : its :class:`~rhofollow.planning.visibility.NightGrid`;
    campaign : the campaign JSON; campaign_plan : the :class:`~rhofollow.planning.campaign.CampaignPlan`;
    nights : the campaign's NightGrids (dark nights only).
    """

    site: object
    engine: object
    stages: Stages
    start: _dt.date
    end: _dt.date
    night: dict | None
    night_grid: object
    campaign: dict
    campaign_plan: object
    nights: list
    options: PipelineOptions
    timings: dict = field(default_factory=dict)
    catalogue: object = None
    command: str = "plan"

    @property
    def unreachable(self) -> dict:
        """name -> warning of the targets that never reach the site's altitude limit (no plots for them)."""
        return self.stages.unreachable

    @property
    def assessments(self):
        """The per-target assessments."""
        return self.stages.assessments

    @property
    def occultations(self) -> dict:
        """The occultation predictions."""
        return self.stages.occultations

    @property
    def rv(self) -> list:
        """The RV records."""
        return self.stages.rv
