"""``rhofollow night``: tonight's (or a given night's) follow-up plan at the observer's site."""
from __future__ import annotations

from rhofollow.cli.common import UserError, add_json_option, add_plan_options, console, write_json
from rhofollow.cli.options import add_hours_option, load_site_arg, parse_hours
from rhofollow.cli.render import Col, FittedTable, fit_table, message, say, table_note
from rhofollow.cli.runs import Prepared, nothing_to_plan, prepare  # noqa: F401  (also importable from here)
from rhofollow.cli.summaries import print_planner_messages, rv_request_lines
from rhofollow.core.defaults import MIN_PLANNING_SAMPLES

__all__ = ["register", "run", "prepare", "Prepared", "load_site_arg", "RV_RANGE_DAYS", "rv_request_over_range"]

#: Days after the night over which the RV visits to confirm are counted when ``--end`` is not given.
RV_RANGE_DAYS = 60


def register(subparsers):
    """Add the ``night`` command to ``subparsers``.

    Parameters
    ----------
    subparsers : the action of :meth:`argparse.ArgumentParser.add_subparsers`

    Returns
    -------
    None
    """
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
    p.add_argument("--end", metavar="YYYY-MM-DD",
                   help="local date of the last evening of the campaign this night belongs to: the RV visits "
                   "to confirm each eccentricity are counted at the epochs the site reaches from the night "
                   f"to this date, as 'campaign' counts them (default: {RV_RANGE_DAYS} days after the night)")
    add_hours_option(p)
    add_json_option(p)
    add_plan_options(p)
    p.set_defaults(func=run)


def _local(engine, jd: float) -> str:
    return engine.local_time(jd).strftime("%H:%M")


def _utc(iso: str) -> str:
    return iso[11:16]


def night_table(doc: dict, eng, night, site, date, instruments: dict, width: int = 80) -> FittedTable:
    """The night's blocks in time order, with the columns that fit ``width``.

    Parameters
    ----------
    doc : dict, the night plan's JSON (``blocks`` with ``start_jd``/``end_jd`` in JD (UTC),
        ``start_utc``/``end_utc`` ISO strings, ``value``, ``airmass_max``)
    eng : :class:`~rhofollow.planning.visibility.VisibilityEngine`, for local times
    night : :class:`~rhofollow.planning.visibility.ephemeris.NightGrid`, the night's limits (JD, UTC)
    site : :class:`~rhofollow.planning.site.Site`, name and twilight for the title
    date : datetime.date, local date of the evening
    instruments : dict, ``{"occultation": name, "rv": name}`` shown per block
    width : int, terminal width, characters

    Returns
    -------
    FittedTable, times as local and UTC HH:MM
    """
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


def rv_request_over_range(args, eng, site, prep, start, end):
    """Time-to-confirm at the epochs reachable from ``start`` to ``end`` and the RV request, exactly as
    ``campaign`` makes them for that range (the science dicts' RV records are updated in place).

    Parameters
    ----------
    args : parsed options (``hours``, ``seed``)
    eng : the site's :class:`~rhofollow.planning.visibility.VisibilityEngine`
    site : the site (:class:`~rhofollow.planning.site.Site`: instruments, loss fraction)
    prep : :class:`~rhofollow.cli.runs.Prepared` (assessments and science dicts)
    start, end : local dates (``datetime.date``) of the first and last evening

    Returns
    -------
    dict or None
        The run-level request (:func:`rhofollow.planning.rvrequest.plan_rv_requests`); None without a
        spectrograph or RV records. The science dicts keep the BJD offsets of the range's last
        night: call :func:`~rhofollow.planning.night.night_visibility` for the night after this.
    """
    from rhofollow.cli.common import count_progress, stage_progress
    from rhofollow.pipeline import PipelineOptions, instruments, rv_request
    from rhofollow.planning.campaign import range_nights

    spec, _phot = instruments(site)
    hours = parse_hours(args.hours, [spec.name] if spec is not None else [])
    if spec is None or not any(e.get("rv") for e in prep.science):
        return None
    grids = [g for g in eng.nights(start, end) if g.kind != "no_night"]
    with count_progress(len(grids), "visibility") as prog:
        task = prog.add_task("visibility", total=len(grids))
        nights = range_nights(eng, grids, prep.science, lambda: prog.advance(task))
    with stage_progress() as stage:
        return rv_request(prep.stages, nights, site,
                          PipelineOptions(seed=args.seed, rv_hours=hours, ledger=args.ledger), stage)


def _with_request(doc: dict, req, science: list[dict]) -> dict:
    """The night JSON with the RV request: run level (``rv_request``) and per target."""
    if req is None:
        return doc
    recs = {e["name"]: (e.get("rv") or {}).get("request") for e in science}
    for t in doc["targets"]:
        if recs.get(t["name"]) is not None:
            t["rv_request"] = recs[t["name"]]
    doc["rv_request"] = req
    return doc


def _range_end(text, date):
    """``--end`` as a date (default :data:`RV_RANGE_DAYS` after the night), not before the night and
    spanning at most :data:`rhofollow.cli.options.MAX_NIGHTS` evenings."""
    import datetime as dt

    from rhofollow.cli.options import MAX_NIGHTS

    if text is None:
        return date + dt.timedelta(days=RV_RANGE_DAYS)
    try:
        end = dt.date.fromisoformat(text)
    except ValueError:
        raise UserError(f"--end must be YYYY-MM-DD, got {text!r}") from None
    if end < date:
        raise UserError(f"--end {end} is before the night of {date}")
    if (end - date).days + 1 > MAX_NIGHTS:
        raise UserError(f"{(end - date).days + 1} nights from {date} to --end {end}; at most {MAX_NIGHTS}")
    return end


def run(args) -> int:
    """Run ``night`` with the parsed options ``args``.

    Parameters
    ----------
    args : :class:`argparse.Namespace` of the command's options

    Returns
    -------
    int
        Exit status (0 all went well, 1 some targets failed, 2 bad input).

    Raises
    ------
    UserError : bad ``--date``, ``--end``, site file or ``--samples``, or no dark time that night
    """
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
    end = _range_end(args.end, date)
    req = rv_request_over_range(args, eng, site, prep, date, end)
    vis = night_visibility(eng, night, prep.science)   # after the range: this night's BJD offsets
    plan = plan_night(prep.science, vis, site=site.name, night_start_jd=night.start_jd,
                      night_end_jd=night.end_jd, overhead_h=prep.overhead_h, model=prep.model)
    from rhofollow.pipeline import night_document

    doc = _with_request(night_document(plan, prep.stages, site, date, args.seed, args.samples, prep.catalogue),
                        req, prep.science)

    con = console()
    if doc["blocks"]:
        fitted = night_table(doc, eng, night, site, date, prep.instruments, con.width)
        con.print(fitted.table)
        table_note(fitted)
    else:
        say(f"No block can be scheduled at {site.name} on the night of {date}.")
    say(f"Total value {doc['total_value']:.3f} ({doc['method']}, {doc['solver_status']}); "
        f"{prep.overhead_h * 60:.0f} min slew + setup between blocks.")
    if req is not None:
        say(f"RV visits are counted at the epochs the site reaches from {date} to {end}:")
        for line in rv_request_lines(req):
            say(line)
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
