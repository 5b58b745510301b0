"""``rhofollow demo``: ``rhofollow plan`` on the bundled demo scenario into ./rhofollow-report.

The invented Heliotrope Transit Survey candidates (examples/hts_candidates.csv) at the invented Alto
Quemado Observatory (site_configs/alto_quemado.toml), over the coming two months, with settings that
keep the run short (8000 samples per target, 500 simulated RV tests). The files are read from the
package data (rhofollow/data/demo, see :mod:`rhofollow.io.demo_data`), so the demo works from a wheel.
Exit status as every command (:mod:`rhofollow.stages.records`).
"""
from __future__ import annotations

import datetime as dt
from pathlib import Path

__all__ = ["register", "run"]


def register(subparsers):
    """Add the ``demo`` command (the whole chain on the bundled demo scenario) to the command-line parser.

    Parameters
    ----------
    subparsers : argparse._SubParsersAction
        The sub-command registry of the ``rhofollow`` parser.
    """
    from rhofollow.cli.options import add_report_options

    p = subparsers.add_parser(
        "demo", help="run the whole chain on the bundled demo scenario into ./rhofollow-report",
        description="The main job on invented demo data: assess the demo catalogue, predict occultations "
        "and RV needs, plan the first night and the coming two months at the demo site, and write the "
        "report folder (summary.html first).")
    add_report_options(p, demo=True)
    p.set_defaults(func=run)


def run(args) -> int:
    """Run ``rhofollow demo``: plan the bundled demo scenario from tonight into the report folder.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed options of the command (see :func:`register`).

    Returns
    -------
    int
        The exit status (0: success; see :func:`rhofollow.stages.records.envelope` for the others).
    """
    from rhofollow.cli import options
    from rhofollow.cli.render import message
    from rhofollow.cli.runs import plan_to_folder
    from rhofollow.cli.summaries import print_plan_summary

    cat, site = options.demo_paths()
    start = options.site_evening_date(site)
    end = start + dt.timedelta(days=options.DEMO_DAYS)
    message(f"Demo: {cat.name} at {site.name}, {start} to {end} (invented data).")
    out = Path(args.out)
    written = plan_to_folder(cat, site, start, end, out, args, command="demo")
    if written["result"] is not None:
        print_plan_summary(written, out)
    return written["doc"]["exit_status"]
