"""``rhofollow plan``: the whole job in one command, writing a report folder.

catalogue -> assessment -> occultations -> RV -> first night's plan and campaign plan at the site ->
summary (Markdown, HTML), tables (JSON, ECSV, CSV), iCalendar, plots and posterior samples.
With no catalogue it runs the bundled demo scenario.
"""
from __future__ import annotations

import datetime as dt
from pathlib import Path

from rhofollow.cli import options
from rhofollow.cli.common import UserError
from rhofollow.cli.options import DEMO_DAYS, add_report_options, demo_paths, site_evening_date  # noqa: F401
from rhofollow.cli.render import message
from rhofollow.cli.runs import plan_to_folder  # noqa: F401  (also importable from here)
from rhofollow.cli.summaries import print_plan_summary, summary_table  # noqa: F401

__all__ = ["register", "run", "demo_paths", "plan_to_folder", "DEMO_DAYS", "summary_table"]


def register(subparsers):
    p = subparsers.add_parser(
        "plan", help="the whole chain into a report folder (summary, tables, calendar, plots, samples)",
        description="Assess the catalogue, predict occultations and RV needs, plan the first night and the "
        "whole date range at the site, and write a report folder. Without a catalogue, run the bundled "
        "demo scenario (invented survey and site) over the coming months.")
    add_report_options(p)
    p.set_defaults(func=run)


def _date(s: str, opt: str) -> dt.date:
    try:
        return dt.date.fromisoformat(s)
    except ValueError:
        raise UserError(f"{opt} must be YYYY-MM-DD, got {s!r}") from None


def run(args) -> int:
    if args.catalog is None:
        cat, site = demo_paths()
        site = args.site or site
        start = _date(args.start, "--start") if args.start else site_evening_date(site)
        end = _date(args.end, "--end") if args.end else start + dt.timedelta(days=options.DEMO_DAYS)
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
        print_plan_summary(written, out)
    status = written["doc"]["exit_status"]
    if status == 0 and written["result"] is not None and written["result"].stages.failures:
        status = 1  # a target's stage failed after its assessment (reported in notices)
    return status
