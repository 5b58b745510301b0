"""``rhofollow night``: tonight's (or a given night's) follow-up plan at the observer's site."""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from rhofollow.cli.common import (UserError, add_json_option, add_plan_options, console, load_catalogue,
                     report_row_issues, stage_progress, write_json)
from rhofollow.cli.render import Col, FittedTable, fit_table, message, say, table_note

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
    p.add_argument("--plot", metavar="PNG", help="write an altitude chart with the chosen blocks")
    add_json_option(p)
    add_plan_options(p)
    p.set_defaults(func=run)


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


def load_site_arg(path):
    """The site file named by ``--site`` (a :class:`UserError` naming file and key if invalid)."""
    from rhofollow.planning.site import ConfigError, load_site

    try:
        return load_site(path)
    except (ConfigError, OSError) as exc:
        raise UserError(str(exc)) from None


def prepare(args, site, start_iso: str, end_iso: str) -> Prepared:
    """Read the catalogue, run assess -> eclipses -> rv for [start_iso, end_iso] (UTC) at ``site``
    (through :func:`rhofollow.pipeline.run_stages`, with the ledger when ``--ledger`` is given)."""
    from rhofollow.pipeline import PipelineError, PipelineOptions, run_stages
    from rhofollow.planning.visibility import VisibilityEngine

    if args.samples < 200:
        raise UserError(f"--samples must be at least 200, got {args.samples}")
    cat = load_catalogue(args.catalog, require_coords=True)
    report_row_issues(cat)
    if not cat.targets:
        return Prepared(site, VisibilityEngine(site), [], [], 0.0, None, {}, [], None, cat)
    opts = PipelineOptions(samples=args.samples, seed=args.seed, ecc_prior=args.ecc_prior,
                           transit_weight=not args.no_transit_weight, workers=args.workers,
                           ledger=args.ledger)
    try:
        with stage_progress() as stage:
            st = run_stages(cat.targets, site, start_iso, end_iso, opts, progress=stage)
    except PipelineError as exc:
        raise UserError(str(exc)) from None
    return Prepared(site, VisibilityEngine(site), st.science, st.skipped, st.overhead_h, st.model,
                    st.instruments, st.notices, st, cat)


def nothing_to_plan(command: str, args, prep: Prepared, payload: dict) -> int:
    """Every catalogue row failed validation: say so, write the envelope (row errors only), exit 1."""
    from rhofollow.stages.records import envelope

    message(f"{args.catalog}: no valid target rows to plan", "error")
    doc = envelope(command, catalogue=prep.catalogue, seed=args.seed,
                   payload=dict(payload, site=prep.site.name, samples=args.samples))
    if args.json:
        write_json(args.json, doc)
    return doc["exit_status"]


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

    if args.samples < 200:
        raise UserError(f"--samples must be at least 200, got {args.samples}")
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
    for n in prep.notices:
        message(n, "notice")
    for s in doc["skipped"]:
        message(f"{s['name']}: {s['reason']}", "skipped")
    for t in doc["targets"]:
        for msg in t["errors"]:
            message(f"{t['name']}: {msg}", "error")
    for name, msg in prep.stages.unreachable.items():
        message(f"{name}: {msg}", "warning")
    if args.json:
        write_json(args.json, doc)
        message(f"wrote {args.json}")
    if args.plot:
        from rhofollow.report.schedule_chart import plot_night

        plot_night(args.plot, eng, night, prep.science, doc)
        message(f"wrote {args.plot}")
    return doc["exit_status"]
