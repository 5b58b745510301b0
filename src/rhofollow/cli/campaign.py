"""``rhofollow campaign``: every observable occultation window and the RV visits of a semester,
with the hours to request per instrument."""
from __future__ import annotations

from .common import UserError, add_json_option, add_plan_options, atomic_write_text, console, write_json
from .render import Col, FittedTable, fit_table, message, say, table_note

__all__ = ["register", "run"]

#: Longest campaign accepted (nights): one visibility grid per night is kept in memory.
MAX_NIGHTS = 400


def register(subparsers):
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
                   help="print the hours table in this format instead of the terminal table")
    add_hours_option(p)
    add_json_option(p)
    add_plan_options(p)
    p.set_defaults(func=run)


def add_hours_option(p) -> None:
    """``--hours INSTRUMENT=H`` (repeatable): RV budgets per spectrograph."""
    from ..planning.budget import MIN_GAIN_PER_HOUR

    p.add_argument("--hours", metavar="INSTRUMENT=H", action="append",
                   help="RV hours available on a spectrograph of the site (repeat for several): the visits "
                   "are shared out to maximise the expected number of confirmed eccentric orbits. Without "
                   f"it, targets are requested when they give at least {MIN_GAIN_PER_HOUR:g} expected "
                   "confirmations per hour")


def parse_hours(values, spectrographs) -> dict | None:
    """``["AQ-VEL=40", ...]`` -> ``{"AQ-VEL": 40.0}``; a :class:`UserError` naming the bad value."""
    import math

    if not values:
        return None
    names = list(spectrographs)
    out: dict[str, float] = {}
    for v in values:
        name, sep, h = str(v).partition("=")
        name = name.strip()
        if not sep or not name:
            raise UserError(f"--hours {v!r}: write INSTRUMENT=HOURS, e.g. --hours {names[0] if names else 'RV'}=40")
        try:
            hours = float(h)
        except ValueError:
            raise UserError(f"--hours {v!r}: {h!r} is not a number of hours") from None
        if not math.isfinite(hours) or hours <= 0:
            raise UserError(f"--hours {v!r}: the hours must be a positive number")
        if name not in names:
            known = ", ".join(names) if names else "none"
            raise UserError(f"--hours {v!r}: {name!r} is not a spectrograph of the site (spectrographs: {known})")
        if name in out:
            raise UserError(f"--hours {v!r}: {name} given twice")
        out[name] = hours
    return out


def rv_request_lines(req: dict | None) -> list[str]:
    """Plain sentences on the RV request (budget or threshold) for the terminal."""
    if not req:
        return []
    hrs = ", ".join(f"{k} {v:.1f} h" for k, v in req["hours_requested"].items()) or "none"
    if req["basis"] == "budget":
        bud = ", ".join(f"{k} {v:g} h" for k, v in req["budgets_h"].items())
        head = (f"RV budget {bud}: {len(req['requested'])} target(s) funded, {hrs}, "
                f"{req['expected_confirmations']:.2f} expected confirmed eccentric orbits")
    else:
        head = (f"RV request (targets giving >= {req['min_gain_per_hour']:g} expected confirmations per hour): "
                f"{len(req['requested'])} target(s), {hrs}, {req['expected_confirmations']:.2f} expected "
                "confirmed eccentric orbits")
    lines = [head + f"; {100 * req['loss_fraction']:.0f} % of visits assumed lost to weather and technical time."]
    for t in req["not_requested"]:
        lines.append(f"{t['name']}: not requested ({t['reason']})")
    return lines


def _date(s: str, opt: str):
    import datetime as dt

    try:
        return dt.date.fromisoformat(s)
    except ValueError:
        raise UserError(f"{opt} must be YYYY-MM-DD, got {s!r}") from None


def campaign_table(doc: dict, plan, site_name: str, start, end, n_nights: int, width: int = 80) -> FittedTable:
    """Per target: windows, RV visits and hours per instrument, with the columns that fit ``width``."""
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
    from .common import count_progress

    from ..planning.campaign import NightVis, hours_table, plan_campaign, to_ical
    from ..planning.night import CAUTION, night_visibility
    from ..planning.tasks import jd_to_iso
    from ..planning.visibility import VisibilityEngine
    from .night import load_site_arg, prepare

    start, end = _date(args.start, "--start"), _date(args.end, "--end")
    if end < start:
        raise UserError(f"--end {end} is before --start {start}")
    n_nights = (end - start).days + 1
    if n_nights > MAX_NIGHTS:
        raise UserError(f"{n_nights} nights requested; at most {MAX_NIGHTS} (split the campaign)")
    if args.samples < 200:
        raise UserError(f"--samples must be at least 200, got {args.samples}")
    site = load_site_arg(args.site)
    eng = VisibilityEngine(site)
    grids = [g for g in eng.nights(start, end) if g.kind != "no_night"]
    if not grids:
        raise UserError(f"no dark time at {site.name} between {start} and {end}")
    prep = prepare(args, site, jd_to_iso(grids[0].start_jd - 0.5), jd_to_iso(grids[-1].end_jd + 0.5))
    if prep.stages is None:
        from .night import nothing_to_plan

        return nothing_to_plan("campaign", args, prep, {"start": str(start), "end": str(end),
                                                        "timezone": site.timezone, "hours_total": {}})
    nights = []
    with count_progress(len(grids), "visibility") as prog:
        task = prog.add_task("visibility", total=len(grids))
        for g in grids:
            nights.append(NightVis(str(g.date), night_visibility(eng, g, prep.science), g.start_jd, g.end_jd))
            prog.advance(task)
    from ..pipeline import PipelineOptions, _instruments
    from ..planning.rvrequest import plan_rv_requests

    spec, _phot = _instruments(site)
    hours = parse_hours(args.hours, [spec.name] if spec is not None else [])
    req = None
    if spec is not None and any(e.get("rv") for e in prep.science):
        sims = PipelineOptions().sims
        with count_progress(len(prep.science), "RV at reachable epochs") as prog:
            task = prog.add_task("RV reachable", total=len(prep.science))
            req = plan_rv_requests(prep.stages.assessments, prep.science, nights, spec,
                                   loss_fraction=site.loss_fraction, seed=args.seed, n_null=sims,
                                   n_alt=min(400, sims), hours=hours, progress=lambda: prog.advance(task))
    plan = plan_campaign(prep.science, nights, site=site.name, overhead_h=prep.overhead_h,
                         instruments=prep.instruments, model=prep.model, rv_request=req)
    from ..pipeline import campaign_document

    full = campaign_document(plan, prep.stages, site, start, end, args.seed, args.samples, prep.catalogue)
    # the terminal table lists the planned targets (failed ones are reported below it)
    doc = plan.to_dict()

    con = console()
    if args.table:
        con.print(hours_table(plan, args.table), end="", highlight=False, markup=False, soft_wrap=True)
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
    for n in prep.notices:
        message(n, "notice")
    for s in full["skipped"]:
        message(f"{s['name']}: {s['reason']}", "skipped")
    for t in full["targets"]:
        for msg in t["errors"]:
            message(f"{t['name']}: {msg}", "error")
    for name, msg in prep.stages.unreachable.items():
        message(f"{name}: {msg}", "warning")
    if args.json:
        write_json(args.json, full)
        message(f"wrote {args.json}")
    if args.ics:
        atomic_write_text(args.ics, to_ical(plan).decode("utf-8"))
        message(f"wrote {args.ics}")
    return full["exit_status"]
