"""``rhofollow plan``: the whole job in one command, writing a report folder.

catalogue -> assessment -> occultations -> RV -> first night's plan and campaign plan at the site ->
summary (Markdown, HTML), tables (JSON, ECSV, CSV), iCalendar, plots and posterior samples.
With no catalogue it runs the bundled demo scenario.
"""
from __future__ import annotations

import datetime as dt
from pathlib import Path

from .common import UserError, add_seed_option, console, err_console, stage_progress

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
    p.add_argument("--plot-targets", type=int, default=10, metavar="N",
                   help="per-target figures for the N highest-ranked targets (0: all; default 10)")
    add_seed_option(p)


def demo_paths() -> tuple[Path, Path]:
    """The bundled demo catalogue and site, found relative to the package source."""
    root = Path(__file__).resolve().parents[3]
    cat = root / "examples" / "hts_candidates.csv"
    site = root / "site_configs" / "alto_quemado.toml"
    for path in (cat, site):
        if not path.exists():
            raise UserError(f"the bundled demo file {path} is missing; the demo runs from a source checkout "
                            "(examples/ and site_configs/ beside src/); give a catalogue, --site, --start "
                            "and --end instead")
    return cat, site


def _date(s: str, opt: str) -> dt.date:
    try:
        return dt.date.fromisoformat(s)
    except ValueError:
        raise UserError(f"{opt} must be YYYY-MM-DD, got {s!r}") from None


def plan_to_folder(catalog, site_path, start: dt.date, end: dt.date, out, args) -> dict:
    """Run the pipeline and write the report folder; returns ``write_report``'s dict plus the result."""
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
    cat = load_catalogue(catalog, require_coords=True)
    report_row_issues(cat)
    if not cat.targets:
        raise UserError(f"{catalog}: no valid target rows to plan")
    opts = PipelineOptions(samples=args.samples, seed=args.seed, ecc_prior=args.ecc_prior,
                           transit_weight=not args.no_transit_weight, workers=args.workers,
                           dask_address=args.dask, sims=args.sims, rv_data=rv_data)
    with stage_progress(transient=False) as stage:
        try:
            result = run_pipeline(cat.targets, site, start, end, opts, progress=stage)
        except PipelineError as exc:
            raise UserError(str(exc)) from None
        try:
            written = write_report(result, out, plot_targets=args.plot_targets, rv_data=rv_data,
                                   progress=stage)
        except (ReportFolderError, NoSpaceError) as exc:
            raise UserError(str(exc)) from None
    written["result"] = result
    return written


def _print_summary(written: dict, out: Path, top: int = 8) -> None:
    from rich.table import Table

    from ..report.summary import CAUTIONS, ranked_table

    doc = written["doc"]
    _head, rows = ranked_table(doc, top)
    tab = Table(title=f"{doc['site']}, {doc['start']} to {doc['end']}: top targets")
    tab.caption = ("priority = P(eccentric explanation) × P(e>0.1) × testability; e: median; RVs: visits "
                   "to confirm e > 0; planned: occultation windows / RV visits that fit at the site")
    for col in ("#", "target", "priority", "e", "favoured", "RVs", "planned"):
        tab.add_column(col, justify="left" if col in ("target", "favoured") else "right", no_wrap=True,
                       min_width=len(col))
    for r in rows:
        tab.add_row(r[0], r[1], r[2], r[4].split(" ")[0], r[6].replace("_", " "),
                    r[9].replace("not confirmable", "n/a"), r[10].replace(" ", ""))
    con = console()
    con.print(tab)
    tot = doc.get("hours_total", {})
    if tot:
        con.print("Hours to request: " + ", ".join(f"{k} {v:.1f} h" for k, v in tot.items()), highlight=False)
    n_bad = sum(1 for t in doc["targets"] if not t.get("ok"))
    if n_bad:
        con.print(f"{n_bad} target(s) could not be assessed (see summary.md).", highlight=False)
    con.print(CAUTIONS[0], highlight=False)
    con.print(f"Report: {out / 'summary.html'} (also summary.md, results.json/.ecsv/.csv, night.json, "
              f"campaign.json, windows.ics, plots/, samples/)", highlight=False, soft_wrap=True)
    ec = err_console()
    for n in doc.get("notices", []):
        ec.print(f"[yellow]notice:[/] {n}", highlight=False)


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
        err_console().print(f"No catalogue given: running the bundled demo ({cat.name}, {Path(site).name}, "
                            f"{start} to {end}).", highlight=False)
    else:
        missing = [o for o, v in (("--site", args.site), ("--start", args.start), ("--end", args.end)) if not v]
        if missing:
            raise UserError(f"with a catalogue, give {', '.join(missing)} (or omit the catalogue for the demo)")
        cat, site = args.catalog, args.site
        start, end = _date(args.start, "--start"), _date(args.end, "--end")
    out = Path(args.out)
    written = plan_to_folder(cat, site, start, end, out, args)
    _print_summary(written, out)
    return 0
