"""The whole chain in one call: catalogue targets -> assessment -> occultations -> RV -> night and
campaign plans at the observer's site (library API, no printing, no file writing).

:func:`run_stages` runs assess -> eclipses -> rv once for a UTC range and returns everything the
planners need (:class:`Stages`); :func:`run_pipeline` adds the visibility of every night of a
campaign, the nightly plan of the first night, the RV request (:func:`rv_request`) and the
campaign plan (:class:`PipelineResult`). This package is the only orchestrator: the commands call
it. Every stage reports progress through one optional callback, so a command line can draw bars
and a notebook can stay quiet.

The targets go through the per-target stages chunk by chunk (:func:`rhofollow.pipeline.runners.chain_parts`);
as each chunk comes back its samples are reduced to the planners' inputs and written to a
:class:`~rhofollow.pipeline.spool.SampleSpool`, so memory stays bounded by a few chunks whatever
the catalogue size. Each target's random draws depend on the run seed and the target name only,
so the result is the same with one worker, a process pool or a dask cluster.

Modules: :mod:`.types` (options and results), :mod:`.runners` (stage runners), :mod:`.documents`
(the night and campaign JSON), :mod:`.spool` (samples on disk).
"""
from __future__ import annotations

import datetime as _dt
import time

from rhofollow.pipeline.documents import campaign_document, night_document, planner_targets
from rhofollow.pipeline.runners import apply_ledger, instruments, stage_failures
from rhofollow.pipeline.types import PipelineError, PipelineOptions, PipelineResult, StageProgress, Stages

__all__ = ["PipelineOptions", "Stages", "PipelineResult", "run_stages", "run_pipeline", "StageProgress",
           "PipelineError", "planner_targets", "night_document", "campaign_document", "rv_request",
           "apply_ledger", "stage_failures", "instruments"]



def _quiet(label, total):
    return lambda k=1: None


class _Collected:
    """The reduced outputs of the chain, part by part (input order)."""

    def __init__(self):
        self.assessments, self.occ, self.notices, self.caught, self.rv = [], None, [], [], []
        self.science, self.skipped, self.plan_failed = [], [], []
        self.n_done, self.measured, self.n_updated = {}, set(), 0
        self.timings = {"assess_s": 0.0, "occultations_s": 0.0, "rv_s": 0.0}

    def add(self, part, spool) -> None:
        """Fold one part in, then spool its samples.

        Parameters
        ----------
        part : a :class:`~rhofollow.pipeline.runners.ChainPart`
        spool : the run's :class:`~rhofollow.pipeline.spool.SampleSpool`

        Returns
        -------
        None
        """
        from rhofollow.pipeline.runners import science_part

        occ = part.occultations
        if self.occ is None:
            self.occ = dict(occ, targets=[])
        self.occ["targets"] += occ["targets"]
        self.notices += [n for n in occ.get("notices", []) if n not in self.notices]
        self.caught += part.caught
        self.rv += part.rv
        self.n_done.update(part.n_done)
        self.measured |= part.measured
        self.n_updated += part.n_updated
        for k, v in part.seconds.items():
            self.timings[k] += v
        occ_targets = occ["targets"]
        if part.measured:
            occ_targets = [dict(r, events=[]) if r.get("name") in part.measured else r for r in occ_targets]
        sc, sk, failed = science_part(part.assessments, occ_targets, part.rv, self.n_done)
        self.science += sc
        self.skipped += sk
        self.plan_failed += failed
        for a in part.assessments:   # the reduced inputs are made: the samples go to disk
            a.samples = spool.put(a.samples)
        self.assessments += part.assessments


def _run_chain(targets, site, start_iso, end_iso, opts: PipelineOptions, prior, progress):
    """Every chunk of the chain, collected (:class:`_Collected`), with the samples spooled."""
    from rhofollow.pipeline.runners import _occultation_chunk, chain_parts, eclipse_options
    from rhofollow.pipeline.spool import SampleSpool

    spec, phot = instruments(site)
    eopts = eclipse_options(site, phot, opts)
    bars = [progress("assessing", len(targets)), progress("occultations", len(targets))]
    if spec is not None:
        bars.append(progress("RV planning", len(targets)))
    got, spool = _Collected(), SampleSpool()
    for part in chain_parts(targets, opts, prior, spec, eopts, start_iso, end_iso):
        got.add(part, spool)
        for adv in bars:
            adv(len(part.assessments))
    if got.occ is None:  # no targets: the document of an empty run
        got.occ, got.caught = _occultation_chunk([], start_iso, end_iso, eopts)
        got.notices = list(got.occ.get("notices", []))
    got.occ["notices"] = got.notices
    return got, spool, spec, phot


def run_stages(targets, site, start_iso: str, end_iso: str, options: PipelineOptions | None = None,
               progress: StageProgress | None = None) -> Stages:
    """Run assess -> eclipses -> rv once for ``targets`` over [start_iso, end_iso] (UTC) at ``site``.

    Parameters
    ----------
    targets : validated catalogue targets (:func:`rhofollow.io.catalogue.read_catalogue`)
    site : :class:`rhofollow.planning.site.Site` (its instrument files give the spectrograph and
        photometer; without a spectrograph no RV records are made, with a notice)
    start_iso, end_iso : UTC range of the occultation predictions
    options : :class:`PipelineOptions`
    progress : optional stage-progress callback (:data:`StageProgress`)

    Returns
    -------
    Stages
        Its assessments hold their samples in a spool on disk (read back on use).
    """
    from rhofollow.physics.priors import DEFAULT_PRIOR, parse_prior
    from rhofollow.planning.reach import unreachable_targets
    from rhofollow.planning.tasks import ValueModel

    opts = options or PipelineOptions()
    try:
        prior = parse_prior(opts.ecc_prior or DEFAULT_PRIOR)
    except ValueError as exc:
        raise PipelineError(f"eccentricity prior: {exc}") from None
    targets = list(targets)
    got, spool, spec, phot = _run_chain(targets, site, start_iso, end_iso, opts, prior, progress or _quiet)
    from rhofollow.pipeline.runners import ledger_notes

    notices = ledger_notes(opts.ledger, got.n_updated) + got.occ.get("notices", []) + sorted(set(got.caught))
    if spec is None:
        notices.append("the site lists no spectrograph: no RV visits planned")
    if opts.rv_data:
        known = {a.name for a in got.assessments}
        notices += [f"measured RVs of {name} match no catalogue target" for name in sorted(set(opts.rv_data) - known)]
    failures = stage_failures(got.assessments, got.occ["targets"], got.rv) + got.plan_failed
    notices += failures
    skipped = got.skipped + [{"name": n, "reason": "occultation already measured (ledger): no more windows"}
                             for n in sorted(got.measured)]
    model = ValueModel(baseline_h=0.0, lead_h=(phot.overhead_min / 60.0) if phot else 0.0,
                       partial_baseline_h=phot.baseline_h if phot else 1.0)
    names = {"occultation": phot.name if phot else "photometer",
             "rv": spec.name if spec else "spectrograph"}
    unreachable = unreachable_targets(site, [(t.name, t.value("dec_deg")) for t in targets])
    return Stages(got.assessments, got.occ, got.rv, got.science, skipped, names,
                  (site.slew_minutes + site.setup_minutes) / 60.0, model, notices, prior, got.timings,
                  failures, unreachable, spool)


def rv_request(stages: Stages, nights, site, opts: PipelineOptions, progress: StageProgress | None = None):
    """Time-to-confirm at reachable epochs and the RV request (:mod:`rhofollow.planning.rvrequest`).

    Parameters
    ----------
    stages : the run's :class:`Stages` (their RV records are updated in place)
    nights : the campaign's :class:`~rhofollow.planning.campaign.NightVis` list
    site : the site (its spectrograph and ``loss_fraction``)
    opts : seed, fap, power, sims and ``rv_hours`` (budget per spectrograph, h) of the run
    progress : optional stage-progress callback

    Returns
    -------
    dict or None
        The request (:func:`~rhofollow.planning.rvrequest.plan_rv_requests`); None without a
        spectrograph or without a target with an RV record.
    """
    from rhofollow.planning.rvreach import epochs_from_ledger
    from rhofollow.planning.rvrequest import plan_rv_requests

    progress = progress or _quiet
    spec, _ = instruments(site)
    if spec is None or not any(e.get("rv") for e in stages.science):
        return None
    t = time.perf_counter()
    adv = progress("RV at reachable epochs", len(stages.science))
    req = plan_rv_requests(stages.assessments, stages.science, nights, spec, loss_fraction=site.loss_fraction,
                           fap=opts.fap, power=opts.power, seed=opts.seed, n_null=opts.sims,
                           n_alt=min(400, opts.sims), hours=opts.rv_hours, progress=adv,
                           epochs_in_hand=epochs_from_ledger(opts.ledger, [e["name"] for e in stages.science]),
                           workers=max(1, int(opts.workers or 1)), dask_address=opts.dask_address)
    stages.timings["rv_reachable_s"] = time.perf_counter() - t
    return req


def _first_night(eng, first, stages: Stages, site, opts: PipelineOptions, catalogue) -> dict:
    """The night JSON of the first dark night (its visibility also stores each target's BJD - JD
    offset of that night in the science dicts)."""
    from rhofollow.planning.night import night_visibility, plan_night

    vis0 = night_visibility(eng, first, stages.science)
    nplan = plan_night(stages.science, vis0, site=site.name, night_start_jd=first.start_jd,
                       night_end_jd=first.end_jd, overhead_h=stages.overhead_h, model=stages.model)
    return night_document(nplan, stages, site, first.date, opts.seed, opts.samples, catalogue)


def run_pipeline(targets, site, start: _dt.date, end: _dt.date, options: PipelineOptions | None = None,
                 progress: StageProgress | None = None, max_nights: int = 400,
                 catalogue=None) -> PipelineResult:
    """The whole chain for the local evenings ``start`` .. ``end`` (inclusive) at ``site``.

    Runs :func:`run_stages` over the dark time of the range, then the visibility of every night, the
    nightly plan of the first dark night and the campaign plan. ``catalogue`` (the reader's
    :class:`~rhofollow.core.types.CatalogueResult`, optional) puts the catalogue path and its row
    problems into the night and campaign documents.

    Parameters
    ----------
    targets : validated catalogue targets
    site : :class:`rhofollow.planning.site.Site`
    start, end : local dates of the first and last evening
    options : :class:`PipelineOptions`; progress : optional stage-progress callback
    max_nights : most nights accepted; catalogue : the reader's result (optional)

    Returns
    -------
    PipelineResult

    Raises
    ------
    PipelineError
        End before start, too many nights, no dark time in the range, bad prior or instrument file.
    """
    from rhofollow.planning.campaign import plan_campaign, range_nights
    from rhofollow.planning.night import night_visibility
    from rhofollow.planning.tasks import jd_to_iso
    from rhofollow.planning.visibility import VisibilityEngine

    opts = options or PipelineOptions()
    progress = progress or _quiet
    if end < start:
        raise PipelineError(f"end date {end} is before start date {start}")
    n_nights = (end - start).days + 1
    if n_nights > max_nights:
        raise PipelineError(f"{n_nights} nights requested; at most {max_nights} (split the range)")
    t_all = time.perf_counter()
    eng = VisibilityEngine(site)
    grids = [g for g in eng.nights(start, end) if g.kind != "no_night"]
    if not grids:
        raise PipelineError(f"no dark time at {site.name} between {start} and {end}")
    stages = run_stages(targets, site, jd_to_iso(grids[0].start_jd - 0.5), jd_to_iso(grids[-1].end_jd + 0.5),
                        opts, progress)
    timings = dict(stages.timings)

    t = time.perf_counter()
    adv = progress("visibility", len(grids))
    first = grids[0]
    nights = range_nights(eng, grids, stages.science, lambda: adv(1))
    timings["visibility_s"] = time.perf_counter() - t

    req = rv_request(stages, nights, site, opts, progress)
    # the first night is planned once, seeing the request; night_visibility stores each target's
    # BJD - JD offset of the night it saw last in the science dicts, so the last night's offsets
    # are put back for the campaign afterwards
    night_doc = _first_night(eng, first, stages, site, opts, catalogue)
    for g in grids[-1:]:
        night_visibility(eng, g, stages.science)
    t = time.perf_counter()
    adv = progress("scheduling", 1)
    cplan = plan_campaign(stages.science, nights, site=site.name, overhead_h=stages.overhead_h,
                          instruments=stages.instruments, model=stages.model, rv_request=req)
    camp = campaign_document(cplan, stages, site, start, end, opts.seed, opts.samples, catalogue)
    adv(1)
    timings["scheduling_s"] = time.perf_counter() - t
    timings["total_s"] = time.perf_counter() - t_all
    return PipelineResult(site, eng, stages, start, end, night_doc, first, camp, cplan, grids, opts, timings,
                          catalogue)
