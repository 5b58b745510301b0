"""``rhofollow night``: tonight's (or a given night's) follow-up plan at the observer's site."""
from __future__ import annotations

from rhofollow.cli.common import UserError, add_json_option, add_plan_options, console, write_json
from rhofollow.cli.options import load_site_arg
from rhofollow.cli.render import Col, FittedTable, fit_table, message, say, table_note
from rhofollow.cli.runs import Prepared, nothing_to_plan, prepare  # noqa: F401  (also importable from here)
from rhofollow.cli.summaries import print_planner_messages
from rhofollow.core.defaults import MIN_PLANNING_SAMPLES

__all__ = ["register", "run", "prepare", "Prepared", "load_site_arg"]


def register(subparsers):
    p = subparsers.add_parser(
        "night", help="the night's plan: occultation windows and RV visits chosen exactly",
        description="Assess the catalogue, predict the occultations and the RV needs, and choose the "
        "night's blocks (occultation windows fixed in time, RV visits placed at informative orbital "
        "phases) without overlaps, with slew and setup overheads, by an exact method.")
    p.add_argument("catalog", metavar="CATALOG", help="target catalogue (CSV, ECSV or VOTable)")
    p.add_argument("--site", metavar="FILE", required=True, help="site file (TOML)")
    p.add_argument("--date", metavar="YYYY-MM-DD",
                   help="local date of the evening (default: the coming night at the site)")
    p.add_argument("--plot", metavar="PNG", help="write the night's schedule chart (blocks on a timeline, altitudes beneath)")
    add_json_option(p)
    add_plan_options(p)
    p.set_defaults(func=run)


def _local(engine, jd: float) -> str:
    return engine.local_time(jd).strftime("%H:%M")


def _utc(iso: str) -> str:
    return iso[11:16]


def night_table(doc: dict, eng, night, site, date, instruments: dict, width: int = 80) -> FittedTable:
    """The night's blocks in time order, with the columns that fit ``width``."""
    from rhofollow.planning.tasks import jd_to_iso

    tz = eng.local_time(night.start_jd).tzname()
    title = (f"{site.name}: night of {date} ({_local(eng, night.start_jd)}-{_local(eng, night.end_jd)} {tz}, "
             f"{_utc(jd_to_iso(night.start_jd))}-{_utc(jd_to_iso(night.end_jd))} UTC, "
             f"{site.constraints.twilight} twilight)")
    cols = [Col(f"local\n({tz})"), Col("UTC", drop=1, what="UTC times"), Col("target", justify="left"),
            Col("what", justify="left", compact_header="what"), Col("instrument", justify="left", drop=3),
            Col("block\nvalue"), Col("max\nairmass", drop=2, what="max airmass")]
    rows = []
    for b in doc["blocks"]:
        if b["kind"] == "occultation":
            what = f"occultation E{b['epoch']}"
            if b.get("partial"):
                what = (what + f" (part, {100 * b['p_catch']:.0f}% catch)",
                        f"occ. E{b['epoch']} part {100 * b['p_catch']:.0f}%")
            inst = instruments.get("occultation", "")
        else:
            what = f"RV at phase {b.get('phase', 0):.2f}"
            inst = instruments.get("rv", "")
        rows.append([f"{_local(eng, b['start_jd'])}-{_local(eng, b['end_jd'])}",
                     f"{_utc(b['start_utc'])}-{_utc(b['end_utc'])}", b["name"], what, inst,
                     f"{b['value']:.3f}", f"{b['airmass_max']:.2f}"])
    return fit_table(title, cols, rows, width)


def run(args) -> int:
    import datetime as dt

    from rhofollow.planning.night import CAUTION, night_visibility, plan_night
    from rhofollow.planning.tasks import jd_to_iso

    if args.date:
        try:
            date = dt.date.fromisoformat(args.date)
        except ValueError:
            raise UserError(f"--date must be YYYY-MM-DD, got {args.date!r}") from None
    else:
        date = None
    from rhofollow.planning.visibility import VisibilityEngine

    if args.samples < MIN_PLANNING_SAMPLES:
        raise UserError(f"--samples must be at least {MIN_PLANNING_SAMPLES}, got {args.samples}")
    site = load_site_arg(args.site)
    eng = VisibilityEngine(site)
    date = date or eng.coming_night_date()
    night = eng.night(date)
    if night.kind == "no_night":
        raise UserError(f"no dark time at {site.name} on the night of {date} "
                        f"({site.constraints.twilight} twilight never ends)")
    prep = prepare(args, site, jd_to_iso(night.start_jd - 0.5), jd_to_iso(night.end_jd + 0.5))
    if prep.stages is None:
        return nothing_to_plan("night", args, prep, {"date": str(date), "timezone": site.timezone,
                                                     "blocks": [], "total_value": 0.0})
    prep.engine = eng
    vis = night_visibility(eng, night, prep.science)
    plan = plan_night(prep.science, vis, site=site.name, night_start_jd=night.start_jd,
                      night_end_jd=night.end_jd, overhead_h=prep.overhead_h, model=prep.model)
    from rhofollow.pipeline import night_document

    doc = night_document(plan, prep.stages, site, date, args.seed, args.samples, prep.catalogue)

    con = console()
    if doc["blocks"]:
        fitted = night_table(doc, eng, night, site, date, prep.instruments, con.width)
        con.print(fitted.table)
        table_note(fitted)
    else:
        say(f"No block can be scheduled at {site.name} on the night of {date}.")
    say(f"Total value {doc['total_value']:.3f} ({doc['method']}, {doc['solver_status']}); "
        f"{prep.overhead_h * 60:.0f} min slew + setup between blocks.")
    message(CAUTION, "caution", to_stdout=True)
    print_planner_messages(prep.notices, doc, prep.stages.unreachable)
    if args.json:
        write_json(args.json, doc)
        message(f"wrote {args.json}")
    if args.plot:
        from rhofollow.report.schedule_chart import plot_night

        plot_night(args.plot, eng, night, prep.science, doc)
        message(f"wrote {args.plot}")
    return doc["exit_status"]
