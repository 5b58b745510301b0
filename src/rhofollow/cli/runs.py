"""Library runs shared by several commands (no command imports another).

* :func:`prepare` / :class:`Prepared`: catalogue -> assess -> occultations -> RV at the site, for the
  ``night`` and ``campaign`` planners; :func:`nothing_to_plan` when no catalogue row is valid;
* :func:`plan_to_folder`: the whole chain into a report folder, for ``plan`` and ``demo``.
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from rhofollow.cli.common import (UserError, load_catalogue, report_row_issues, resolve_workers, stage_progress,
                                  write_json)
from rhofollow.cli.options import load_site_arg
from rhofollow.cli.render import message
from rhofollow.core.defaults import MIN_PLANNING_SAMPLES, MIN_SAMPLES, MIN_SIMS

__all__ = ["Prepared", "prepare", "nothing_to_plan", "plan_to_folder"]


@dataclass
class Prepared:
    """Everything the plan commands share: site, engine, instruments, science dicts, skips."""

    site: object
    engine: object
    science: list
    skipped: list
    overhead_h: float
    model: object
    instruments: dict
    notices: list
    stages: object = None
    catalogue: object = None


def prepare(args, site, start_iso: str, end_iso: str) -> Prepared:
    """Read the catalogue, run assess -> eclipses -> rv for [start_iso, end_iso] (UTC) at ``site``.

    The stages run through :func:`rhofollow.pipeline.run_stages`, with the ledger when ``--ledger`` is
    given.

    Parameters
    ----------
    args : argparse.Namespace
        The options of ``night`` or ``campaign`` (see :func:`rhofollow.cli.common.add_plan_options`).
    site : rhofollow.planning.site.Site
        The observing site.
    start_iso, end_iso : str
        The planned interval, ISO times (UTC).

    Returns
    -------
    Prepared
        Site, visibility engine, science records, skipped targets, overheads (hours) and the rest the
        planners need (empty when no catalogue row is valid).
    """
    from rhofollow.pipeline import PipelineError, PipelineOptions, run_stages
    from rhofollow.planning.visibility import VisibilityEngine

    if args.samples < MIN_PLANNING_SAMPLES:
        raise UserError(f"--samples must be at least {MIN_PLANNING_SAMPLES}, got {args.samples}")
    cat = load_catalogue(args.catalog, require_coords=True)
    report_row_issues(cat)
    if not cat.targets:
        return Prepared(site, VisibilityEngine(site), [], [], 0.0, None, {}, [], None, cat)
    opts = PipelineOptions(samples=args.samples, seed=args.seed, ecc_prior=args.ecc_prior,
                           transit_weight=not args.no_transit_weight,
                           workers=max(1, resolve_workers(args.workers, len(cat.targets))), ledger=args.ledger)
    try:
        with stage_progress() as stage:
            st = run_stages(cat.targets, site, start_iso, end_iso, opts, progress=stage)
    except PipelineError as exc:
        raise UserError(str(exc)) from None
    return Prepared(site, VisibilityEngine(site), st.science, st.skipped, st.overhead_h, st.model,
                    st.instruments, st.notices, st, cat)


def nothing_to_plan(command: str, args, prep: Prepared, payload: dict) -> int:
    """Every catalogue row failed validation: say so, write the envelope (row errors only).

    Parameters
    ----------
    command : str
        The command's name, for the envelope.
    args : argparse.Namespace
        The command's options (``catalog``, ``seed``, ``samples``, ``json``).
    prep : Prepared
        What :func:`prepare` returned.
    payload : dict
        The command's own envelope fields.

    Returns
    -------
    int
        The envelope's exit status (1).
    """
    from rhofollow.stages.records import envelope

    message(f"{args.catalog}: no valid target rows to plan", "error")
    doc = envelope(command, catalogue=prep.catalogue, seed=args.seed,
                   payload=dict(payload, site=prep.site.name, samples=args.samples))
    if args.json:
        write_json(args.json, doc)
    return doc["exit_status"]


def plan_to_folder(catalog, site_path, start: dt.date, end: dt.date, out, args, command: str = "plan") -> dict:
    """Run the pipeline and write the report folder.

    A catalogue without a valid row writes no folder: the dict then has ``doc`` (the envelope with
    the row errors) and an empty ``files``.

    Parameters
    ----------
    catalog : str or path-like
        The catalogue file.
    site_path : str or path-like
        The site file (TOML).
    start, end : datetime.date
        Local dates of the first and last evening.
    out : str or path-like
        The report folder (created, or an earlier report folder replaced).
    args : argparse.Namespace
        The options of :func:`rhofollow.cli.options.add_report_options`.
    command : str
        The command's name, for the envelope.

    Returns
    -------
    dict
        ``write_report``'s dict (``doc``, ``files``, ...) plus ``result`` (the pipeline result) and
        ``n_row_errors``.
    """
    from rhofollow.pipeline import PipelineError, PipelineOptions, run_pipeline
    from rhofollow.io.atomic import NoSpaceError
    from rhofollow.report.folder import ReportFolderError, check_report_folder, write_report

    try:
        check_report_folder(out)
    except ReportFolderError as exc:
        raise UserError(str(exc)) from None

    _check_report_options(args, start, end)
    site = load_site_arg(site_path)
    rv_data, hours = _rv_inputs(args, site)
    cat = load_catalogue(catalog, require_coords=True)
    report_row_issues(cat)
    if not cat.targets:
        from rhofollow.stages.records import envelope

        message(f"{catalog}: no valid target rows to plan; no report written", "error")
        return {"doc": envelope(command, catalogue=cat, seed=args.seed), "files": [], "result": None}
    opts = PipelineOptions(samples=args.samples, seed=args.seed, ecc_prior=args.ecc_prior,
                           transit_weight=not args.no_transit_weight,
                           workers=resolve_workers(args.workers, len(cat.targets)), dask_address=args.dask,
                           sims=args.sims, rv_data=rv_data, rv_hours=hours)
    with stage_progress(transient=False) as stage:
        try:
            result = run_pipeline(cat.targets, site, start, end, opts, progress=stage, catalogue=cat)
        except PipelineError as exc:
            raise UserError(str(exc)) from None
        result.command = command
        try:
            written = write_report(result, out, plot_targets=args.plot_targets, rv_data=rv_data,
                                   progress=stage, sample_format=args.sample_format)
        except (ReportFolderError, NoSpaceError) as exc:
            raise UserError(str(exc)) from None
    written["result"] = result
    written["n_row_errors"] = cat.n_failed
    return written


def _check_report_options(args, start: dt.date, end: dt.date) -> None:
    """Refuse too few --samples or --sims, fewer than one worker, and --end before --start."""
    if args.samples < MIN_SAMPLES:
        raise UserError(f"--samples must be at least {MIN_SAMPLES}, got {args.samples}")
    if args.sims < MIN_SIMS:
        raise UserError(f"--sims must be at least {MIN_SIMS}, got {args.sims}")
    if args.workers is not None and args.workers < 1:
        raise UserError(f"--workers must be at least 1, got {args.workers}")
    if end < start:
        raise UserError(f"--end {end} is before --start {start}")


def _rv_inputs(args, site):
    """(measured RVs of --rv-data or None, RV hours per spectrograph of --hours or None)."""
    from rhofollow.io.rvdata import RVDataError, read_rv_data
    from rhofollow.pipeline import PipelineError

    rv_data = None
    if args.rv_data:
        try:
            rv_data = read_rv_data(args.rv_data)
        except RVDataError as exc:
            raise UserError(str(exc)) from None
    hours = None
    if getattr(args, "hours", None):
        from rhofollow.cli.options import parse_hours
        from rhofollow.pipeline import instruments

        try:
            spec, _phot = instruments(site)
        except PipelineError as exc:
            raise UserError(str(exc)) from None
        hours = parse_hours(args.hours, [spec.name] if spec is not None else [])
    return rv_data, hours
