"""``rhofollow rv``: RV semi-amplitude, epochs and hours to confirm an eccentric orbit, and the
eccentricity update from measured RVs."""
from __future__ import annotations

from pathlib import Path

from rich.text import Text

from rhofollow.cli.common import (UserError, add_assess_options, add_json_option, console, run_assessment,
                     write_json)
from rhofollow.cli.render import Col, FittedTable, fit_table, message, say, table_note
from rhofollow.core.defaults import DEFAULT_SIMS, MIN_PLANNING_SAMPLES, MIN_SIMS

__all__ = ["register", "run"]


def register(subparsers):
    """Add the ``rv`` command (RV amplitude, epochs and hours to confirm e > 0) to the parser.

    Parameters
    ----------
    subparsers : argparse._SubParsersAction
        The sub-command registry of the ``rhofollow`` parser.
    """
    p = subparsers.add_parser(
        "rv", help="RV semi-amplitude, epochs and hours to confirm e > 0, update from measured RVs",
        description="For every catalogue target: the RV semi-amplitude K and planet mass, the per-epoch "
        "precision on the chosen spectrograph, the epochs and hours to detect K and to confirm an "
        "eccentric orbit (likelihood-ratio test, simulated), the most informative orbital phases, and, "
        "with measured RVs, the updated eccentricity.")
    p.add_argument("catalog", metavar="CATALOG", help="target catalogue (CSV, ECSV or VOTable)")
    p.add_argument("--instrument", metavar="FILE", action="append", required=True,
                   help="spectrograph model (TOML); the first one is planned with, all of them name the "
                   "instruments allowed in RV files (repeat the option for several)")
    p.add_argument("--rv-data", metavar="PATH",
                   help="measured RVs: a directory of <target>.csv / .ecsv files, or one file with a "
                   "'target' column")
    p.add_argument("--fap", type=float, default=0.01,
                   help="false-alarm probability of the eccentricity test (default 0.01)")
    p.add_argument("--power", type=float, default=0.8,
                   help="required probability of confirming e > 0 (default 0.8)")
    p.add_argument("--relation", default="auto", metavar="NAME",
                   choices=["auto", "wrf16", "otegi20-rocky", "otegi20-volatile", "giant"],
                   help="planet mass-radius relation when no mass is known: auto, wrf16, otegi20-rocky, "
                   "otegi20-volatile or giant (default auto)")
    p.add_argument("--k-mode", default="marginal", choices=["marginal", "mass"],
                   help="RV update: marginalise K analytically, or take K from the mass draws")
    p.add_argument("--sims", type=int, default=DEFAULT_SIMS,
                   help=f"simulated data sets under the circular null per test (default {DEFAULT_SIMS}; the "
                   "false-alarm threshold needs several per FAP^-1)")
    p.add_argument("--site", metavar="FILE",
                   help="site file (TOML): simulate the test at the epochs the site can observe between "
                   "--start and --end (with the site's loss fraction) instead of uniform orbital phases")
    p.add_argument("--start", metavar="YYYY-MM-DD", help="with --site: local date of the first evening")
    p.add_argument("--end", metavar="YYYY-MM-DD", help="with --site: local date of the last evening")
    add_json_option(p)
    add_assess_options(p)
    p.set_defaults(func=run)


def _num(x, digits=3):
    if x is None:
        return "n/a"
    return f"{x:.0f}" if abs(x) >= 100 else f"{x:.{digits}g}"


def _fmt(q, digits=3):
    """Median and the 68 % interval, compactly: 139 (26-724)."""
    if not q:
        return "-"
    return f"{_num(q['q50'], digits)} ({_num(q['q16'], 2)}-{_num(q['q84'], 2)})"


def rv_table(records: list[dict], instrument: str, fap: float, power: float, width: int = 80) -> FittedTable:
    """The RV follow-up table with the columns that fit ``width``.

    Parameters
    ----------
    records : list of dict
        The RV records of :func:`rhofollow.stages.rv.plan_rv`.
    instrument : str
        The spectrograph planned with.
    fap : float
        False-alarm probability of the eccentricity test.
    power : float
        Required probability of confirming e > 0.
    width : int
        Terminal width, in character cells.

    Returns
    -------
    FittedTable
        The table (K and sigma in m/s, Mp in Earth masses, exposures s, hours h).
    """
    from rhofollow.physics.rvconfirm import N_LADDER

    cols = [Col("target", justify="left"), Col("K m/s (68%)", compact_header="K m/s", what="K interval"),
            Col("Mp M⊕", drop=2), Col("σ m/s", drop=3, what="per-epoch σ"),
            Col("exp. s", drop=5, what="exposure per visit"),
            Col("epochs to\ndetect K", drop=1, what="epochs to detect K"), Col("epochs to\nconfirm e>0"),
            Col("hours to\nconfirm e>0"), Col("best RV\nphases", justify="left", drop=4, what="best RV phases")]
    rows = []
    for r in records:
        if not r["ok"]:
            rows.append([r["name"], *["—"] * 7, Text("not assessed (see errors)", style="red")])
            continue
        n = r["n_epochs_confirm_ecc"]
        cr = r.get("confirm_reachable")
        never = f"not in range ({cr['n_nights_reachable']} nights)" if cr else f">{N_LADDER[-1]}"
        rows.append([r["name"] + (" ?" if r.get("reliable") is False else ""), (_fmt(r["k_ms"]), _num(r["k_ms"]["q50"])), _num(r["mp_mearth"]["q50"]),
                     f"{r['sigma_rv_ms']:.2f}", f"{r['exposure_s']:.0f}" if r.get("exposure_s") else "—", str(r["n_epochs_detect_k"] or "-"),
                     str(n) if n else never,
                     f"{r['hours_confirm_ecc']:.1f}" if r["hours_confirm_ecc"] else "-",
                     " ".join(f"{p:.2f}" for p in r["best_phases"][:2])])
    return fit_table(f"RV follow-up on {instrument} (FAP {fap:g}, power {power:.0%})", cols, rows, width)


def update_table(records: list[dict], fap: float, width: int = 80) -> FittedTable | None:
    """The table of eccentricities updated from measured RVs.

    Parameters
    ----------
    records : list of dict
        The RV records of :func:`rhofollow.stages.rv.plan_rv`.
    fap : float
        False-alarm probability of the eccentricity test.
    width : int
        Terminal width, in character cells.

    Returns
    -------
    FittedTable or None
        The table (omega deg, K m/s), or None when no target has RVs.
    """
    if not any("ecc_confirmed" in r for r in records):
        return None
    cols = [Col("target", justify="left"), Col("RVs"), Col("e (68%)"), Col("ω deg", drop=2),
            Col("K m/s", drop=1), Col("LRT p"), Col("e > 0")]
    rows = []
    for r in records:
        if "ecc_confirmed" in r and r.get("ecc_updated"):
            rows.append([r["name"], str(r["n_rv"]), _fmt(r["ecc_updated"], 2),
                         _num(r["omega_updated_deg"]["q50"]), _num(r["k_updated_ms"]["q50"]),
                         f"{r['lrt_p_value']:.3g}",
                         Text("yes", style="green") if r["ecc_confirmed"] else "no"])
    return fit_table(f"Update from measured RVs (eccentric if LRT p < {fap:g})", cols, rows, width)


def _reachable(args, assessments, records, inst) -> str:
    """Rewrite the records with the time-to-confirm at the site's reachable epochs; returns a label."""
    from rhofollow.planning.campaign import range_nights
    from rhofollow.planning.night import science_from_records
    from rhofollow.planning.rvreach import reachable_rv
    from rhofollow.planning.visibility import VisibilityEngine
    from rhofollow.cli.options import load_site_arg, night_range

    missing = [o for o, v in (("--start", args.start), ("--end", args.end)) if not v]
    if missing:
        raise UserError(f"with --site, give {' and '.join(missing)}")
    start, end = night_range(args.start, args.end)
    site = load_site_arg(args.site)
    eng = VisibilityEngine(site)
    grids = [g for g in eng.nights(start, end) if g.kind != "no_night"]
    if not grids:
        raise UserError(f"no dark time at {site.name} between {start} and {end}")
    sci, _ = science_from_records(assessments, [], records)
    nights = range_nights(eng, grids, sci)
    reachable_rv(assessments, sci, nights, inst, loss_fraction=site.loss_fraction, fap=args.fap,
                 power=args.power, seed=args.seed, n_alt=min(400, args.sims), n_null=args.sims,
                 relation=args.relation)
    return f"{site.name} {start} to {end}"


def run(args) -> int:
    """Run ``rhofollow rv``: plan RV follow-up for every catalogue target and print it.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed options of the ``rv`` command (see :func:`register`).

    Returns
    -------
    int
        The exit status of the run (0 when every target was planned).
    """
    from rhofollow.stages.rv import CAUTION, plan_rv
    from rhofollow.cli.common import count_progress

    _check_numbers(args)
    insts, plan_inst = _read_spectrographs(args)
    rv_data = _read_rvs(args, insts)
    cat = _read_targets(args, rv_data)
    assessments = run_assessment(cat.targets, args)
    with count_progress(len(assessments), "RV planning") as prog:
        task2 = prog.add_task("RV planning", total=len(assessments))
        records = plan_rv(assessments, plan_inst, rv_data, fap=args.fap, power=args.power, seed=args.seed,
                          relation=args.relation, k_mode=args.k_mode, n_null=args.sims,
                          n_alt=min(400, args.sims), progress=lambda: prog.advance(task2))

    where = None
    if args.site:
        where = _reachable(args, assessments, records, plan_inst)
    _print_results(args, records, plan_inst.name, where, CAUTION)
    from rhofollow.stages.records import envelope

    doc = envelope("rv", catalogue=cat, seed=args.seed, targets=records, caution=CAUTION,
                   payload={"instrument": plan_inst.name, "instrument_file": plan_inst.source,
                            "fap": args.fap, "power": args.power, "samples": args.samples,
                            "phase_model": "reachable" if where else "uniform",
                            "site": args.site, "start": args.start if where else None,
                            "end": args.end if where else None,
                            "rv_data": str(args.rv_data) if args.rv_data else None})
    if args.json:
        write_json(args.json, doc)
    return doc["exit_status"]


def _check_numbers(args) -> None:
    """Refuse a --fap or --power outside (0, 1) and too few --sims or --samples."""
    if not 0 < args.fap < 1:
        raise UserError(f"--fap must lie between 0 and 1, got {args.fap}")
    if not 0 < args.power < 1:
        raise UserError(f"--power must lie between 0 and 1, got {args.power}")
    if args.sims < MIN_SIMS:
        raise UserError(f"--sims must be at least {MIN_SIMS}, got {args.sims}")
    if args.samples < MIN_PLANNING_SAMPLES:
        raise UserError(f"--samples must be at least {MIN_PLANNING_SAMPLES}, got {args.samples}")


def _read_spectrographs(args):
    """The --instrument files by name, and the first one (a spectrograph, planned with)."""
    from rhofollow.io.instruments import InstrumentError, Spectrograph, read_instruments

    try:
        insts = read_instruments(args.instrument)
    except InstrumentError as exc:
        raise UserError(str(exc)) from None
    plan_inst = next(iter(insts.values()))
    if not isinstance(plan_inst, Spectrograph):
        raise UserError(f"{args.instrument[0]}: key 'kind' is \"{plan_inst.kind}\"; the rv command needs a "
                        "spectrograph")
    return insts, plan_inst


def _read_rvs(args, insts):
    """The measured RVs of --rv-data by target name (None without the option)."""
    from rhofollow.io.rvdata import RVDataError, read_rv_data

    if not args.rv_data:
        return None
    try:
        return read_rv_data(args.rv_data, known_instruments=insts.keys())
    except RVDataError as exc:
        raise UserError(str(exc)) from None


def _read_targets(args, rv_data):
    """The catalogue, with its row problems and the RVs that match no target printed."""
    from rhofollow.io.catalogue import read_catalogue

    if not Path(args.catalog).exists():
        raise UserError(f"{args.catalog}: catalogue file not found")
    try:
        cat = read_catalogue(args.catalog)
    except Exception as exc:  # the reader's own error type carries a one-sentence message
        if type(exc).__name__ == "CatalogueError":
            raise UserError(str(exc)) from None
        raise
    for issue in cat.issues:
        message(issue, issue.severity)
    if rv_data:
        unknown = sorted(set(rv_data) - {t.name for t in cat.targets})
        for name in unknown:
            message(f"RVs of {name} ({rv_data[name].source}) match no catalogue target", "warning")
    return cat


def _print_results(args, records, instrument: str, where: str | None, caution: str) -> None:
    """Print the RV and update tables, their notes, the caution and every target's problems."""
    con = console()
    fitted = rv_table(records, instrument, args.fap, args.power, con.width)

    con.print(fitted.table)
    table_note(fitted)
    upd = update_table(records, args.fap, con.width)
    if upd is not None:
        con.print(upd.table)
        table_note(upd)
    if where:
        say(f"Epochs and hours at the reachable epochs of {where}: visits to request (one per "
            "night, a share of them lost to weather), exposure per visit chosen for the fewest hours; a "
            "visit costs its exposure plus the instrument overhead.", style="dim")
    else:
        say("Epochs and hours at orbital phases spread uniformly (no --site); give --site, --start and --end "
            "for the epochs the site can observe.", style="dim")
    say("K, Mp: median (68 % interval). Phases: orbital phases from mid-transit (0..1) where eccentric and "
        "circular orbits differ most. ?: unreliable quantiles (effective sample size below the floor).",
        style="dim")
    message(caution, "caution", to_stdout=True)
    for r in records:
        for e in r.get("errors", []):
            message(f"{r['name']}: {e}", "error")
        for w in r.get("warnings", []):
            message(f"{r['name']}: {w}", "warning")
