"""The per-target figures of a report, rendered to PNG bytes in this process or in a process pool.

Each chosen target becomes one picklable job (its record, its samples or a reference to their spool
file, and the occultation, RV and campaign entries its figures read); :func:`render_part` builds and
renders the target's four figures (density, (e, omega), occultation, RV) and returns their PNG
bytes. :func:`render_target_figures` sends the jobs through :func:`rhofollow.core.executor.dispatch`,
so with ``--workers`` above 1 the figures are drawn by several processes while the main process draws
the run-level figures; the files, their order and their bytes are the same in every mode (tested).
"""
from __future__ import annotations

import itertools

__all__ = ["FIGURE_KINDS", "target_figure_jobs", "render_part", "render_target_figures"]

#: File-name suffix and caption of each per-target figure, in the report's order.
FIGURE_KINDS = (
    ("density", "Circular-orbit vs independent density"),
    ("ecc_omega", "Eccentricity posterior"),
    ("occultation", "Occultation phase and the timing of the next events"),
    ("rv", "Predicted RV curves, informative phases and planned visits"),
)


def _portable(samples):
    """A spooled set travels as its file reference (the worker reads it); a set in memory as itself."""
    detach = getattr(type(samples), "detached", None)
    return detach(samples) if detach is not None else samples


def target_figure_jobs(result, chosen, rv_data=None, portable: bool = False) -> list[dict]:
    """One job per chosen target: what its four figures read.

    Parameters
    ----------
    result : rhofollow.pipeline.PipelineResult
        The finished run (occultations, RV records, campaign, first night, options).
    chosen : list of assessments
        The targets that get figures, in rank order.
    rv_data : dict, optional
        Target name -> measured RVs (BJD_TDB days, m/s).
    portable : bool
        Send spooled samples as file references (for another process).

    Returns
    -------
    list of dict
        Keys ``name``, ``record``, ``samples``, ``occ``, ``rv``, ``camp``, ``night_phases``,
        ``rv_data``, ``seed``, ``coverage``.
    """
    occ = {r["name"]: r for r in result.occultations["targets"]}
    rv = {r["name"]: r for r in result.rv}
    camp = {t["name"]: t for t in result.campaign["targets"]}
    night_phases: dict[str, list] = {}
    for b in (result.night or {}).get("blocks", []):
        if b.get("kind") == "rv" and b.get("phase") is not None:
            night_phases.setdefault(b["name"], []).append(b["phase"])
    return [dict(name=a.name, record=a.record, samples=_portable(a.samples) if portable else a.samples,
                 occ=occ.get(a.name, {}), rv=rv.get(a.name), camp=camp.get(a.name, {}),
                 night_phases=night_phases.get(a.name), rv_data=(rv_data or {}).get(a.name),
                 seed=result.options.seed, coverage=result.options.coverage)
            for a in chosen]


def _render_one(job: dict) -> list[bytes]:
    """The PNG bytes of one target's four figures, in :data:`FIGURE_KINDS` order."""
    from rhofollow.report import plots
    from rhofollow.report.files import save_figure

    s = job["samples"]
    if not hasattr(type(s), "to_table"):
        s = s.load()        # a spooled handle or a spool file reference: read the set once
    camp = job["camp"]
    return [save_figure(plots.density_figure(job["record"])),
            save_figure(plots.ecc_omega_figure(s, job["record"])),
            save_figure(plots.occultation_figure(s, job["occ"], camp.get("occultation_windows"),
                                                 coverage=job["coverage"])),
            save_figure(plots.rv_figure(s, job["rv"], camp.get("rv_visits"), job["night_phases"],
                                        job["rv_data"], seed=job["seed"]))]


def render_part(part) -> list[list[bytes]]:
    """:func:`_render_one` of every job of ``part`` (run in whichever process gets the part).

    Parameters
    ----------
    part : list of dict
        Jobs of :func:`target_figure_jobs`.

    Returns
    -------
    list of list of bytes
        Per job, the PNG bytes of its figures in :data:`FIGURE_KINDS` order.
    """
    return [_render_one(job) for job in part]


def render_target_figures(result, chosen, rv_data=None, workers: int = 1, meanwhile=None):
    """Render the per-target figures; yields ``(assessment, [png bytes x 4])`` in ``chosen`` order.

    Parameters
    ----------
    result : rhofollow.pipeline.PipelineResult
        The finished run.
    chosen : list of assessments
        The targets that get figures, in rank order.
    rv_data : dict, optional
        Target name -> measured RVs.
    workers : int
        Processes; above 1 (with two targets or more) a process pool renders one target per part,
        every part submitted at once.
    meanwhile : callable, optional
        Called once, after the parts are submitted and before the first target is yielded (the run-level
        figures are drawn there while the pool works).

    Yields
    ------
    (assessment, list of bytes)
    """
    from rhofollow.core.executor import dispatch

    parallel = int(workers or 1) > 1 and len(chosen) > 1
    jobs = target_figure_jobs(result, chosen, rv_data, portable=parallel)
    parts = dispatch(render_part, jobs, workers=workers if parallel else 1, chunk=1,
                     window=max(1, len(jobs)))
    waiting = meanwhile
    if parallel and waiting is not None:
        first = next(parts, None)          # submits every part, then waits for the first
        waiting()
        waiting = None
        parts = itertools.chain([] if first is None else [first], parts)
    if waiting is not None:
        waiting()
    for a, pngs in zip(chosen, (p for part in parts for p in part)):
        yield a, pngs
