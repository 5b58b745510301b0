"""The stage runners of the chained run, target chunk by target chunk.

:func:`chain_parts` sends consecutive chunks of targets through
:func:`rhofollow.core.executor.dispatch` (this process, a process pool or a dask cluster); each
chunk runs the whole per-target chain where it lands (:func:`_chain_chunk`): assessment, the
ledger's data, occultation predictions, RV records. So a chunk's samples cross to the client once,
and the client holds at most the dispatch window of chunks before it reduces them
(:func:`science_part`) and lets their samples go. Each target's draws depend on (seed, name,
stage) only, so every mode and every chunking gives the same records.
"""
from __future__ import annotations

import time
import warnings
from dataclasses import dataclass, field

from rhofollow.pipeline.types import PipelineError, PipelineOptions

__all__ = ["apply_ledger", "stage_failures", "instruments", "eclipse_options", "chain_parts", "ChainPart",
           "science_part", "CHAIN_CHUNK"]

#: Targets per chunk of the chain (at most; fewer for small catalogues on a pool or cluster):
#: bounds the samples a worker and the client hold at once (20,000 samples are about 2.2 MiB).
CHAIN_CHUNK = 16


def instruments(site) -> tuple:
    """The site's first spectrograph and first photometer (each None when it lists none).

    Parameters
    ----------
    site : :class:`rhofollow.planning.site.Site`

    Returns
    -------
    (Spectrograph or None, Photometer or None)

    Raises
    ------
    PipelineError
        An instrument file cannot be read.
    """
    from rhofollow.io.instruments import InstrumentError, Photometer, Spectrograph, read_instruments

    try:
        insts = read_instruments(site.instruments) if site.instruments else {}
    except InstrumentError as exc:
        raise PipelineError(str(exc)) from None
    spec = next((i for i in insts.values() if isinstance(i, Spectrograph)), None)
    phot = next((i for i in insts.values() if isinstance(i, Photometer)), None)
    return spec, phot


def eclipse_options(site, phot, opts: PipelineOptions):
    """:class:`~rhofollow.stages.occultations.EclipseOptions` of the run: coverage, the site's
    location and the photometer's baseline, band and precision.

    Parameters
    ----------
    site : the site; phot : its photometer or None; opts : the run's options

    Returns
    -------
    EclipseOptions
    """
    from rhofollow.stages.occultations import EclipseOptions

    eopts = EclipseOptions(coverage=opts.coverage, location=site.location,
                           baseline_h=phot.baseline_h if phot else None)
    if phot is not None:
        eopts.band = (phot.band_center_um, phot.band_width_um)
        if phot.has_precision:
            eopts.scatter_ref_ppm, eopts.mag_ref = phot.precision_ref_ppm, phot.vmag_ref
    return eopts


@dataclass
class ChainPart:
    """What one chunk of the chain gives back (input order within the chunk).

    assessments : the chunk's Assessments, with their samples; occultations : the occultation
    document of the chunk; caught : warnings raised while predicting them; rv : RV records (empty
    without a spectrograph); n_done, measured, n_updated : the ledger's RV visits done per target,
    targets whose occultation was measured, and number of posteriors it updated;
    seconds : time per stage in the process that ran the chunk (assess_s, occultations_s, rv_s).
    """

    assessments: list
    occultations: dict
    caught: list
    rv: list
    n_done: dict = field(default_factory=dict)
    measured: set = field(default_factory=set)
    n_updated: int = 0
    seconds: dict = field(default_factory=dict)


def _chain_chunk(targets, job: dict) -> ChainPart:
    """Worker: assess -> ledger -> occultations -> RV of one chunk of targets (module level, so it
    pickles). ``job`` holds the run's settings (:func:`chain_parts`)."""
    from rhofollow.stages.assess import assess_catalogue

    sec = {}
    t = time.perf_counter()
    try:
        assessed = assess_catalogue(targets, n_samples=job["samples"], prior=job["prior"], seed=job["seed"],
                                    transit_prob=job["transit_weight"])
    except Exception:  # noqa: BLE001 - find the target(s) that failed; the others keep their results
        assessed = _assess_one_by_one(targets, job)
    sec["assess_s"] = time.perf_counter() - t
    n_done, measured, n_updated = _ledger_counts(job["ledger"], assessed) if job["ledger"] else ({}, set(), 0)
    t = time.perf_counter()
    occ, caught = _occultation_chunk(assessed, job["start_iso"], job["end_iso"], job["eopts"])
    sec["occultations_s"] = time.perf_counter() - t
    t = time.perf_counter()
    rv = []
    if job["spec"] is not None:
        from rhofollow.stages.rv import plan_rv

        data = {a.name: job["rv_data"][a.name] for a in assessed if job["rv_data"] and a.name in job["rv_data"]}
        rv = plan_rv(assessed, job["spec"], data or None, **job["rv_kw"])
    sec["rv_s"] = time.perf_counter() - t
    return ChainPart(assessed, occ, caught, rv, n_done, measured, n_updated, sec)


def chain_parts(targets, opts: PipelineOptions, prior, spec, eopts, start_iso: str, end_iso: str):
    """Yield a :class:`ChainPart` per chunk of ``targets``, in input order.

    Parameters
    ----------
    targets : validated catalogue targets
    opts : the run's options (workers, dask_address, samples, seed, ledger, RV settings)
    prior : the parsed eccentricity prior; spec : the spectrograph or None (no RV records)
    eopts : :func:`eclipse_options`; start_iso, end_iso : UTC range of the occultation predictions
    """
    from rhofollow.core.executor import dispatch

    job = dict(samples=opts.samples, prior=prior, seed=opts.seed, transit_weight=opts.transit_weight,
               ledger=opts.ledger, start_iso=start_iso, end_iso=end_iso, eopts=eopts, spec=spec,
               rv_kw=dict(fap=opts.fap, power=opts.power, seed=opts.seed, n_null=opts.sims,
                          n_alt=min(400, opts.sims)))
    rv_data = opts.rv_data or {}
    workers = max(1, int(opts.workers or 1))
    # in this process, chunks of CHAIN_CHUNK (one batched occultation call each); on a pool or a
    # cluster about four chunks per worker slot, at most CHAIN_CHUNK targets each
    chunk = CHAIN_CHUNK if not opts.dask_address and workers <= 1 else None

    def make_job(part):
        return part, dict(job, rv_data={t.name: rv_data[t.name] for t in part if t.name in rv_data} or None)

    yield from dispatch(_chain_chunk, targets, workers=workers, dask_address=opts.dask_address, chunk=chunk,
                        make_job=make_job, cap=CHAIN_CHUNK)


def _occultation_chunk(chunk, start_iso, end_iso, eopts):
    """Occultation predictions of one chunk, with the warnings raised while making them.

    An empty chunk gives the document of an empty run."""
    from rhofollow.stages.occultations import EclipseInputError, predict_occultations

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            occ = predict_occultations(chunk, start_iso, end_iso, eopts)
        except EclipseInputError as exc:
            raise PipelineError(str(exc)) from None
    return occ, [str(w.message) for w in caught]


def apply_ledger(path, assessments) -> tuple[dict, set, list]:
    """Bring a campaign ledger's knowledge into the assessments (in place).

    Re-weights each target's samples with its RVs and occultation timings and refreshes the
    eccentricity summaries of its record.

    Parameters
    ----------
    path : the ledger file (SQLite); assessments : Assessments with their samples

    Returns
    -------
    (RV visits done per target, targets whose occultation was measured, notices)
    """
    n_done, measured, n = _ledger_counts(path, assessments)
    return n_done, measured, ledger_notes(path, n)


def ledger_notes(path, n_updated: int) -> list[str]:
    """The run-level notice of a ledger that updated ``n_updated`` posteriors (none for 0).

    Parameters
    ----------
    path : the ledger file; n_updated : number of targets whose posterior it updated

    Returns
    -------
    list of str
    """
    return [f"ledger {path}: posteriors of {n_updated} target(s) updated with measured data"] if n_updated else []


def _ledger_counts(path, assessments) -> tuple[dict, set, int]:
    """:func:`apply_ledger` with the number of updated targets instead of the notice."""
    from rhofollow.io.ledger import Ledger, LedgerError
    from rhofollow.stages.update import apply_to_assessments

    try:
        lg = Ledger(path)
    except (LedgerError, OSError) as exc:
        raise PipelineError(f"ledger {path}: {exc}") from None
    with lg:
        updates = apply_to_assessments(lg, assessments)
        n_done, measured = _ledger_targets(lg, assessments, updates)
    return n_done, measured, len(updates)


def _ledger_targets(lg, assessments, updates) -> tuple[dict, set]:
    """Refresh the records of the updated targets; (RV visits done per target, targets whose
    occultation was measured)."""
    import sqlite3

    from rhofollow.io.ledger import LedgerError
    from rhofollow.stages.occultations import describe_failure
    from rhofollow.stages.assess import refresh_data_keys
    from rhofollow.core.samples import kish_ess, reliability

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
    return n_done, measured


def _assess_one_by_one(targets, job: dict) -> list:
    """Assess target by target; an unexpected failure becomes that target's error.

    Each target's draws depend on (seed, name) only, so the results equal the batch's."""
    from rhofollow.stages.assess import Assessment, assess_target
    from rhofollow.stages.occultations import describe_failure

    out = []
    for t in targets:
        try:
            out.append(assess_target(t, job["samples"], job["prior"], job["seed"], job["transit_weight"]))
        except Exception as exc:  # noqa: BLE001 - one target's failure stays with that target
            msg = f"{t.source}, row {t.row} ({t.name}): assessment failed: {describe_failure(exc)}"
            out.append(Assessment(t.name, t, False, [msg], list(t.warnings),
                                  record={"name": t.name, "ok": False, "errors": [msg],
                                          "warnings": list(t.warnings)}))
    return out


def stage_failures(assessments, occ_targets, rv_records) -> list[str]:
    """One message per target that was assessed but failed a later stage (occultations or RV).

    Parameters
    ----------
    assessments : Assessments; occ_targets : occultation records; rv_records : RV records

    Returns
    -------
    list of str (occultation failures first, then RV failures, each in input order)
    """
    ok = {a.name for a in assessments if a.ok and a.samples is not None}
    out = []
    for stage, recs in (("occultations", occ_targets), ("RV planning", rv_records)):
        for r in recs or []:
            if r.get("name") in ok and not r.get("ok", True):
                why = "; ".join(r.get("errors") or []) or "no reason given"
                out.append(f"{r['name']}: {stage} failed for this target only ({why})")
    return out


def science_part(assessments, occ_targets, rv_records, n_done) -> tuple[list, list, list]:
    """:func:`~rhofollow.planning.night.science_from_records` target by target: a target whose
    science entry cannot be built is skipped with the reason; the others are planned.

    Parameters
    ----------
    assessments : the assessments of one part (with their samples)
    occ_targets, rv_records : occultation and RV records (any superset of the part's)
    n_done : target name -> RV visits already obtained

    Returns
    -------
    science entries, skipped ``{"name", "reason"}`` dicts, and one failure message per skipped target
    """
    from rhofollow.stages.occultations import describe_failure
    from rhofollow.planning.night import science_from_records

    failed = []
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
