"""``rhofollow assess``: density mismatch -> eccentricity posterior and competing explanations."""
from __future__ import annotations

from pathlib import Path

from rich.text import Text

from rhofollow.cli.common import (add_assess_options, add_json_option, add_sample_format_option, console,
                                  load_catalogue, report_row_issues, write_json, atomic_write_text)
from rhofollow.cli.render import Col, FittedTable, fit_table, message, say, table_note

__all__ = ["register", "run", "summary_table", "assessment_table", "legend"]

CAUTION = ("Advisory only: the eccentricity posterior assumes the transit parameters and the stellar "
           "density are unbiased; blends, spots and wrong-host cases can mimic eccentricity.")


def register(subparsers) -> None:
    """Add the ``assess`` command (the eccentricity posterior of each candidate) to the command-line parser.

    Parameters
    ----------
    subparsers : argparse._SubParsersAction
        The sub-command registry of the ``rhofollow`` parser.
    """
    p = subparsers.add_parser(
        "assess", help="eccentricity posterior from the stellar-density mismatch of each candidate",
        description="Compare the circular-orbit density implied by each transit with the star's "
        "independent density; sample the eccentricity posterior (importance sampling) and weigh the "
        "explanations: circular orbit, eccentric orbit, blend, other host star.")
    p.add_argument("catalog", metavar="CATALOG", help="candidate catalogue (CSV, ECSV or VOTable)")
    add_json_option(p)
    p.add_argument("--ecsv", metavar="PATH", help="write the per-target summary table as ECSV")
    p.add_argument("--samples-out", metavar="DIR",
                   help="write each target's weighted posterior samples as DIR/<name-slug>-<hash>.ecsv (or "
                   ".fits, see --sample-format)")
    add_sample_format_option(p)
    add_assess_options(p)
    p.set_defaults(func=run)


def _fmt(x, nd=2):
    return "—" if x is None else f"{x:.{nd}g}" if abs(x) < 1e-2 or abs(x) >= 1e3 else f"{x:.{nd}f}"


LEGEND = ("mismatch: |ln(ρ_circ/ρ★)| in units of its spread; P(e>0.1): the prior's value → the "
          "posterior (how far the data moved it); †: a bound of the 95 % e interval is set by the prior "
          "(it moves by more than {delta:g} under a uniform prior; see --json ecc_bounds, "
          "ecc_uniform_prior); a red line under favoured: the row's finding when it is not "
          "consistent (no explanation fits; star density in question (ρ★ doubt): only a misestimated ρ★ "
          "fits; measured orbit disagrees (orbit ≠ data) with the transit and ρ★); "
          "2lnB: log Bayes factor of the favoured explanation over the next best (Kass & Raftery 1995: "
          ">2 positive, >6 strong, >10 very strong); ?: unreliable quantiles (effective sample size "
          "below the floor).")

#: Short forms of the findings for narrow terminals (the legend spells them out).
FINDING_SHORT = {"fits": "fits", "no explanation fits": "none fits", "star density in question": "ρ★ doubt",
                 "measured orbit disagrees": "orbit ≠ data"}
PRIOR_MARK = "†"


def legend() -> str:
    """The one-line legend printed under the table."""
    from rhofollow.stages.assess import PRIOR_DRIVEN_DELTA

    return LEGEND.format(delta=PRIOR_DRIVEN_DELTA)


def _ecc_cell(r: dict):
    """(full, compact) e cell: median [95 % interval], a prior-driven bound marked with PRIOR_MARK."""
    e = r["ecc"]
    if None in (e.get("q50"), e.get("q025"), e.get("q975")):
        return "n/a"
    bounds = r.get("ecc_bounds") or {}
    lo_m = PRIOR_MARK if bounds.get("lower") == "prior" else ""
    hi_m = PRIOR_MARK if bounds.get("upper") == "prior" else ""
    return (f"{e['q50']:.2f} [{e['q025']:.2f}{lo_m}–{e['q975']:.2f}{hi_m}]",
            f"{e['q50']:.2f}{PRIOR_MARK if lo_m or hi_m else ''}")


def _p_cell(r: dict) -> str:
    """P(e > 0.1): the prior's value → the posterior."""
    post = f"{r['p_ecc_gt_0p1']:.2f}"
    prior = r.get("p_ecc_gt_0p1_prior")
    return post if prior is None else f"{prior:.2f}→{post}"


def _favoured_cell(r: dict):
    """(full, compact) favoured cell: the favoured explanation, and under it in red the finding when
    the row is not consistent ("no explanation fits", ...)."""
    fav = r["favoured"].replace("_", " ")
    style = {"eccentric": "bold", "blend": "italic", "other host": "italic"}.get(fav, "")
    finding = r.get("finding") or ("fits" if r.get("fits", True) else "no explanation fits")
    if finding == "fits":
        return Text(fav, style=style)
    cells = []
    for text in (finding, FINDING_SHORT.get(finding, finding)):
        t = Text(fav, style=style)
        t.append("\n")
        t.append(text, style="red")
        cells.append(t)
    return tuple(cells)


def summary_table(records: list[dict], width: int = 80) -> FittedTable:
    """The terminal table, one row per target, with the columns that fit ``width``.

    Parameters
    ----------
    records : list of dict
        The assessment records.
    width : int
        Terminal width, in character cells.

    Returns
    -------
    FittedTable
        The table (densities in g/cm³, mismatch in sigma).
    """
    cols = [Col("target", justify="left"), Col("ρ_circ", drop=3, what="ρ_circ"),
            Col("ρ★", drop=3, what="ρ★"), Col("ratio", drop=2), Col("mismatch"), Col("e_min", drop=4),
            Col("e [95%]", compact_header="e", what="e interval"),
            Col("P(e>0.1)\nprior→post", what="P(e>0.1)"),
            Col("favoured", justify="left"), Col("2lnB", drop=1)]
    rows = []
    for r in records:
        if not r.get("ok"):
            rows.append([r["name"], *["—"] * 7, Text("failed", style="red"), "—"])
            continue
        lnb = r.get("ln_bayes_factor")
        rows.append([
            r["name"] + (" ?" if r.get("reliable") is False else ""), _fmt(r["rho_circ_cgs"]["q50"]),
            _fmt(r["rho_star_cgs"]["q50"]), _fmt(r["density_ratio"]["q50"]),
            f"{r['density_ratio_sigma']:.1f}σ", f"{r['ecc_min']:.2f}", _ecc_cell(r), _p_cell(r),
            _favoured_cell(r),
            "—" if lnb is None else f"{min(2 * lnb, 999):.1f}"])
    return fit_table("Density mismatch and eccentricity (densities in g/cm³)", cols, rows, width)


def assessment_table(records: list[dict]):
    """Astropy table of the per-target summary (for ECSV/CSV export).

    Parameters
    ----------
    records : list of dict
        The assessment records (failed targets are left out).

    Returns
    -------
    astropy.table.Table
        One row per assessed target: density quantiles (g/cm³), e and omega (deg) quantiles, mismatch
        (sigma), P(e > 0.1), ESS, log evidences and the favoured explanation.
    """
    from astropy.table import Table as ATable
    import astropy.units as u

    rows = [r for r in records if r.get("ok")]
    t = ATable()
    t["name"] = [r["name"] for r in rows]
    for key, unit in [("rho_circ_cgs", u.g / u.cm**3), ("rho_star_cgs", u.g / u.cm**3),
                      ("density_ratio", None), ("ecc", None), ("omega_deg", u.deg)]:
        for q in ("q16", "q50", "q84"):
            vals = [r[key][q] for r in rows]
            t[f"{key}_{q}"] = vals * unit if unit is not None else vals
    t["density_ratio_sigma"] = [r["density_ratio_sigma"] for r in rows]
    t["ecc_min"] = [r["ecc_min"] for r in rows]
    t["p_ecc_gt_0p1"] = [r["p_ecc_gt_0p1"] for r in rows]
    t["ess"] = [r["ess"] for r in rows]
    for h in ("circular", "eccentric", "blend", "other_host"):
        t[f"log_evidence_{h}"] = [r["log_evidence"].get(h) if r["log_evidence"].get(h) is not None
                                  else float("nan") for r in rows]
    t["favoured"] = [r["favoured"] for r in rows]
    return t


def write_samples(assessments, directory, fmt: str = "ecsv") -> int:
    """Write each target's samples to DIR/<stem>.ecsv (or .fits) atomically.

    Parameters
    ----------
    assessments : iterable
        Assessments (those without samples are skipped).
    directory : str or path-like
        The folder (created when missing).
    fmt : str
        ``"ecsv"`` or ``"fits"`` (:mod:`rhofollow.report.sample_files`).

    Returns
    -------
    int
        Number of files written.
    """
    from rhofollow.report.sample_files import write_sample_files

    return len(write_sample_files([(a.name, a.samples) for a in assessments if a.samples is not None],
                                  directory, fmt))


def _stream(targets, args, fmt: str):
    """Assess in chunks, writing samples as they come and keeping only the records (bounded memory).

    The sample files are written here while the workers assess the next chunks (the executor keeps
    a window of chunks in flight), so they need no pool of their own."""
    from rhofollow.stages.assess_many import assess_stream
    from rhofollow.cli.common import checked_prior, count_progress, resolve_workers

    prior = checked_prior(args)
    kept = []
    with count_progress(len(targets)) as prog:
        task = prog.add_task("assessing", total=len(targets))
        for part in assess_stream(targets, n_samples=args.samples, prior=prior, seed=args.seed,
                                  transit_prob=not args.no_transit_weight,
                                  workers=max(1, resolve_workers(args.workers, len(targets)))):
            if args.samples_out:
                write_samples(part, args.samples_out, fmt)
            for a in part:
                a.samples = None  # the record is all this command keeps
            kept.extend(part)
            prog.advance(task, len(part))
    return kept


def run(args) -> int:
    """Run ``rhofollow assess``: assess every valid catalogue row, print the table, write the requested files.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed options of the command (see :func:`register`).

    Returns
    -------
    int
        The exit status (0: success; see :func:`rhofollow.stages.records.envelope` for the others).
    """
    result = load_catalogue(args.catalog)
    report_row_issues(result, quiet=True)
    from rhofollow.report.sample_files import resolve_sample_format, sample_files_note, sample_files_text

    fmt = resolve_sample_format(args.sample_format, len(result.targets))
    assessments = _stream(result.targets, args, fmt)
    records = [a.record for a in assessments]
    con = console()
    fitted = summary_table(records, con.width)
    con.print(fitted.table)
    table_note(fitted)
    say(legend(), style="dim")
    for a in assessments:
        for w in a.warnings:
            message(f"{a.name}: {w}", "warning")
        for e in a.errors:
            message(f"{a.name}: {e}", "error")
    say(CAUTION, style="dim")
    from rhofollow.stages.records import envelope

    extra = {"prior": args.ecc_prior, "samples": args.samples, "caveat": CAUTION}
    if args.samples_out:
        extra["sample_files"] = dict(sample_files_note(args.sample_format, fmt),
                                     files=str(Path(args.samples_out) / f"*.{fmt}"))
        say("Sample files: " + sample_files_text(extra["sample_files"]), style="dim")
    payload = envelope("assess", catalogue=result, seed=args.seed, targets=records, payload=extra)
    if args.json:
        write_json(args.json, payload)
    if args.ecsv:
        import io as _io
        buf = _io.StringIO()
        assessment_table(records).write(buf, format="ascii.ecsv")
        atomic_write_text(args.ecsv, buf.getvalue())
    return payload["exit_status"]
