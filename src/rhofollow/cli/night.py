"""``rhofollow night``: tonight's (or a given night's) follow-up plan at the observer's site."""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from .common import UserError, add_json_option, add_seed_option, console, err_console, write_json

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
    p.add_argument("--samples", type=int, default=20000,
                   help="posterior samples per target in the assessment (default 20000)")
    add_json_option(p)
    add_seed_option(p)
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


def load_site_arg(path):
    """The site file named by ``--site`` (a :class:`UserError` naming file and key if invalid)."""
    from ..planning.site import ConfigError, load_site

    try:
        return load_site(path)
    except (ConfigError, OSError) as exc:
        raise UserError(str(exc)) from None


def prepare(args, site, start_iso: str, end_iso: str) -> Prepared:
    """Read the catalogue, run assess -> eclipses -> rv for [start_iso, end_iso] (UTC) at ``site``."""
    import warnings

    from rich.progress import Progress

    from ..assess import assess_catalogue
    from ..eclipses import EclipseOptions, predict_occultations
    from ..io.catalogue import read_catalogue
    from ..io.instruments import InstrumentError, Photometer, Spectrograph, read_instruments
    from ..planning.night import science_from_records
    from ..planning.tasks import ValueModel
    from ..planning.visibility import VisibilityEngine
    from ..rvplan import plan_rv

    if args.samples < 200:
        raise UserError(f"--samples must be at least 200, got {args.samples}")
    try:
        insts = read_instruments(site.instruments) if site.instruments else {}
    except InstrumentError as exc:
        raise UserError(str(exc)) from None
    spec = next((i for i in insts.values() if isinstance(i, Spectrograph)), None)
    phot = next((i for i in insts.values() if isinstance(i, Photometer)), None)
    if not Path(args.catalog).exists():
        raise UserError(f"{args.catalog}: catalogue file not found")
    try:
        cat = read_catalogue(args.catalog, require_coords=True)
    except Exception as exc:  # the reader's own error type carries a one-sentence message
        if type(exc).__name__ == "CatalogueError":
            raise UserError(str(exc)) from None
        raise
    ec = err_console()
    for issue in cat.issues:
        ec.print(f"[yellow]{issue.severity}:[/] {issue}", highlight=False)
    if not cat.targets:
        raise UserError(f"{args.catalog}: no valid target rows to plan")
    notices = []
    with Progress(console=ec, transient=True) as prog:
        t1 = prog.add_task("assessing", total=len(cat.targets))
        assessments = assess_catalogue(cat.targets, n_samples=args.samples, seed=args.seed,
                                       progress=lambda: prog.advance(t1))
        opts = EclipseOptions(location=site.location, baseline_h=phot.baseline_h if phot else None)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            occ = predict_occultations(assessments, start_iso, end_iso, opts)
        notices += occ.get("notices", []) + sorted({str(w.message) for w in caught})
        rv = []
        if spec is not None:
            t2 = prog.add_task("RV planning", total=len(assessments))
            rv = plan_rv(assessments, spec, seed=args.seed, progress=lambda: prog.advance(t2))
        else:
            notices.append("the site lists no spectrograph: no RV visits planned")
    science, skipped = science_from_records(assessments, occ["targets"], rv)
    model = ValueModel(baseline_h=0.0, lead_h=(phot.overhead_min / 60.0) if phot else 0.0,
                       partial_baseline_h=phot.baseline_h if phot else 1.0)
    names = {"occultation": phot.name if phot else "photometer", "rv": spec.name if spec else "spectrograph"}
    return Prepared(site, VisibilityEngine(site), science, skipped,
                    (site.slew_minutes + site.setup_minutes) / 60.0, model, names, notices)


def _local(engine, jd: float) -> str:
    return engine.local_time(jd).strftime("%H:%M")


def _utc(iso: str) -> str:
    return iso[11:16]


def run(args) -> int:
    import datetime as dt

    from rich.table import Table

    from ..planning.night import CAUTION, night_visibility, plan_night
    from ..planning.tasks import jd_to_iso

    if args.date:
        try:
            date = dt.date.fromisoformat(args.date)
        except ValueError:
            raise UserError(f"--date must be YYYY-MM-DD, got {args.date!r}") from None
    else:
        date = None
    from ..planning.visibility import VisibilityEngine

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
    prep.engine = eng
    vis = night_visibility(eng, night, prep.science)
    plan = plan_night(prep.science, vis, site=site.name, night_start_jd=night.start_jd,
                      night_end_jd=night.end_jd, overhead_h=prep.overhead_h, model=prep.model)
    plan.skipped = prep.skipped + plan.skipped
    doc = plan.to_dict()
    doc.update({"date": str(date), "timezone": site.timezone, "instruments": prep.instruments,
                "notices": prep.notices, "seed": args.seed, "samples": args.samples})

    con = console()
    tz = eng.local_time(night.start_jd).tzname()
    tab = Table(title=f"{site.name}: night of {date} "
                f"({_local(eng, night.start_jd)}-{_local(eng, night.end_jd)} {tz}, "
                f"{_utc(jd_to_iso(night.start_jd))}-{_utc(jd_to_iso(night.end_jd))} UTC, "
                f"{site.constraints.twilight} twilight)")
    for col in (f"local ({tz})", "UTC", "target", "what", "value", "airmass"):
        tab.add_column(col, justify="left" if col in ("target", "what") else "right", no_wrap=True)
    for b in doc["blocks"]:
        if b["kind"] == "occultation":
            what = f"occultation E{b['epoch']} · {prep.instruments['occultation']}"
            if b.get("partial"):
                what += f" (part, {100 * b['p_catch']:.0f}% catch)"
        else:
            what = f"RV phase {b.get('phase', 0):.2f} · {prep.instruments['rv']}"
        tab.add_row(f"{_local(eng, b['start_jd'])}-{_local(eng, b['end_jd'])}",
                    f"{_utc(b['start_utc'])}-{_utc(b['end_utc'])}", b["name"], what, f"{b['value']:.3f}",
                    f"≤ {b['airmass_max']:.2f}")
    if doc["blocks"]:
        con.print(tab)
    else:
        con.print(f"No block can be scheduled at {site.name} on the night of {date}.", highlight=False)
    con.print(f"Total value {doc['total_value']:.3f} ({doc['method']}, {doc['solver_status']}); "
              f"{prep.overhead_h * 60:.0f} min slew + setup between blocks. {CAUTION}", highlight=False)
    ec = err_console()
    for n in prep.notices:
        ec.print(f"[yellow]notice:[/] {n}", highlight=False)
    for s in doc["skipped"]:
        ec.print(f"[dim]skipped:[/] {s['name']}: {s['reason']}", highlight=False)
    if args.json:
        write_json(args.json, {k: v for k, v in doc.items()})
        ec.print(f"wrote {args.json}", highlight=False)
    if args.plot:
        from ..planning.altitude_plot import plot_night

        plot_night(args.plot, eng, night, prep.science, doc)
        ec.print(f"wrote {args.plot}", highlight=False)
    return 0
