"""``rhofollow plan``: the whole job in one command, writing a report folder.

catalogue -> assessment -> occultations -> RV -> first night's plan and campaign plan at the site ->
summary (Markdown, HTML), tables (JSON, ECSV, CSV), iCalendar, plots and posterior samples.
With no catalogue it runs the bundled demo scenario.
"""
from __future__ import annotations

import datetime as dt
from pathlib import Path

from .common import UserError, add_seed_option, console, stage_progress
from .render import Col, FittedTable, fit_table, message, say, table_note

__all__ = ["register", "run", "demo_paths", "plan_to_folder", "DEMO_DAYS"]

#: Length of the demo's date range (days from today).
DEMO_DAYS = 60


def register(subparsers):
    p = subparsers.add_parser(
        "plan", help="the whole chain into a report folder (summary, tables, calendar, plots, samples)",
        description="Assess the catalogue, predict occultations and RV needs, plan the first night and the "
        "whole date range at the site, and write a report folder. Without a catalogue, run the bundled "
        "demo scenario (invented survey and site) over the coming months.")
    add_plan_options(p)
    p.set_defaults(func=run)


def add_plan_options(p, demo: bool = False) -> None:
    """Options shared by ``plan`` and ``demo``."""
    from ..assess import DEFAULT_N_SAMPLES
    from ..physics.priors import DEFAULT_PRIOR

    if not demo:
        p.add_argument("catalog", metavar="CATALOG", nargs="?",
                       help="target catalogue (CSV, ECSV or VOTable); omit for the bundled demo")
        p.add_argument("--site", metavar="FILE", help="site file (TOML); required with a catalogue")
        p.add_argument("--start", metavar="YYYY-MM-DD", help="local date of the first evening")
        p.add_argument("--end", metavar="YYYY-MM-DD", help="local date of the last evening")
    p.add_argument("--out", metavar="DIR", default="rhofollow-report" if demo else None,
                   required=not demo, help="report folder (created, or an earlier report folder replaced as a whole)"
                   + (" (default ./rhofollow-report)" if demo else ""))
    p.add_argument("--samples", type=int, default=8000 if demo else DEFAULT_N_SAMPLES, metavar="N",
                   help=f"posterior samples per target (default {8000 if demo else DEFAULT_N_SAMPLES})")
    p.add_argument("--ecc-prior", default=DEFAULT_PRIOR, metavar="NAME[:PARAMS]",
                   help=f"eccentricity prior (default {DEFAULT_PRIOR}; see `rhofollow assess --help`)")
    p.add_argument("--no-transit-weight", action="store_true",
                   help="do not weight the prior by the transit probability")
    p.add_argument("--workers", type=int, default=1, metavar="N",
                   help="processes for the per-target work (results identical to 1 worker)")
    p.add_argument("--dask", metavar="ADDRESS",
                   help="send the per-target work to this dask.distributed scheduler (e.g. tcp://host:8786)")
    p.add_argument("--rv-data", metavar="PATH",
                   help="measured RVs: a folder of <target>.csv / .ecsv files, or one file with a 'target' column")
    p.add_argument("--sims", type=int, default=500 if demo else 2000, metavar="N",
                   help=f"simulated null data sets per RV test (default {500 if demo else 2000})")
    from .campaign import add_hours_option

    add_hours_option(p)
    p.add_argument("--plot-targets", type=int, default=10, metavar="N",
                   help="per-target figures for the N highest-ranked targets (0: all; default 10)")
    add_seed_option(p)


def demo_paths() -> tuple[Path, Path]:
    """The bundled demo catalogue and site: package data (:mod:`rhofollow.demo_data`), so the demo
    runs from a wheel as from a source checkout."""
    from ..demo_data import demo_file

    try:
        return (demo_file("examples/hts_candidates.csv"), demo_file("site_configs/alto_quemado.toml"))
    except FileNotFoundError as exc:
        raise UserError(f"{exc}; reinstall rhofollow, or give a catalogue, --site, --start and --end "
                        "instead") from None


def _date(s: str, opt: str) -> dt.date:
    try:
        return dt.date.fromisoformat(s)
    except ValueError:
        raise UserError(f"{opt} must be YYYY-MM-DD, got {s!r}") from None


def plan_to_folder(catalog, site_path, start: dt.date, end: dt.date, out, args, command: str = "plan") -> dict:
    """Run the pipeline and write the report folder; returns ``write_report``'s dict plus the result.

    A catalogue without a valid row writes no folder: the dict then has ``doc`` (the envelope with the
    row errors) and no ``files``."""
    from ..io.rvdata import RVDataError, read_rv_data
    from ..pipeline import PipelineError, PipelineOptions, run_pipeline
    from ..io.atomic import NoSpaceError
    from ..report.folder import ReportFolderError, check_report_folder, write_report
    from .common import load_catalogue, report_row_issues
    from .night import load_site_arg

    try:
        check_report_folder(out)
    except ReportFolderError as exc:
        raise UserError(str(exc)) from None

    if args.samples < 500:
        raise UserError(f"--samples must be at least 500, got {args.samples}")
    if args.sims < 100:
        raise UserError(f"--sims must be at least 100, got {args.sims}")
    if args.workers < 1:
        raise UserError(f"--workers must be at least 1, got {args.workers}")
    if end < start:
        raise UserError(f"--end {end} is before --start {start}")
    site = load_site_arg(site_path)
    rv_data = None
    if args.rv_data:
        try:
            rv_data = read_rv_data(args.rv_data)
        except RVDataError as exc:
            raise UserError(str(exc)) from None
    hours = None
    if getattr(args, "hours", None):
        from ..pipeline import _instruments
        from .campaign import parse_hours

        try:
            spec, _phot = _instruments(site)
        except PipelineError as exc:
            raise UserError(str(exc)) from None
        hours = parse_hours(args.hours, [spec.name] if spec is not None else [])
    cat = load_catalogue(catalog, require_coords=True)
    report_row_issues(cat)
    if not cat.targets:
        from ..records import envelope

        message(f"{catalog}: no valid target rows to plan; no report written", "error")
        return {"doc": envelope(command, catalogue=cat, seed=args.seed), "files": [], "result": None}
    opts = PipelineOptions(samples=args.samples, seed=args.seed, ecc_prior=args.ecc_prior,
                           transit_weight=not args.no_transit_weight, workers=args.workers,
                           dask_address=args.dask, sims=args.sims, rv_data=rv_data, rv_hours=hours)
    with stage_progress(transient=False) as stage:
        try:
            result = run_pipeline(cat.targets, site, start, end, opts, progress=stage, catalogue=cat)
        except PipelineError as exc:
            raise UserError(str(exc)) from None
        result.command = command
        try:
            written = write_report(result, out, plot_targets=args.plot_targets, rv_data=rv_data,
                                   progress=stage)
        except (ReportFolderError, NoSpaceError) as exc:
            raise UserError(str(exc)) from None
    written["result"] = result
    written["n_row_errors"] = cat.n_failed
    return written


def _priority_digits(values: list[float], lo: int = 3, hi: int = 6) -> int:
    """Fewest decimals (``lo``..``hi``) at which priorities that differ also print differently, so the
    printed column shows the order the ranking uses (equal printed values are true ties)."""
    distinct = sorted(set(values))
    for nd in range(lo, hi + 1):
        if len({f"{v:.{nd}f}" for v in distinct}) == len(distinct):
            return nd
    return hi


def summary_table(doc: dict, width: int = 80, top: int | None = 8) -> FittedTable:
    """The ranked targets of a plan run (rank order), with the columns that fit ``width``.

    The rank follows the priority; equal priorities are ordered by the density mismatch, shown in
    the column named as the tie-breaker.
    """
    from ..report.summary import ranked_table

    _head, _rows = ranked_table(doc)  # the same targets, in the same order, as summary.md
    by_name = {t["name"]: t for t in doc["targets"]}
    cols = [Col("rank"), Col("target", justify="left"), Col("priority"),
            Col("tie-break:\nmismatch σ", what="mismatch (tie-break)"),
            Col("P(e>0.1)", drop=4), Col("e\nmedian", what="e median", drop=3),
            Col("favoured", justify="left", drop=2), Col("occ.\nwindows"), Col("RV visits\nplaced"),
            Col("RV visits\nto confirm", drop=5, what="RV visits to confirm")]
    shown_t = [by_name[r[1]] for r in (_rows[:top] if top else _rows)]
    nd = _priority_digits([float(t.get("priority") or 0.0) for t in shown_t])
    rows = []
    for t in shown_t:
        rv, c = t.get("rv") or {}, t.get("campaign") or {}
        n = rv.get("n_epochs_confirm_ecc")
        sig = t.get("density_ratio_sigma")
        e = (t.get("ecc") or {}).get("q50")
        rows.append([str(t["rank"]), t["name"] + (" ?" if t.get("reliable") is False else ""), f"{float(t.get('priority') or 0.0):.{nd}f}",
                     "—" if sig is None else f"{sig:.1f}σ",
                     "—" if t.get("p_ecc_gt_0p1") is None else f"{t['p_ecc_gt_0p1']:.2f}",
                     "—" if e is None else f"{e:.2f}", str(t.get("favoured", "—")).replace("_", " "),
                     str(len(c.get("occultation_windows", []))), str(len(c.get("rv_visits", []))),
                     str(n) if n else ("not possible" if rv else "—")])
    shown = f"top {len(rows)} of {len(_rows)}" if top and len(_rows) > len(rows) else f"{len(rows)}"
    return fit_table(f"{doc['site']}, {doc['start']} to {doc['end']}: {shown} targets by priority", cols, rows,
                     width)


def _print_summary(written: dict, out: Path, top: int = 8) -> None:
    from ..report.summary import CAUTIONS

    doc = written["doc"]
    con = console()
    fitted = summary_table(doc, con.width, top)
    con.print(fitted.table)
    table_note(fitted, "a wider terminal, summary.md or results.csv")
    say("priority = P(eccentric explanation) × W × testability, W = B/(1+B) of the posterior-to-prior odds "
        "of e > 0.1; equal priorities rank by the larger "
        "density mismatch; occ. windows and RV visits placed: what fits at the site in the date range; "
        "?: unreliable quantiles (low effective sample size), ranked after the reliable targets.",
        style="dim")
    tot = doc.get("hours_total", {})
    if tot:
        say("Hours to request: " + ", ".join(f"{k} {v:.1f} h" for k, v in tot.items()))
    from .campaign import rv_request_lines

    for line in rv_request_lines(doc.get("rv_request")):
        say(line)
    n_bad = sum(1 for t in doc["targets"] if not t.get("ok"))
    if n_bad:
        say(f"{n_bad} target(s) could not be assessed (see summary.md).")
    message(CAUTIONS[0], "caution", to_stdout=True)
    say(f"Report: {out / 'summary.html'} (also summary.md, results.json/.ecsv/.csv, night.json, "
        f"campaign.json, windows.ics, plots/, samples/)")
    for n in doc.get("notices", []):
        message(n, "notice")


def site_evening_date(site_path) -> dt.date:
    """The local date of the evening in progress or coming at the site (before local noon: the
    evening that began yesterday), from the site file's IANA time zone; today's UTC date if unreadable."""
    from ..planning.site import ConfigError, load_site

    try:
        tz = load_site(site_path, check_files=False).tzinfo
    except (ConfigError, OSError):
        return dt.datetime.now(dt.timezone.utc).date()
    now = dt.datetime.now(tz)
    return now.date() - dt.timedelta(days=1) if now.hour < 12 else now.date()


def run(args) -> int:
    if args.catalog is None:
        cat, site = demo_paths()
        site = args.site or site
        start = _date(args.start, "--start") if args.start else site_evening_date(site)
        end = _date(args.end, "--end") if args.end else start + dt.timedelta(days=DEMO_DAYS)
        message(f"No catalogue given: running the bundled demo ({cat.name}, {Path(site).name}, "
                f"{start} to {end}).")
    else:
        missing = [o for o, v in (("--site", args.site), ("--start", args.start), ("--end", args.end)) if not v]
        if missing:
            raise UserError(f"with a catalogue, give {', '.join(missing)} (or omit the catalogue for the demo)")
        cat, site = args.catalog, args.site
        start, end = _date(args.start, "--start"), _date(args.end, "--end")
    out = Path(args.out)
    written = plan_to_folder(cat, site, start, end, out, args)
    if written["result"] is not None:
        _print_summary(written, out)
    status = written["doc"]["exit_status"]
    if status == 0 and written["result"] is not None and written["result"].stages.failures:
        status = 1  # a target's stage failed after its assessment (reported in notices)
    return status
