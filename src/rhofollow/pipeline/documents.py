"""Document assembly of the chained run: the planners' target records and the ``night`` and
``campaign`` JSON envelopes around the plans (:mod:`rhofollow.stages.records`)."""
from __future__ import annotations

from rhofollow.pipeline.types import Stages

__all__ = ["planner_targets", "night_document", "campaign_document"]


def planner_targets(stages: Stages) -> list[dict]:
    """One contract record per assessed target (input order): failed when its assessment, occultation
    prediction or RV plan failed; warnings of every stage plus "never rises at the site".

    Parameters
    ----------
    stages : the run's :class:`~rhofollow.pipeline.types.Stages`

    Returns
    -------
    list of dict
    """
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

    Parameters
    ----------
    plan : the :class:`~rhofollow.planning.night.NightPlan`; stages : the run's Stages
    site : the site; date : local date of the evening; seed : run seed
    samples : samples per target; catalogue : the reader's result (optional); command : envelope name

    Returns
    -------
    dict
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

    Parameters
    ----------
    plan : the :class:`~rhofollow.planning.campaign.CampaignPlan`; stages : the run's Stages
    site : the site; start, end : local dates of the first and last evening; seed : run seed
    samples : samples per target; catalogue : the reader's result (optional); command : envelope name

    Returns
    -------
    dict
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
