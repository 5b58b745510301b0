"""``rhofollow log``: the campaign ledger — record what was observed and measured, show it,
export it, and update the posteriors with it.

Every sub-command takes ``--ledger PATH`` (default ``./rhofollow-ledger.sqlite``). Ingest is
idempotent (the same file twice adds nothing), all-or-nothing per file, and prints exactly what
was added; a malformed file is rejected whole with the file, row and column of every problem.
"""
from __future__ import annotations

import argparse

from rhofollow.cli.common import UserError, add_json_option, add_seed_option, console, write_json
from rhofollow.cli.render import Col, FittedTable, fit_table, message, print_table, say, table_note
from rhofollow.core.defaults import DEFAULT_SAMPLES

__all__ = ["register", "run"]


def _ledger_parent() -> argparse.ArgumentParser:
    from rhofollow.io.ledger import DEFAULT_LEDGER

    p = argparse.ArgumentParser(add_help=False)
    p.add_argument("--ledger", metavar="PATH", default=DEFAULT_LEDGER,
                   help=f"ledger database file (created when missing; default ./{DEFAULT_LEDGER})")
    add_json_option(p)
    return p


def _add_duplicate_options(s) -> None:
    g = s.add_mutually_exclusive_group()
    g.add_argument("--replace", action="store_const", const="replace", dest="duplicates",
                   help="a measurement that repeats a stored one (same target and time within the "
                   "errors) replaces it")
    g.add_argument("--keep-both", action="store_const", const="keep_both", dest="duplicates",
                   help="keep a measurement that repeats a stored one as an independent measurement")
    s.set_defaults(duplicates="refuse")


def register(subparsers) -> None:
    """Add the ``log`` command (the campaign ledger and its actions) to the command-line parser.

    Parameters
    ----------
    subparsers : argparse._SubParsersAction
        The sub-command registry of the ``rhofollow`` parser.
    """
    p = subparsers.add_parser(
        "log", help="the campaign ledger: record RVs, occultation timings and observations done",
        description="Keep the campaign's memory in one SQLite file: targets with their catalogue "
        "rows, RVs, occultation timings and non-detections, observations done, and the posterior "
        "versions computed from them. Ingesting the same file twice adds nothing.")
    sub = p.add_subparsers(dest="log_command", metavar="ACTION")
    parent = _ledger_parent()
    _register_targets(sub, parent)
    _register_rv(sub, parent)
    _register_occultation(sub, parent)
    _register_done(sub, parent)
    _register_show(sub, parent)
    _register_transfer(sub, parent)
    _register_update(sub, parent)
    p.set_defaults(func=lambda args: (p.print_help(), 2)[1])


def _register_targets(sub, parent) -> None:
    """``log targets``: store the valid catalogue rows."""
    s = sub.add_parser("targets", parents=[parent], help="record catalogue rows of targets",
                       description="Read a catalogue and store each valid row in the ledger "
                       "(needed by 'log update'). A changed row replaces the stored one.")
    s.add_argument("catalog", metavar="CATALOG", help="target catalogue (CSV, ECSV or VOTable)")
    s.set_defaults(func=_run_targets)


def _register_rv(sub, parent) -> None:
    """``log rv``: ingest an RV file."""
    s = sub.add_parser("rv", parents=[parent], help="ingest an RV file (CSV)",
                       description="Columns bjd_tdb, rv_ms, rv_err_ms, instrument, and target when "
                       "the file holds several targets (else give --target).")
    s.add_argument("file", metavar="FILE", help="RV file (CSV) with the columns above")
    s.add_argument("--target", metavar="NAME", help="target of a single-target file")
    _add_duplicate_options(s)
    s.set_defaults(func=_run_rv)


def _register_occultation(sub, parent) -> None:
    """``log occultation``: ingest occultation timings, or record one detection or non-detection."""
    s = sub.add_parser("occultation", parents=[parent],
                       help="ingest occultation timings (CSV) or record one",
                       description="Either a CSV (columns target, kind = detection | "
                       "non_detection, mid_bjd_tdb, mid_err_min, window_start_bjd_tdb, "
                       "window_end_bjd_tdb, depth_limit_ppm, band_um, instrument) or one entry: "
                       "--target with --mid and --err-min (a measured mid-time), or --window "
                       "START END with --depth-limit (nothing seen down to that depth).")
    s.add_argument("file", metavar="FILE", nargs="?",
                   help="CSV of occultation timings and non-detections (columns above)")
    s.add_argument("--target", metavar="NAME", help="target of the one entry (instead of FILE)")
    s.add_argument("--mid", type=float, metavar="BJD_TDB", help="measured mid-occultation time")
    s.add_argument("--err-min", type=float, metavar="MIN", help="1-sigma error of --mid, minutes")
    s.add_argument("--window", type=float, nargs=2, metavar=("START", "END"),
                   help="BJD_TDB window observed without a detection")
    s.add_argument("--depth-limit", type=float, metavar="PPM",
                   help="smallest occultation depth the observation would have detected")
    s.add_argument("--band", type=float, metavar="MICRON", help="central wavelength of the band")
    s.add_argument("--instrument", default="", metavar="NAME", help="instrument of the entry")
    _add_duplicate_options(s)
    s.set_defaults(func=_run_occultation)


def _register_done(sub, parent) -> None:
    """``log done``: record observations done."""
    from rhofollow.io.ledger import OBSERVATION_KINDS, OBSERVATION_OUTCOMES

    s = sub.add_parser("done", parents=[parent], help="record observations done (CSV or one)",
                       description="Either a CSV (columns target, start_utc, kind, and optional "
                       "end_utc, instrument, outcome, note) or one entry with --target, --start "
                       "and --kind. Only outcome 'ok' counts as done for the planners.")
    s.add_argument("file", metavar="FILE", nargs="?", help="CSV of observations done (columns above)")
    s.add_argument("--target", metavar="NAME", help="target of the one entry (instead of FILE)")
    s.add_argument("--start", metavar="UTC", help="ISO start time (UTC unless an offset is given)")
    s.add_argument("--end", metavar="UTC", help="ISO end time (UTC unless an offset is given)")
    s.add_argument("--kind", choices=OBSERVATION_KINDS, metavar="KIND",
                   help=f"what was observed: {', '.join(OBSERVATION_KINDS)}")
    s.add_argument("--instrument", default="", metavar="NAME", help="instrument used")
    s.add_argument("--outcome", choices=OBSERVATION_OUTCOMES, default="ok",
                   help="how it went (default ok); only ok counts as done for the planners")
    s.add_argument("--note", default="", metavar="TEXT", help="free text stored with the observation")
    s.set_defaults(func=_run_done)


def _register_show(sub, parent) -> None:
    """``log show``: the ledger summary or one target's records."""
    s = sub.add_parser("show", parents=[parent], help="summarise the ledger or one target")
    s.add_argument("target", metavar="TARGET", nargs="?",
                   help="show this target's records (default: a summary of every target)")
    s.set_defaults(func=_run_show)


def _register_transfer(sub, parent) -> None:
    """``log export`` and ``log import``: the ledger as ingestable files and back."""
    s = sub.add_parser("export", parents=[parent], help="write the ledger as ingestable files",
                       description="Write targets.jsonl, rv.csv, occultations.csv, done.csv and "
                       "posteriors.jsonl into DIR; 'log import DIR' into a fresh ledger gives the "
                       "same content.")
    s.add_argument("folder", metavar="DIR", help="folder to write (created when missing)")
    s.set_defaults(func=_run_export)

    s = sub.add_parser("import", parents=[parent], help="ingest a folder written by 'log export'")
    s.add_argument("folder", metavar="DIR", help="folder written by 'log export'")
    s.set_defaults(func=_run_import)


def _register_update(sub, parent) -> None:
    """``log update``: re-weight the posteriors with the ledger's measurements."""
    s = sub.add_parser("update", parents=[parent],
                       help="re-weight posteriors with the ledger's RVs and occultation data",
                       description="Assess each target from its stored catalogue row, re-weight "
                       "the samples with its RVs, occultation timings and non-detections, and "
                       "store the new posterior version.")
    s.add_argument("targets", metavar="TARGET", nargs="*",
                   help="targets to update (default: every target in the ledger)")
    s.add_argument("--samples", type=int, default=DEFAULT_SAMPLES, metavar="N",
                   help=f"posterior samples per target (default {DEFAULT_SAMPLES}; at least 100)")
    s.add_argument("--jitter", type=float, default=0.0, metavar="M_S",
                   help="stellar jitter added to the RV errors in quadrature (m/s)")
    s.add_argument("--no-store", action="store_true", help="do not store the posterior version")
    add_seed_option(s)
    s.set_defaults(func=_run_update)


def run(args) -> int:  # pragma: no cover - dispatch happens through the sub-commands
    """Run ``rhofollow log``: dispatch to the chosen action.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed options of the command (see :func:`register`).

    Returns
    -------
    int
        The action's exit status.
    """
    return args.func(args)


def _open(args):
    from rhofollow.io.ledger import Ledger, LedgerError

    try:
        return Ledger(args.ledger)
    except LedgerError as exc:
        raise UserError(str(exc)) from None


def _ingest(args, fn) -> int:
    from rhofollow.io.ledger import LedgerError

    with _open(args) as lg:
        try:
            reports = fn(lg)
        except LedgerError as exc:
            raise UserError(str(exc)) from None
    reports = reports if isinstance(reports, list) else [reports]
    for r in reports:
        say(r.describe())
        n_rows = sum(len(v) for v in r.added.values()) + sum(len(v) for v in r.updated.values())
        if n_rows <= _ECHO_ROWS:
            for table, rows in r.replaced.items():
                for row in rows:
                    say(f"  - {table}: {_brief(row)}")
            for table, rows in r.added.items():
                for row in rows:
                    say(f"  + {table}: {_brief(row)}")
            for table, rows in r.updated.items():
                for row in rows:
                    say(f"  ~ {table}: {row['name']}")
        else:
            for table, rows in r.added.items():
                if table == "targets":
                    continue
                n_t = len({row.get("target") for row in rows})
                say(f"  added {len(rows)} {_WORDS.get(table, table)} for {n_t} "
                    f"target{'' if n_t == 1 else 's'}")
    if args.json:
        write_json(args.json, {"ledger": str(args.ledger),
                               "ingests": [r.to_dict() for r in reports]})
    return 0


#: Ingests adding at most this many rows list them one by one; larger ones are summarised.
_ECHO_ROWS = 10
_WORDS = {"rv_measurements": "RVs", "occultation_timings": "occultation timings",
          "observations": "observations", "posterior_versions": "posterior versions"}


def _brief(row: dict) -> str:
    skip = {"summary_json", "catalogue"}
    return ", ".join(f"{k}={v}" for k, v in row.items() if v not in (None, "") and k not in skip)


def _run_targets(args) -> int:
    from rhofollow.io.catalogue import CatalogueError, read_catalogue

    try:
        res = read_catalogue(args.catalog)
    except CatalogueError as exc:
        raise UserError(str(exc)) from None
    for issue in res.errors:
        message(issue, "skipped")
    if not res.targets:
        raise UserError(f"{args.catalog}: no valid rows to record")
    return _ingest(args, lambda lg: lg.add_targets(res.targets, str(args.catalog)))


def _run_rv(args) -> int:
    return _ingest(args, lambda lg: lg.ingest_rv_file(args.file, target=args.target,
                                                      duplicates=args.duplicates))


def _run_occultation(args) -> int:
    single = [args.mid, args.err_min, args.window, args.depth_limit]
    if args.file:
        if args.target or any(v is not None for v in single):
            raise UserError("give either a FILE or one entry's options (--target ...), not both")
        return _ingest(args, lambda lg: lg.ingest_occultation_file(args.file, duplicates=args.duplicates))
    if not args.target:
        raise UserError("give a FILE, or --target with --mid/--err-min or --window/--depth-limit")
    if args.window is not None:
        if args.mid is not None or args.err_min is not None:
            raise UserError("--window (a non-detection) and --mid (a detection) exclude each other")
        kw = dict(kind="non_detection", window_start_bjd_tdb=args.window[0],
                  window_end_bjd_tdb=args.window[1], depth_limit_ppm=args.depth_limit)
    else:
        if args.depth_limit is not None:
            raise UserError("--depth-limit belongs to a non-detection (--window START END)")
        kw = dict(kind="detection", mid_bjd_tdb=args.mid, mid_err_min=args.err_min)
    return _ingest(args, lambda lg: lg.add_occultation(args.target, band_um=args.band,
                                                       instrument=args.instrument,
                                                       duplicates=args.duplicates, **kw))


def _run_done(args) -> int:
    if args.file:
        if args.target or args.start or args.kind:
            raise UserError("give either a FILE or one entry's options (--target ...), not both")
        return _ingest(args, lambda lg: lg.ingest_done_file(args.file))
    if not (args.target and args.start and args.kind):
        raise UserError("give a FILE, or --target, --start and --kind for one observation")
    return _ingest(args, lambda lg: lg.add_done(args.target, args.start, args.kind,
                                                end_utc=args.end, instrument=args.instrument,
                                                outcome=args.outcome, note=args.note))


def _run_show(args) -> int:
    from dataclasses import asdict

    from rich.text import Text

    out = console()
    with _open(args) as lg:
        if args.target:
            if args.target not in lg.targets():
                raise UserError(f"{args.target} is not in the ledger {args.ledger}")
            rec = {"name": args.target, "catalogue_row": lg.catalogue_row(args.target),
                   "rv_measurements": [asdict(r) for r in lg.rv_measurements(args.target)],
                   "occultation_timings": [asdict(o) for o in lg.occultation_timings(args.target)],
                   "observations": [asdict(o) for o in lg.done(args.target)],
                   "posterior_versions": [asdict(v) for v in lg.posterior_versions(args.target)]}
            result = {"ledger": str(args.ledger), "target": rec}
        else:
            result = {"ledger": str(args.ledger), "schema_version": lg.schema_version,
                      "targets": lg.summary(), "ingests": lg.ingests()}
    if args.json:
        write_json(args.json, result)
    if not args.target:
        fitted = ledger_table(result, out.width)
        out.print(fitted.table)
        table_note(fitted)
        say(f"{len(result['targets'])} targets, {len(result['ingests'])} ingests")
        return 0
    rec = result["target"]
    out.print(Text(rec["name"], style="bold"))
    if rec["rv_measurements"]:
        cols = [Col("BJD_TDB"), Col("RV (m/s)"), Col("error (m/s)"), Col("instrument", justify="left")]
        rows = [[f"{r['bjd_tdb']:.5f}", f"{r['rv_ms']:.2f}", f"{r['rv_err_ms']:.2f}", r["instrument"]]
                for r in rec["rv_measurements"]]
        print_table(out, "RV measurements", cols, rows)
    for o in rec["occultation_timings"]:
        if o["kind"] == "detection":
            say(f"occultation seen: mid {o['mid_bjd_tdb']:.5f} BJD_TDB "
                      f"+/- {o['mid_err_min']:.1f} min {o['instrument']}")
        else:
            say(f"no occultation deeper than {o['depth_limit_ppm']:.0f} ppm in "
                      f"{o['window_start_bjd_tdb']:.4f}-{o['window_end_bjd_tdb']:.4f} BJD_TDB "
                      f"{o['instrument']}")
    for o in rec["observations"]:
        say(f"done: {o['start_utc']} UTC {o['kind']} {o['instrument']} ({o['outcome']}) "
                  f"{o['note']}")
    for v in rec["posterior_versions"]:
        e = v["summary"].get("ecc", {})
        txt = (f"e = {e['q50']:.3f} (+{e['q84'] - e['q50']:.3f} / -{e['q50'] - e['q16']:.3f})"
               if e else "")
        say(f"posterior {v['created_utc']}: ESS {v['ess']:.0f} of {v['n_samples']} {txt}")
    return 0


def ledger_table(result: dict, width: int = 80) -> FittedTable:
    """The ledger summary, one row per target, with the columns that fit ``width``.

    Parameters
    ----------
    result : dict
        The ``log show`` result: ``ledger`` and ``targets`` (the ledger's summary).
    width : int
        Terminal width, in character cells.

    Returns
    -------
    FittedTable
        The table (counts; latest posterior time UTC).
    """
    cols = [Col("target", justify="left"), Col("catalogue\nrow", drop=2, what="catalogue row"),
            Col("RVs"), Col("occ.\ntimings"), Col("non-\ndetections"), Col("done"),
            Col("posterior\nversions", drop=1, what="posterior versions"),
            Col("latest posterior\n(UTC)", justify="left", compact_header="latest\nposterior",
                what="latest posterior time")]
    rows = []
    for t in result["targets"]:
        latest = t["latest_posterior_utc"] or "-"
        rows.append([t["name"], "yes" if t["has_catalogue_row"] else "no", str(t["n_rv"]),
                     str(t["n_occ_detections"]), str(t["n_occ_non_detections"]), str(t["n_done"]),
                     str(t["n_posteriors"]), (latest, latest[:10])])
    return fit_table(f"Ledger {result['ledger']}", cols, rows, width)


def _run_export(args) -> int:
    with _open(args) as lg:
        paths = lg.export(args.folder)
    for p in paths:
        say(f"wrote {p}")
    if args.json:
        write_json(args.json, {"ledger": str(args.ledger), "files": [str(p) for p in paths]})
    return 0


def _run_import(args) -> int:
    return _ingest(args, lambda lg: lg.import_folder(args.folder))


def _run_update(args) -> int:
    from rhofollow.stages.update import update_targets

    if args.samples < 100:
        raise UserError("--samples must be at least 100")
    with _open(args) as lg:
        names = args.targets or None
        records = update_targets(lg, names, n_samples=args.samples, seed=args.seed,
                                 jitter_ms=args.jitter, store=not args.no_store)
    for r in records:
        if not r["ok"]:
            message(f"{r['name']}: {'; '.join(r['errors'])}", "error")
            continue
        e = r["ecc"]
        say(f"{r['name']}: e = {e['q50']:.3f} [{e['q16']:.3f}, {e['q84']:.3f}] from "
                  f"{r['n_rv']} RVs, {r['n_occ_detections']} occultation timings, "
                  f"{r['n_occ_non_detections']} non-detections; ESS {r['ess']:.0f} "
                  f"(was {r['prior_ess']:.0f})"
                  + ("" if r["stored_new_version"] else "; version already stored"))
        for w in r["warnings"]:
            message(f"{r['name']}: {w}", "warning")
    from rhofollow.stages.records import envelope

    doc = envelope("log update", seed=args.seed, targets=records,
                   payload={"ledger": str(args.ledger), "samples": args.samples, "jitter_ms": args.jitter,
                            "stored": not args.no_store})
    if args.json:
        write_json(args.json, doc)
    return doc["exit_status"]
