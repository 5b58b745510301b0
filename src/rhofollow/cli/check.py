"""``rhofollow check``: validate a catalogue and/or a site file without computing anything.

Exit status: 0 when every row passed, 1 when any row (or column) failed or the site file has
problems, 2 when a file cannot be used at all. With both a catalogue and ``--site``, every target
that never reaches the site's altitude limit gets a warning (it would never be planned there).
The JSON is the common envelope (:mod:`rhofollow.stages.records`); ``rows`` lists every data row.
"""
from __future__ import annotations

from rich.text import Text

from rhofollow.cli.common import UserError, add_json_option, console, write_json
from rhofollow.cli.render import Col, FittedTable, fit_table, message, say, table_note

__all__ = ["register", "run", "report_dict"]


def register(subparsers) -> None:
    """Add the ``check`` command (validate a catalogue and/or a site file) to the command-line parser.

    Parameters
    ----------
    subparsers : argparse._SubParsersAction
        The sub-command registry of the ``rhofollow`` parser.
    """
    p = subparsers.add_parser(
        "check",
        help="validate a catalogue and/or a site file and list every problem",
        description="Read a candidate catalogue (CSV, ECSV or VOTable), list every problem by row, "
        "name and column, and compute nothing. Exit status 0: all rows valid; 1: some rows "
        "failed; 2: a file could not be used.",
    )
    p.add_argument("catalog", nargs="?", metavar="CATALOG", help="catalogue file to validate")
    p.add_argument("--site", metavar="FILE", help="also validate a site configuration (TOML)")
    p.add_argument("--require-coords", action="store_true",
                   help="treat missing ra_deg/dec_deg as errors (needed for planning)")
    add_json_option(p)
    p.set_defaults(func=run)


def report_dict(result) -> dict:
    """The machine-readable validation report of a :class:`CatalogueResult`.

    Parameters
    ----------
    result : rhofollow.core.types.CatalogueResult
        What the catalogue reader returned.

    Returns
    -------
    dict
        ``ok``, ``n_warnings``, ``issues`` (row, name, column, reason, severity) and ``targets`` (the
        errors and warnings of each row).
    """
    by_row: dict[int, dict] = {}
    issues = []
    for i in result.issues:
        issues.append({"row": i.row, "name": i.name, "column": i.column, "reason": i.reason,
                       "severity": i.severity})
        if i.row > 0:
            rec = by_row.setdefault(i.row, {"errors": [], "warnings": [], "name": i.name})
            text = f"column '{i.column}': {i.reason}" if i.column else i.reason
            rec["errors" if i.severity == "error" else "warnings"].append(text)
    good = {t.row: t for t in result.targets}
    targets = []
    for row in range(1, result.n_rows + 1):
        rec = by_row.get(row, {"errors": [], "warnings": [], "name": ""})
        t = good.get(row)
        name = t.name if t is not None else rec["name"]
        targets.append({"row": row, "name": name, "ok": t is not None,
                        "errors": rec["errors"], "warnings": rec["warnings"]})
    return {
        "source": result.source,
        "ok": result.ok,
        "n_rows": result.n_rows,
        "n_failed": result.n_failed,
        "n_warnings": len(result.warnings),
        "issues": issues,
        "targets": targets,
    }


def problems_table(result, width: int = 80) -> FittedTable:
    """The catalogue's problems, one row each; only the reason column folds.

    Parameters
    ----------
    result : rhofollow.core.types.CatalogueResult
        What the catalogue reader returned.
    width : int
        Terminal width, in character cells.

    Returns
    -------
    FittedTable
        The table.
    """
    cols = [Col("row"), Col("name", justify="left"), Col("column", justify="left", wrap=True, max_width=20),
            Col("kind", justify="left"), Col("reason", justify="left", wrap=True)]
    rows = []
    for i in sorted(result.issues, key=lambda i: (i.row, i.severity != "error")):
        kind = Text("error", style="bold red") if i.severity == "error" else Text("warning", style="yellow")
        rows.append([str(i.row) if i.row else "file", i.name, i.column, kind, i.reason])
    return fit_table(f"Problems in {result.source}", cols, rows, width)


def _render(result) -> None:
    out = console()
    if result.issues:
        fitted = problems_table(result, out.width)
        out.print(fitted.table)
        table_note(fitted)
    n_warn = len(result.warnings)
    say(f"{result.source}: {result.n_rows} rows read, {result.n_failed} failed, "
        f"{n_warn} warning{'s' if n_warn != 1 else ''}", style="green" if result.ok else "bold red")


def _error(sentence: str) -> None:
    """Print one error sentence on stderr (text taken literally, never as markup, never wrapped)."""
    message(sentence, "error")


def _check_site(path: str) -> tuple[int, dict]:
    try:
        from rhofollow.planning.site import check_site
    except ImportError:
        _error(f"cannot check site file {path}: site support is not available in this "
               "installation")
        return 2, {"path": path, "ok": False, "problems": ["site support not available"]}
    from pathlib import Path

    if not Path(path).is_file():
        what = "is a directory" if Path(path).is_dir() else "not found"
        _error(f"site file {path}: {what}")
        return 2, {"path": path, "ok": False, "problems": [f"{path}: {what}"]}
    try:
        problems = list(check_site(path))
    except (OSError, ValueError) as exc:
        _error(f"site file {path}: {exc}")
        return 2, {"path": path, "ok": False, "problems": [str(exc)]}
    for prob in problems:
        prob = str(prob)
        say(prob if prob.startswith(str(path)) else f"{path}: {prob}", style="red")
    say(f"{path}: site file " + ("is valid" if not problems else f"has {len(problems)} problem(s)"),
        style="green" if not problems else "bold red")
    return (1 if problems else 0), {"path": path, "ok": not problems, "problems": problems}


def _never_rising(site_path, result) -> dict[str, str]:
    """name -> warning for the valid rows that never reach the site's altitude limit (empty if the site
    cannot be read: its problems are reported by the site check)."""
    try:
        from rhofollow.planning.reach import unreachable_targets
        from rhofollow.planning.site import load_site

        site = load_site(site_path)
    except Exception:  # noqa: BLE001 - the site check reports why the file is unusable
        return {}
    if site is None or not hasattr(site, "constraints"):
        return {}
    return unreachable_targets(site, [(t.name, t.value("dec_deg")) for t in result.targets])


def run(args) -> int:
    """Run ``rhofollow check``: list every problem of the catalogue and/or the site file, compute nothing.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed options of the command (see :func:`register`).

    Returns
    -------
    int
        0: all rows valid; 1: some rows failed; 2: a file could not be used.
    """
    from rhofollow.io.catalogue import CatalogueError, read_catalogue
    from rhofollow.stages.records import envelope

    if not args.catalog and not args.site:
        raise UserError("give a catalogue file to check, or --site FILE, or both")
    status = 0
    payload: dict = {}
    result = None
    if args.catalog:
        try:
            result = read_catalogue(args.catalog, require_coords=args.require_coords)
        except CatalogueError as exc:
            _error(str(exc))
            payload["file_error"] = str(exc)
            payload["ok"] = False
            status = 2
        else:
            _render(result)
            rep = report_dict(result)
            payload.update(ok=rep["ok"], n_warnings=rep["n_warnings"], issues=rep["issues"], rows=rep["targets"])
            status = 0 if result.ok else 1
    never = {}
    if args.site:
        site_status, payload["site"] = _check_site(args.site)
        status = max(status, site_status)
        if result is not None:
            from rich.text import Text

            never = _never_rising(args.site, result)
            for name, msg in never.items():
                console().print(Text(f"warning: {name}: {msg}", style="yellow"), soft_wrap=True)
    targets = [] if result is None else [
        {"name": t.name, "ok": True, "errors": [], "row": t.row,
         "warnings": list(t.warnings) + ([never[t.name]] if t.name in never else []),
         "never_rises": t.name in never} for t in result.targets]
    doc = envelope("check", catalogue=result if result is not None else args.catalog, targets=targets,
                   payload=payload)
    doc["exit_status"] = status
    if args.json:
        write_json(args.json, doc)
    return status
