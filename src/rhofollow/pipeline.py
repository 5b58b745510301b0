"""The whole chain in one call: catalogue targets -> assessment -> occultations -> RV -> night and
campaign plans at the observer's site (library API, no printing, no file writing).

:func:`run_stages` runs assess -> eclipses -> rv once for a UTC range and returns everything the
planners need (:class:`Stages`); :func:`run_pipeline` adds the visibility of every night of a
campaign, the nightly plan of the first night and the campaign plan (:class:`PipelineResult`).
Every stage reports progress through one optional callback, so a command line can draw bars and a
notebook can stay quiet.

Each target's random draws depend on the run seed and the target name only, so the result is the
same with one worker, a process pool or a dask cluster.
"""
from __future__ import annotations

import datetime as _dt
import time
import warnings
from dataclasses import dataclass, field
from typing import Callable

from rhofollow.core.defaults import DEFAULT_SEED, QUICK_SAMPLES
from rhofollow.errors import InputError

__all__ = ["PipelineOptions", "Stages", "PipelineResult", "run_stages", "run_pipeline", "StageProgress",
           "PipelineError", "planner_targets", "night_document", "campaign_document"]

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
    (:func:`rhofollow.planning.reach.unreachable_targets`).
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


def _quiet(label, total):
    return lambda k=1: None


def _instruments(site):
    from rhofollow.io.instruments import InstrumentError, Photometer, Spectrograph, read_instruments

    try:
        insts = read_instruments(site.instruments) if site.instruments else {}
    except InstrumentError as exc:
        raise PipelineError(str(exc)) from None
    spec = next((i for i in insts.values() if isinstance(i, Spectrograph)), None)
    phot = next((i for i in insts.values() if isinstance(i, Photometer)), None)
    return spec, phot


def _rv_chunk(chunk, spec, rv_data, kw):
    """Worker: RV records of one chunk of assessments (module level so it pickles)."""
    from rhofollow.stages.rv import plan_rv

    return plan_rv(chunk, spec, rv_data, **kw)


def _rv_records(assessments, spec, opts: PipelineOptions, kw: dict, advance) -> list:
    """RV records in input order: in this process, a process pool or on the dask cluster
    (:func:`rhofollow.core.executor.dispatch`).

    Each target's RV draws depend on (seed, name, stage) only, so every mode gives the same records.
    """
    from rhofollow.core.executor import dispatch

    def job(chunk):
        data = {a.name: opts.rv_data[a.name] for a in chunk if opts.rv_data and a.name in opts.rv_data}
        return chunk, spec, data or None, kw

    out = []
    for part in dispatch(_rv_chunk, assessments, workers=opts.workers, dask_address=opts.dask_address,
                         make_job=job):
        out.extend(part)
        advance(len(part))
    return out


def _occultation_chunk(chunk, start_iso, end_iso, eopts):
    """Worker: occultation predictions of one chunk, with the warnings raised while making them."""
    from rhofollow.stages.occultations import predict_occultations

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        occ = predict_occultations(chunk, start_iso, end_iso, eopts)
    return occ, [str(w.message) for w in caught]


def _occultations(assessments, start_iso, end_iso, eopts, opts: PipelineOptions):
    """Occultation predictions of every target in input order (:func:`rhofollow.core.executor.dispatch`):
    one document, its ``targets`` concatenated and its notices and warnings each kept once."""
    from rhofollow.core.executor import dispatch

    out, notices, warned = None, [], []
    # without a pool one call covers every target (one batched UTC conversion)
    whole = not opts.dask_address and max(1, int(opts.workers or 1)) <= 1
    for occ, caught in dispatch(_occultation_chunk, assessments, workers=opts.workers,
                                dask_address=opts.dask_address, chunk=len(assessments) if whole else None,
                                make_job=lambda chunk: (chunk, start_iso, end_iso, eopts)):
        if out is None:
            out = dict(occ, targets=[])
        out["targets"] += occ["targets"]
        notices += [n for n in occ.get("notices", []) if n not in notices]
        warned += caught
    if out is None:  # no targets: the document of an empty run
        out, warned = _occultation_chunk([], start_iso, end_iso, eopts)
        notices = list(out.get("notices", []))
    out["notices"] = notices
    return out, warned


def apply_ledger(path, assessments) -> tuple[dict, set, list]:
    """Bring a campaign ledger's knowledge into the assessments (in place).

    Re-weights each target's samples with its RVs and occultation timings, refreshes the
    eccentricity summaries of its record, and returns (RV visits done per target, targets whose
    occultation was measured, notices).
    """
    from rhofollow.io.ledger import Ledger, LedgerError
    import sqlite3

    from rhofollow.stages.occultations import describe_failure
    from rhofollow.stages.update import apply_to_assessments
    from rhofollow.stages.assess import refresh_data_keys
    from rhofollow.core.samples import kish_ess, reliability

    try:
        lg = Ledger(path)
    except (LedgerError, OSError) as exc:
        raise PipelineError(f"ledger {path}: {exc}") from None
    updates = apply_to_assessments(lg, assessments)
    n_done, measured = {}, set()
    for a in assessments:
        try:
            if a.name in updates and a.samples is not None:
                s = a.samples
                ok, why = reliability(kish_ess(s.weights))
                a.record.update(ecc=s.quantiles("e"), p_ecc_gt_0p1=float(s.weights[s.e > 0.1].sum()),
                                ess=kish_ess(s.weights), updated_from_ledger=True, reliable=ok)
                refresh_data_keys(a.record)   # W = B/(1+B) follows the updated posterior
                if why:
                    a.record["reliability_note"] = why
                else:
                    a.record.pop("reliability_note", None)
            days = {int(m.bjd_tdb + 0.5) for m in lg.rv_measurements(a.name)}
            done = sum(o.outcome == "ok" for o in lg.done(a.name, "rv"))
            if days or done:
                n_done[a.name] = max(len(days), done)
            if any(t.kind == "detection" for t in lg.occultation_timings(a.name)):
                measured.add(a.name)
        except (LedgerError, sqlite3.Error):
            raise
        except Exception as exc:  # noqa: BLE001 - one target's failure stays with that target
            a.warnings.append(f"ledger data not applied: {describe_failure(exc)}")
    notes = [f"ledger {path}: posteriors of {len(updates)} target(s) updated with measured data"] if updates else []
    return n_done, measured, notes


def _assess_one_by_one(targets, opts: PipelineOptions, prior) -> list:
    """Assess target by target in this process; an unexpected failure becomes that target's error.

    Each target's draws depend on (seed, name) only, so the results equal the batch's."""
    from rhofollow.stages.assess import Assessment, assess_target
    from rhofollow.stages.occultations import describe_failure

    out = []
    for t in targets:
        try:
            out.append(assess_target(t, opts.samples, prior, opts.seed, opts.transit_weight))
        except Exception as exc:  # noqa: BLE001 - one target's failure stays with that target
            msg = f"{t.source}, row {t.row} ({t.name}): assessment failed: {describe_failure(exc)}"
            out.append(Assessment(t.name, t, False, [msg], list(t.warnings),
                                  record={"name": t.name, "ok": False, "errors": [msg],
                                          "warnings": list(t.warnings)}))
    return out


def stage_failures(assessments, occ_targets, rv_records) -> list[str]:
    """One message per target that was assessed but failed a later stage (occultations or RV)."""
    ok = {a.name for a in assessments if a.ok and a.samples is not None}
    out = []
    for stage, recs in (("occultations", occ_targets), ("RV planning", rv_records)):
        for r in recs or []:
            if r.get("name") in ok and not r.get("ok", True):
                why = "; ".join(r.get("errors") or []) or "no reason given"
                out.append(f"{r['name']}: {stage} failed for this target only ({why})")
    return out


def _science_contained(assessments, occ_targets, rv_records, n_done):
    """:func:`~rhofollow.planning.night.science_from_records` target by target: a target whose
    science entry cannot be built is skipped with the reason; the others are planned."""
    from rhofollow.stages.occultations import describe_failure
    from rhofollow.planning.night import science_from_records

    failed = stage_failures(assessments, occ_targets, rv_records)
    occ = {r["name"]: r for r in occ_targets or []}
    rvs = {r["name"]: r for r in rv_records or []}
    science, skipped = [], []
    for a in assessments:
        try:
            sc, sk = science_from_records([a], [occ[a.name]] if a.name in occ else [],
                                          [rvs[a.name]] if a.name in rvs else [], n_done=n_done)
        except Exception as exc:  # noqa: BLE001 - one target's failure stays with that target
            why = f"planning inputs could not be built: {describe_failure(exc)}"
            skipped.append({"name": a.name, "reason": why})
            failed.append(f"{a.name}: {why}")
            continue
        science += sc
        skipped += sk
    return science, skipped, failed


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
    """
    from rhofollow.stages.occultations import EclipseInputError, EclipseOptions
    from rhofollow.stages.assess_many import assess_parallel
    from rhofollow.physics.priors import DEFAULT_PRIOR, parse_prior
    from rhofollow.planning.reach import unreachable_targets
    from rhofollow.planning.tasks import ValueModel
    opts = options or PipelineOptions()
    progress = progress or _quiet
    try:
        prior = parse_prior(opts.ecc_prior or DEFAULT_PRIOR)
    except ValueError as exc:
        raise PipelineError(f"eccentricity prior: {exc}") from None
    spec, phot = _instruments(site)
    targets = list(targets)
    timings = {}
    t = time.perf_counter()
    adv = progress("assessing", len(targets))
    try:
        assessments = assess_parallel(targets, n_samples=opts.samples, prior=prior, seed=opts.seed,
                                      transit_prob=opts.transit_weight, workers=max(1, int(opts.workers or 1)),
                                      progress=adv, dask_address=opts.dask_address)
    except Exception:  # noqa: BLE001 - find the target(s) that failed; the others keep their results
        assessments = _assess_one_by_one(targets, opts, prior)
    timings["assess_s"] = time.perf_counter() - t
    n_done, occ_measured, ledger_notes = apply_ledger(opts.ledger, assessments) if opts.ledger else ({}, set(), [])

    t = time.perf_counter()
    adv = progress("occultations", 1)
    eopts = EclipseOptions(coverage=opts.coverage, location=site.location,
                           baseline_h=phot.baseline_h if phot else None)
    if phot is not None:
        eopts.band = (phot.band_center_um, phot.band_width_um)
        if phot.has_precision:
            eopts.scatter_ref_ppm, eopts.mag_ref = phot.precision_ref_ppm, phot.vmag_ref
    notices = list(ledger_notes)
    try:
        occ, caught = _occultations(assessments, start_iso, end_iso, eopts, opts)
    except EclipseInputError as exc:
        raise PipelineError(str(exc)) from None
    adv(1)
    notices += occ.get("notices", []) + sorted(set(caught))
    timings["occultations_s"] = time.perf_counter() - t

    t = time.perf_counter()
    rv = []
    if spec is not None:
        adv = progress("RV planning", len(assessments))
        kw = dict(fap=opts.fap, power=opts.power, seed=opts.seed, n_null=opts.sims, n_alt=min(400, opts.sims))
        rv = _rv_records(assessments, spec, opts, kw, adv)
    else:
        notices.append("the site lists no spectrograph: no RV visits planned")
    if opts.rv_data:
        known = {a.name for a in assessments}
        for name in sorted(set(opts.rv_data) - known):
            notices.append(f"measured RVs of {name} match no catalogue target")
    timings["rv_s"] = time.perf_counter() - t

    occ_targets = occ["targets"]
    if occ_measured:
        occ_targets = [dict(r, events=[]) if r.get("name") in occ_measured else r for r in occ_targets]
    science, skipped, failures = _science_contained(assessments, occ_targets, rv, n_done)
    notices += failures
    skipped += [{"name": n, "reason": "occultation already measured (ledger): no more windows"}
                for n in sorted(occ_measured)]
    model = ValueModel(baseline_h=0.0, lead_h=(phot.overhead_min / 60.0) if phot else 0.0,
                       partial_baseline_h=phot.baseline_h if phot else 1.0)
    names = {"occultation": phot.name if phot else "photometer",
             "rv": spec.name if spec else "spectrograph"}
    unreachable = unreachable_targets(site, [(t.name, t.value("dec_deg")) for t in targets])
    return Stages(assessments, occ, rv, science, skipped, names,
                  (site.slew_minutes + site.setup_minutes) / 60.0, model, notices, prior, timings,
                  failures, unreachable)


def planner_targets(stages: Stages) -> list[dict]:
    """One contract record per assessed target (input order): failed when its assessment, occultation
    prediction or RV plan failed; warnings of every stage plus "never rises at the site"."""
    from rhofollow.stages.records import merge_stage_records

    recs = [a.record or {"name": a.name, "ok": a.ok, "errors": list(a.errors), "warnings": list(a.warnings)}
            for a in stages.assessments]
    extra = {n: [w] for n, w in stages.unreachable.items()}
    return merge_stage_records([a.name for a in stages.assessments], recs, stages.occultations.get("targets", []),
                               stages.rv, extra_warnings=extra)


def night_document(plan, stages: Stages, site, date, seed, samples, catalogue=None,
                   command: str = "night") -> dict:
    """The ``night`` JSON: the output envelope (:mod:`rhofollow.stages.records`) around the night plan.

    Targets carry ``n_blocks`` (blocks chosen for them tonight) and ``never_rises``; the plan's keys
    (``blocks``, ``total_value``, ...) and ``date``, ``timezone``, ``instruments``, ``notices``,
    ``samples`` follow the envelope.
    """
    from rhofollow.stages.records import envelope

    body = plan.to_dict()
    skipped = stages.skipped + body.pop("skipped")
    n_blocks: dict = {}
    for b in body["blocks"]:
        n_blocks[b["name"]] = n_blocks.get(b["name"], 0) + 1
    targets = [dict(t, n_blocks=n_blocks.get(t["name"], 0), never_rises=t["name"] in stages.unreachable)
               for t in planner_targets(stages)]
    body.update({"date": str(date), "timezone": site.timezone, "instruments": stages.instruments,
                 "notices": stages.notices, "samples": samples})
    return envelope(command, catalogue=catalogue, seed=seed, targets=targets, skipped=skipped,
                    caution=body["cautions"][0] if body.get("cautions") else None, payload=body)


def campaign_document(plan, stages: Stages, site, start, end, seed, samples, catalogue=None,
                      command: str = "campaign") -> dict:
    """The ``campaign`` JSON: the output envelope around the campaign plan.

    Every assessed target has the campaign keys (``occultation_windows``, ``rv_visits``, ``hours``,
    ``rv_visits_needed``, ``n_windows_unobservable``, ``notes``; empty for a failed target) and
    ``never_rises``.
    """
    from rhofollow.stages.records import envelope

    body = plan.to_dict()
    camp = {t["name"]: t for t in body.pop("targets")}
    empty = {"occultation_windows": [], "rv_visits": [], "hours": {}, "rv_visits_needed": None,
             "n_windows_unobservable": 0, "notes": []}
    targets = []
    for t in planner_targets(stages):
        c = {k: v for k, v in camp.get(t["name"], empty).items() if k not in ("name", "ok", "errors", "warnings")}
        targets.append(dict(t, **c, never_rises=t["name"] in stages.unreachable))
    body.update({"start": str(start), "end": str(end), "notices": stages.notices, "samples": samples,
                 "timezone": site.timezone, "overhead_h": stages.overhead_h})
    return envelope(command, catalogue=catalogue, seed=seed, targets=targets, skipped=stages.skipped,
                    caution=body["cautions"][0] if body.get("cautions") else None, payload=body)


def _rv_request(stages: Stages, nights, site, opts: PipelineOptions, progress):
    """Time-to-confirm at reachable epochs and the RV request (:mod:`rhofollow.planning.rvrequest`)."""
    from rhofollow.planning.rvreach import epochs_from_ledger
    from rhofollow.planning.rvrequest import plan_rv_requests

    spec, _ = _instruments(site)
    if spec is None or not any(e.get("rv") for e in stages.science):
        return None
    t = time.perf_counter()
    adv = progress("RV at reachable epochs", len(stages.science))
    req = plan_rv_requests(stages.assessments, stages.science, nights, spec, loss_fraction=site.loss_fraction,
                           fap=opts.fap, power=opts.power, seed=opts.seed, n_null=opts.sims,
                           n_alt=min(400, opts.sims), hours=opts.rv_hours, progress=adv,
                           epochs_in_hand=epochs_from_ledger(opts.ledger, [e["name"] for e in stages.science]))
    stages.timings["rv_reachable_s"] = time.perf_counter() - t
    return req


def run_pipeline(targets, site, start: _dt.date, end: _dt.date, options: PipelineOptions | None = None,
                 progress: StageProgress | None = None, max_nights: int = 400,
                 catalogue=None) -> PipelineResult:
    """The whole chain for the local evenings ``start`` .. ``end`` (inclusive) at ``site``.

    Runs :func:`run_stages` over the dark time of the range, then the visibility of every night, the
    nightly plan of the first dark night and the campaign plan. ``catalogue`` (the reader's
    :class:`~rhofollow.core.types.CatalogueResult`, optional) puts the catalogue path and its row
    problems into the night and campaign documents.

    Raises
    ------
    PipelineError
        End before start, too many nights, no dark time in the range, bad prior or instrument file.
    """
    from rhofollow.planning.campaign import NightVis, plan_campaign
    from rhofollow.planning.night import night_visibility, plan_night
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
    adv = progress("visibility", len(grids) + 1)
    first = grids[0]
    # the first night is planned before the campaign loop: night_visibility stores each target's
    # BJD - JD offset of the night it last saw in the science dicts
    vis0 = night_visibility(eng, first, stages.science)
    adv(1)
    nplan = plan_night(stages.science, vis0, site=site.name, night_start_jd=first.start_jd,
                       night_end_jd=first.end_jd, overhead_h=stages.overhead_h, model=stages.model)
    night_doc = night_document(nplan, stages, site, first.date, opts.seed, opts.samples, catalogue)
    nights = []
    for g in grids:
        nights.append(NightVis(str(g.date), night_visibility(eng, g, stages.science), g.start_jd, g.end_jd))
        adv(1)
    timings["visibility_s"] = time.perf_counter() - t

    rv_request = _rv_request(stages, nights, site, opts, progress)
    if rv_request is not None:   # the night plan sees the request, with the first night's BJD offsets
        vis0 = night_visibility(eng, first, stages.science)
        nplan = plan_night(stages.science, vis0, site=site.name, night_start_jd=first.start_jd,
                           night_end_jd=first.end_jd, overhead_h=stages.overhead_h, model=stages.model)
        night_doc = night_document(nplan, stages, site, first.date, opts.seed, opts.samples, catalogue)
        for g in grids[-1:]:
            night_visibility(eng, g, stages.science)
    t = time.perf_counter()
    adv = progress("scheduling", 1)
    cplan = plan_campaign(stages.science, nights, site=site.name, overhead_h=stages.overhead_h,
                          instruments=stages.instruments, model=stages.model, rv_request=rv_request)
    camp = campaign_document(cplan, stages, site, start, end, opts.seed, opts.samples, catalogue)
    adv(1)
    timings["scheduling_s"] = time.perf_counter() - t
    timings["total_s"] = time.perf_counter() - t_all
    return PipelineResult(site, eng, stages, start, end, night_doc, first, camp, cplan, grids, opts, timings,
                          catalogue)
