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
    """Add the ``plan`` command to ``subparsers``.

    Parameters
    ----------
    subparsers : the action of :meth:`argparse.ArgumentParser.add_subparsers`

    Returns
    -------
    None
    """
    p = subparsers.add_parser(
        "plan", help="the whole chain into a report folder (summary, tables, calendar, plots, samples)",
        description="Assess the catalogue, predict occultations and RV needs, plan the first night and the "
        "whole date range at the site, and write a report folder. Without a catalogue, run the bundled "
        "demo scenario (invented survey and site) over the coming months.")
    add_report_options(p)
    p.add_argument("--table", choices=["md", "latex", "csv"],
                   help="also print the RV request per target (hours, visits, exposure, phases, months, density "
                   "mismatch, P(e > 0.1), power, total with overheads) in this format and write it into the "
                   "report folder as proposal_table.md / .tex / .csv")
    p.set_defaults(func=run)


def _date(s: str, opt: str) -> dt.date:
    try:
        return dt.date.fromisoformat(s)
    except ValueError:
        raise UserError(f"{opt} must be YYYY-MM-DD, got {s!r}") from None


def _proposal_table(doc: dict, out: Path, fmt: str) -> None:
    """Print the proposal table of the results document and write it into the report folder."""
    from rhofollow.cli.common import console
    from rhofollow.io.atomic import atomic_write_text
    from rhofollow.report.proposal import proposal_document, proposal_table, table_file_name

    text = proposal_table(proposal_document(doc), fmt)
    console().print(text, end="", highlight=False, markup=False, soft_wrap=True)
    path = out / table_file_name(fmt)
    atomic_write_text(path, text)
    message(f"wrote {path}")


def run(args) -> int:
    """Run ``plan`` with the parsed options ``args``.

    Parameters
    ----------
    args : :class:`argparse.Namespace` of the command's options

    Returns
    -------
    int
        Exit status (0 all went well, 1 some targets failed, 2 bad input).
    """
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
        if getattr(args, "table", None):
            _proposal_table(written["doc"], out, args.table)
    status = written["doc"]["exit_status"]
    if status == 0 and written["result"] is not None and written["result"].stages.failures:
        status = 1  # a target's stage failed after its assessment (reported in notices)
    return status
