"""Printed summaries shared by several commands (no command imports another).

* :func:`print_planner_messages`: the notices, skipped targets, target errors and unreachable
  targets of a ``night`` or ``campaign`` plan;
* :func:`summary_table`, :func:`print_plan_summary`: the ranked targets and closing lines of a
  ``plan`` or ``demo`` run.
"""
from __future__ import annotations

from pathlib import Path

from rhofollow.cli.common import console
from rhofollow.report.summary import prior_post_text
from rhofollow.cli.render import Col, FittedTable, fit_table, message, say, table_note

__all__ = ["print_planner_messages", "summary_table", "print_plan_summary", "rv_request_lines"]


def print_planner_messages(notices, doc: dict, unreachable: dict) -> None:
    """One line each on stderr: notices, skipped targets, target errors and unreachable targets.

    Parameters
    ----------
    notices : iterable of str
        The stages' notices.
    doc : dict
        The run's envelope (``skipped`` and ``targets`` with their ``errors``).
    unreachable : dict of str to str
        Targets no instrument of the site can reach: name -> reason.
    """
    for n in notices:
        message(n, "notice")
    for s in doc["skipped"]:
        message(f"{s['name']}: {s['reason']}", "skipped")
    for t in doc["targets"]:
        for msg in t["errors"]:
            message(f"{t['name']}: {msg}", "error")
    for name, msg in unreachable.items():
        message(f"{name}: {msg}", "warning")


def _priority_digits(values: list[float], lo: int = 3, hi: int = 6) -> int:
    """Fewest decimals (``lo``..``hi``) at which priorities that differ also print differently, so the
    printed column shows the order the ranking uses (equal printed values are true ties)."""
    distinct = sorted(set(values))
    for nd in range(lo, hi + 1):
        if len({f"{v:.{nd}f}" for v in distinct}) == len(distinct):
            return nd
    return hi


def summary_table(doc: dict, width: int = 80, top: int | None = 8) -> FittedTable:
    """The ranked targets of a plan run (rank order), with the columns that fit ``width``.

    The rank follows the priority; equal priorities are ordered by the density mismatch, shown in
    the column named as the tie-breaker.

    Parameters
    ----------
    doc : dict
        The plan's envelope.
    width : int
        Terminal width, in character cells.
    top : int or None
        Show only the first ``top`` targets (None: all).

    Returns
    -------
    FittedTable
        The table (mismatch in sigma, hours in h).
    """
    from rhofollow.report.summary import ranked_table

    _head, _rows = ranked_table(doc)  # the same targets, in the same order, as summary.md
    by_name = {t["name"]: t for t in doc["targets"]}
    cols = [Col("rank"), Col("target", justify="left"), Col("priority"),
            Col("tie-break:\nmismatch σ", what="mismatch (tie-break)"),
            Col("P(e>0.1)\nprior→data", what="P(e>0.1)", drop=4), Col("e\nmedian", what="e median", drop=3),
            Col("favoured", justify="left", drop=2), Col("occ.\nwindows"), Col("RV visits\nplaced"),
            Col("RV visits\nto confirm", drop=5, what="RV visits to confirm")]
    shown_t = [by_name[r[1]] for r in (_rows[:top] if top else _rows)]
    nd = _priority_digits([float(t.get("priority") or 0.0) for t in shown_t])
    rows = []
    for t in shown_t:
        rv, c = t.get("rv") or {}, t.get("campaign") or {}
        n = rv.get("n_epochs_confirm_ecc")
        sig = t.get("density_ratio_sigma")
        e = (t.get("ecc") or {}).get("q50")
        rows.append([str(t["rank"]), t["name"] + (" ?" if t.get("reliable") is False else ""), f"{float(t.get('priority') or 0.0):.{nd}f}",
                     "—" if sig is None else f"{sig:.1f}σ",
                     "—" if t.get("p_ecc_gt_0p1") is None else prior_post_text(t),
                     "—" if e is None else f"{e:.2f}", str(t.get("favoured", "—")).replace("_", " "),
                     str(len(c.get("occultation_windows", []))), str(len(c.get("rv_visits", []))),
                     str(n) if n else ("not possible" if rv else "—")])
    shown = f"top {len(rows)} of {len(_rows)}" if top and len(_rows) > len(rows) else f"{len(rows)}"
    return fit_table(f"{doc['site']}, {doc['start']} to {doc['end']}: {shown} targets by priority", cols, rows,
                     width)


def print_plan_summary(written: dict, out: Path, top: int = 8) -> None:
    """The end of a ``plan`` or ``demo`` run: ranked targets, hours, the caution, where the report is.

    Parameters
    ----------
    written : dict
        What :func:`rhofollow.cli.runs.plan_to_folder` returned.
    out : pathlib.Path
        The report folder.
    top : int
        Targets shown in the table.
    """
    from rhofollow.report.summary import CAUTIONS

    doc = written["doc"]
    con = console()
    fitted = summary_table(doc, con.width, top)
    con.print(fitted.table)
    table_note(fitted, "a wider terminal, summary.md or results.csv")
    say("priority = P(eccentric explanation) × W × testability, W = B/(1+B) of the posterior-to-prior odds "
        "of e > 0.1; equal priorities rank by the larger "
        "density mismatch; occ. windows and RV visits placed: what fits at the site in the date range; "
        "?: unreliable quantiles (low effective sample size), ranked after the reliable targets.",
        style="dim")
    tot = doc.get("hours_total", {})
    if tot:
        say("Hours to request: " + ", ".join(f"{k} {v:.1f} h" for k, v in tot.items()))
    for line in rv_request_lines(doc.get("rv_request")):
        say(line)
    n_bad = sum(1 for t in doc["targets"] if not t.get("ok"))
    if n_bad:
        say(f"{n_bad} target(s) could not be assessed (see summary.md).")
    message(CAUTIONS[0], "caution", to_stdout=True)
    say(f"Report: {out / 'summary.html'} (also summary.md, results.json/.ecsv/.csv, night.json, "
        f"campaign.json, windows.ics, plots/, samples/)")
    for n in doc.get("notices", []):
        message(n, "notice")


def rv_request_lines(req: dict | None) -> list[str]:
    """Plain sentences on the RV request (budget or threshold) for the terminal.

    Parameters
    ----------
    req : dict or None
        The plan's RV request (hours per spectrograph in h).

    Returns
    -------
    list of str
        The lines (empty without a request).
    """
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
