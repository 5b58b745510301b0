"""``rhofollow rv``: RV semi-amplitude, epochs and hours to confirm an eccentric orbit, and the
eccentricity update from measured RVs."""
from __future__ import annotations

from pathlib import Path

from .common import (UserError, add_assess_options, add_json_option, console, err_console, run_assessment,
                     write_json)

__all__ = ["register", "run"]


def register(subparsers):
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
    p.add_argument("--relation", default="auto",
                   choices=["auto", "wrf16", "otegi20-rocky", "otegi20-volatile", "giant"],
                   help="planet mass-radius relation when no mass is known (default auto)")
    p.add_argument("--k-mode", default="marginal", choices=["marginal", "mass"],
                   help="RV update: marginalise K analytically, or take K from the mass draws")
    p.add_argument("--sims", type=int, default=2000,
                   help="simulated data sets under the circular null per test (default 2000; the "
                   "false-alarm threshold needs several per FAP^-1)")
    add_json_option(p)
    add_assess_options(p)
    p.set_defaults(func=run)


def _num(x, digits=3):
    return f"{x:.0f}" if abs(x) >= 100 else f"{x:.{digits}g}"


def _fmt(q, digits=3):
    """Median and the 68 % interval, compactly: 139 (26-724)."""
    if not q:
        return "-"
    return f"{_num(q['q50'], digits)} ({_num(q['q16'], 2)}-{_num(q['q84'], 2)})"


def run(args) -> int:
    from rich.table import Table

    from ..io.catalogue import read_catalogue
    from ..io.instruments import InstrumentError, Spectrograph, read_instruments
    from ..io.rvdata import RVDataError, read_rv_data
    from ..physics.rvconfirm import N_LADDER
    from ..rvplan import CAUTION, plan_rv

    if not 0 < args.fap < 1:
        raise UserError(f"--fap must lie between 0 and 1, got {args.fap}")
    if not 0 < args.power < 1:
        raise UserError(f"--power must lie between 0 and 1, got {args.power}")
    if args.sims < 100:
        raise UserError(f"--sims must be at least 100, got {args.sims}")
    if args.samples < 200:
        raise UserError(f"--samples must be at least 200, got {args.samples}")
    try:
        insts = read_instruments(args.instrument)
    except InstrumentError as exc:
        raise UserError(str(exc)) from None
    plan_inst = next(iter(insts.values()))
    if not isinstance(plan_inst, Spectrograph):
        raise UserError(f"{args.instrument[0]}: key 'kind' is \"{plan_inst.kind}\"; the rv command needs a "
                        "spectrograph")
    rv_data = None
    if args.rv_data:
        try:
            rv_data = read_rv_data(args.rv_data, known_instruments=insts.keys())
        except RVDataError as exc:
            raise UserError(str(exc)) from None
    if not Path(args.catalog).exists():
        raise UserError(f"{args.catalog}: catalogue file not found")
    try:
        cat = read_catalogue(args.catalog)
    except Exception as exc:  # the reader's own error type carries a one-sentence message
        if type(exc).__name__ == "CatalogueError":
            raise UserError(str(exc)) from None
        raise
    ec = err_console()
    for issue in cat.issues:
        ec.print(f"[yellow]{issue.severity}:[/] {issue}", highlight=False)
    if rv_data:
        unknown = sorted(set(rv_data) - {t.name for t in cat.targets})
        for name in unknown:
            ec.print(f"[yellow]warning:[/] RVs of {name} ({rv_data[name].source}) match no catalogue target",
                     highlight=False)
    from rich.progress import Progress

    assessments = run_assessment(cat.targets, args)
    with Progress(console=ec, transient=True) as prog:
        task2 = prog.add_task("RV planning", total=len(assessments))
        records = plan_rv(assessments, plan_inst, rv_data, fap=args.fap, power=args.power, seed=args.seed,
                          relation=args.relation, k_mode=args.k_mode, n_null=args.sims,
                          n_alt=min(400, args.sims), progress=lambda: prog.advance(task2))

    with_data = any("ecc_confirmed" in r for r in records)
    tab = Table(title=f"RV follow-up on {plan_inst.name} (FAP {args.fap:g}, power {args.power:.0%})")
    for col in ("target", "K m/s", "Mp M⊕", "σ m/s", "N K", "N e", "hours", "phases"):
        tab.add_column(col, justify="left" if col in ("target", "phases") else "right",
                       no_wrap=col in ("target", "K m/s"))
    for r in records:
        if not r["ok"]:
            tab.add_row(r["name"], "[red]" + "; ".join(r["errors"])[:70] + "[/]", *[""] * 6)
            continue
        n = r["n_epochs_confirm_ecc"]
        tab.add_row(r["name"], _fmt(r["k_ms"]), _num(r["mp_mearth"]["q50"]), f"{r['sigma_rv_ms']:.2f}",
                    str(r["n_epochs_detect_k"] or "-"), str(n) if n else f">{N_LADDER[-1]}",
                    f"{r['hours_confirm_ecc']:.1f}" if r["hours_confirm_ecc"] else "-",
                    " ".join(f"{p:.2f}" for p in r["best_phases"][:2]))
    upd = None
    if with_data:
        upd = Table(title=f"Update from measured RVs (eccentric if LRT p < {args.fap:g})")
        for col in ("target", "RVs", "e", "ω deg", "K m/s", "LRT p", "e > 0"):
            upd.add_column(col, justify="left" if col == "target" else "right", no_wrap=True)
        for r in records:
            if "ecc_confirmed" in r and r.get("ecc_updated"):
                upd.add_row(r["name"], str(r["n_rv"]), _fmt(r["ecc_updated"], 2),
                            _num(r["omega_updated_deg"]["q50"]), _num(r["k_updated_ms"]["q50"]),
                            f"{r['lrt_p_value']:.3g}", "[green]yes[/]" if r["ecc_confirmed"] else "no")
    con = console()
    con.print(tab)
    if upd is not None:
        con.print(upd)
    con.print("K, Mp: median (68 % interval). N K / N e: epochs to detect K / to confirm e > 0; hours for "
              "N e. Phases: orbital phases from mid-transit (0..1) where eccentric and circular orbits "
              "differ most.", highlight=False)
    con.print(f"[bold]Caution:[/] {CAUTION}", highlight=False)
    for r in records:
        for w in r.get("warnings", []):
            ec.print(f"[yellow]warning:[/] {r['name']}: {w}", highlight=False)
    from ..records import envelope

    doc = envelope("rv", catalogue=cat, seed=args.seed, targets=records, caution=CAUTION,
                   payload={"instrument": plan_inst.name, "instrument_file": plan_inst.source,
                            "fap": args.fap, "power": args.power, "samples": args.samples,
                            "rv_data": str(args.rv_data) if args.rv_data else None})
    if args.json:
        write_json(args.json, doc)
    return doc["exit_status"]
