"""``rhofollow campaign``: every observable occultation window and the RV visits of a semester,
with the hours to request per instrument."""
from __future__ import annotations

from rhofollow.cli.common import UserError, add_json_option, add_plan_options, atomic_write_text, console, write_json
from rhofollow.cli.options import add_hours_option, load_site_arg, night_range, parse_hours
from rhofollow.cli.render import Col, FittedTable, fit_table, message, say, table_note
from rhofollow.cli.runs import nothing_to_plan, prepare
from rhofollow.cli.summaries import print_planner_messages, rv_request_lines
from rhofollow.core.defaults import MIN_PLANNING_SAMPLES

__all__ = ["register", "run"]


def register(subparsers):
    """Add the ``campaign`` command to ``subparsers``.

    Parameters
    ----------
    subparsers : the action of :meth:`argparse.ArgumentParser.add_subparsers`

    Returns
    -------
    None
    """
    p = subparsers.add_parser(
        "campaign", help="occultation windows, RV visits and hours per instrument over a date range",
        description="For each target: every occultation window observable from the site, the RV visits "
        "needed to confirm the eccentricity placed on feasible nights at informative orbital phases, "
        "and the hours per instrument including overheads (the table a proposal needs).")
    p.add_argument("catalog", metavar="CATALOG", help="target catalogue (CSV, ECSV or VOTable)")
    p.add_argument("--site", metavar="FILE", required=True, help="site file (TOML)")
    p.add_argument("--start", metavar="YYYY-MM-DD", required=True, help="local date of the first evening")
    p.add_argument("--end", metavar="YYYY-MM-DD", required=True, help="local date of the last evening")
    p.add_argument("--ics", metavar="PATH", help="write the windows and visits as an iCalendar file")
    p.add_argument("--table", choices=["md", "latex", "csv"],
                   help="print, instead of the terminal table, the RV request per target (hours, visits, "
                   "exposure, phases, months, density mismatch, P(e > 0.1), power, total with overheads) "
                   "and then the hours per instrument (occultation windows included), in this format")
    add_hours_option(p)
    add_json_option(p)
    add_plan_options(p)
    p.set_defaults(func=run)


def campaign_table(doc: dict, plan, site_name: str, start, end, n_nights: int, width: int = 80) -> FittedTable:
    """Per target: windows, RV visits and hours per instrument, with the columns that fit ``width``.

    Parameters
    ----------
    doc : dict, :meth:`rhofollow.planning.campaign.CampaignPlan.to_dict` (``targets``, ``hours_total``)
    plan : :class:`rhofollow.planning.campaign.CampaignPlan`, gives the instruments (column order)
    site_name : str, site name for the title
    start, end : datetime.date, local dates of the first and last evening
    n_nights : int, nights with dark time in the range
    width : int, terminal width, characters

    Returns
    -------
    FittedTable, the table (RV exposure in seconds, hours per instrument in hours, with overheads)
    """
    insts = list(dict.fromkeys(plan.instruments.values()))
    cols = ([Col("target", justify="left"), Col("occ.\nwindows"), Col("RV visits\nplaced"),
             Col("RV visits\nneeded"), Col("RV exp.\ns", drop=2, what="RV exposure")]
            + [Col(f"{i}\nhours") for i in insts] + [Col("clashes", drop=1)])
    rows, styles = [], []
    for t in doc["targets"]:
        clash = sum(x["clash"] for x in t["occultation_windows"] + t["rv_visits"])
        need = t.get("rv_visits_needed")
        req = t.get("rv_request")
        if req is not None and not req.get("requested"):
            need_s = "not requested"
        else:
            need_s = str(need) if need is not None else "no RV route"
        ex = next((v.get("exposure_s") for v in t["rv_visits"] if v.get("exposure_s")), None)
        rows.append([t["name"], str(len(t["occultation_windows"])), str(len(t["rv_visits"])), need_s,
                     f"{ex:.0f}" if ex else "",
                     *[f"{t['hours'].get(i, 0.0):.2f}" for i in insts], str(clash) if clash else ""])
        styles.append(None)
    rows.append(["total", str(sum(len(t["occultation_windows"]) for t in doc["targets"])),
                 str(sum(len(t["rv_visits"]) for t in doc["targets"])), "", "",
                 *[f"{doc['hours_total'].get(i, 0.0):.2f}" for i in insts], ""])
    styles.append("bold")
    return fit_table(f"{site_name}: campaign {start} to {end} ({n_nights} nights with dark time)", cols, rows,
                     width, row_styles=styles)


def run(args) -> int:
    """Run ``campaign``: print the table, write JSON and iCalendar (UserError on bad input).

    Parameters
    ----------
    args : :class:`argparse.Namespace` of the command's options

    Returns
    -------
    int, exit status (0 all went well, 1 some targets failed)
    """
    from rhofollow.cli.common import count_progress

    from rhofollow.planning.campaign import hours_table, plan_campaign, range_nights, to_ical
    from rhofollow.planning.night import CAUTION
    from rhofollow.planning.tasks import jd_to_iso
    from rhofollow.planning.visibility import VisibilityEngine

    start, end = night_range(args.start, args.end)
    if args.samples < MIN_PLANNING_SAMPLES:
        raise UserError(f"--samples must be at least {MIN_PLANNING_SAMPLES}, got {args.samples}")
    site = load_site_arg(args.site)
    eng = VisibilityEngine(site)
    grids = [g for g in eng.nights(start, end) if g.kind != "no_night"]
    if not grids:
        raise UserError(f"no dark time at {site.name} between {start} and {end}")
    prep = prepare(args, site, jd_to_iso(grids[0].start_jd - 0.5), jd_to_iso(grids[-1].end_jd + 0.5))
    if prep.stages is None:
        return nothing_to_plan("campaign", args, prep, {"start": str(start), "end": str(end),
                                                        "timezone": site.timezone, "hours_total": {}})
    with count_progress(len(grids), "visibility") as prog:
        task = prog.add_task("visibility", total=len(grids))
        nights = range_nights(eng, grids, prep.science, lambda: prog.advance(task))
    from rhofollow.cli.common import stage_progress
    from rhofollow.pipeline import PipelineOptions, instruments, rv_request

    spec, _phot = instruments(site)   # read without error by prepare already
    hours = parse_hours(args.hours, [spec.name] if spec is not None else [])
    with stage_progress() as stage:
        req = rv_request(prep.stages, nights, site, PipelineOptions(seed=args.seed, rv_hours=hours, ledger=args.ledger), stage)
    plan = plan_campaign(prep.science, nights, site=site.name, overhead_h=prep.overhead_h,
                         instruments=prep.instruments, model=prep.model, rv_request=req)
    from rhofollow.pipeline import campaign_document

    full = campaign_document(plan, prep.stages, site, start, end, args.seed, args.samples, prep.catalogue)
    from rhofollow.report.proposal import campaign_proposal, proposal_table

    full["proposal"] = campaign_proposal(full, prep.stages.assessments, prep.science, PipelineOptions().fap)
    # the terminal table lists the planned targets (failed ones are reported below it)
    doc = plan.to_dict()

    con = console()
    if args.table:
        # the RV request, then the hours per instrument (occultation windows included); the caution
        # goes to stderr so that stdout is the tables alone, ready to paste
        text = proposal_table(full["proposal"], args.table) + "\n" + hours_table(plan, args.table)
        con.print(text, end="", highlight=False, markup=False, soft_wrap=True)
        message(CAUTION, "caution")
    else:
        fitted = campaign_table(doc, plan, site.name, start, end, len(nights), con.width)
        con.print(fitted.table)
        table_note(fitted)
        say(f"Hours: an RV visit is its exposure plus the spectrograph's overhead (pointing, acquisition, "
            f"read-out), counted once; an occultation block adds {prep.overhead_h * 60:.0f} min slew + setup. "
            "'no RV route': RVs cannot confirm the eccentricity in this range; clashes: "
            "items that cannot share their night with more valuable ones (details in --json).")
        for line in rv_request_lines(req):
            say(line)
        message(CAUTION, "caution", to_stdout=True)
    print_planner_messages(prep.notices, full, prep.stages.unreachable)
    if args.json:
        write_json(args.json, full)
        message(f"wrote {args.json}")
    if args.ics:
        atomic_write_text(args.ics, to_ical(plan).decode("utf-8"))
        message(f"wrote {args.ics}")
    return full["exit_status"]
