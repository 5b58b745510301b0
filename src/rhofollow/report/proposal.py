"""The RV request as a table for a proposal: Markdown, LaTeX or CSV.

One row per requested RV target, then the total. Every cell is a number of
:func:`rhofollow.report.summary.proposal_entries` (the same numbers the generated paragraphs state,
read from the JSON records: ``rv.request``, ``rv.exposure_s``, ``rv.overheads``, the placed visits,
``density_ratio``, ``p_ecc_gt_0p1``), formatted to the precision of :data:`COLUMNS`.

Columns: target; visits requested; exposure per visit (s); overhead per visit (min: the
spectrograph's pointing, acquisition and read-out, counted once); hours (visits x (exposure +
overhead)); orbital phases of the placed visits (0 = mid-transit); months they fall in; density
ratio (circular-orbit over independent stellar density, median) and its significance; P(e > 0.1);
the power reached (probability of confirming e > 0 at the run's false-alarm probability); the
expected confirmed eccentric orbits (P(eccentric) x power). The last row sums visits, hours and
expected confirmations: the total with overheads.
"""
from __future__ import annotations

from rhofollow.io.safety import TABLE_FORMATS  # the formats and their file suffixes (io.safety.text_table)

__all__ = ["TABLE_FORMATS", "COLUMNS", "proposal_document", "campaign_proposal", "proposal_rows",
           "proposal_table", "table_file_name"]

#: (header, key of the entry's numbers, decimals); decimals None: text.
COLUMNS = (
    ("Target", "name", None),
    ("Visits", "visits", 0),
    ("Exposure per visit (s)", "exposure_s", 0),
    ("Overhead per visit (min)", "overhead_min", 1),
    ("Hours incl. overheads", "hours", 2),
    ("Orbital phases of the visits", "phases", 2),
    ("Months", "months", None),
    ("Density ratio (circular / independent)", "density_ratio", 2),
    ("Mismatch (sigma)", "density_ratio_sigma", 1),
    ("P(e > 0.1)", "p_ecc_gt_0p1", 2),
    ("Power reached", "power", 2),
    ("Expected confirmations", "expected_confirmations", 2),
)


def _cell(value, nd) -> str:
    if value is None:
        return ""
    if isinstance(value, (list, tuple)):
        return " ".join(_cell(v, nd) for v in value)
    return str(value) if nd is None else f"{float(value):.{nd}f}"


def proposal_document(doc: dict) -> dict:
    """The proposal numbers of ``doc``: what the table shows and the JSON carries.

    Parameters
    ----------
    doc : the ``plan`` results document, or a document of the same shape (targets with ``rv``
        holding ``request``, ``exposure_s``, ``overheads``, ``visit_h``; ``campaign.rv_visits``;
        the assessment keys; run keys ``fap``, ``instruments``, ``rv_request``)

    Returns
    -------
    dict ``targets`` (one dict per requested RV target in rank order: ``name`` and the numbers
    of :func:`rhofollow.report.summary.proposal_entries`; hours in h, exposure in s, overhead in
    min) and ``total`` (``visits``, ``hours`` with overheads, ``expected_confirmations``).
    """
    from rhofollow.report.summary import proposal_entries

    targets = [dict(e["numbers"], name=e["name"]) for e in proposal_entries(doc)]
    total = {"visits": sum(t["visits"] for t in targets), "hours": sum(t["hours"] for t in targets),
             "expected_confirmations": sum(t["expected_confirmations"] for t in targets)}
    return {"targets": targets, "total": total}


def campaign_proposal(campaign_doc: dict, assessments, science: list[dict], fap: float) -> dict:
    """:func:`proposal_document` of a ``campaign`` run.

    The campaign JSON keeps per target its visits and request; the proposal also needs the RV
    record (exposure, overheads) and the assessment (density ratio, P(e > 0.1)). They are put
    together as the ``plan`` results document has them.

    Parameters
    ----------
    campaign_doc : the ``campaign`` JSON document (targets with ``rv_visits``)
    assessments : the assessments (``name``, ``record``)
    science : the science dicts whose ``rv`` records the RV request updated
    fap : false-alarm probability of the RV test

    Returns
    -------
    dict, as :func:`proposal_document`
    """
    recs = {a.name: a.record or {} for a in assessments}
    rvs = {e["name"]: e.get("rv") or {} for e in science}
    targets = []
    for t in campaign_doc["targets"]:
        rec = dict(recs.get(t["name"], {}), name=t["name"], ok=t.get("ok"))
        rec["rv"] = {k: v for k, v in rvs.get(t["name"], {}).items() if k not in ("name", "ok", "errors", "warnings")}
        rec["campaign"] = {"rv_visits": t.get("rv_visits") or []}
        targets.append(rec)
    return proposal_document({"fap": fap, "instruments": campaign_doc.get("instruments") or {},
                              "rv_request": campaign_doc.get("rv_request") or {}, "targets": targets})


def proposal_rows(prop: dict) -> tuple[list[str], list[list[str]], list[str]]:
    """Header, one row per requested RV target and the total row, as text cells.

    Parameters
    ----------
    prop : :func:`proposal_document`

    Returns
    -------
    (header, rows, total): phases separated by spaces, months by ", ", numbers to the decimals
    of :data:`COLUMNS`.
    """
    head = [h for h, _, _ in COLUMNS]
    rows = [[_cell(", ".join(t["months"]) if key == "months" else t.get(key), nd) for _, key, nd in COLUMNS]
            for t in prop["targets"]]
    total = dict(prop["total"], name="Total")
    return head, rows, [_cell(total.get(key), nd) for _, key, nd in COLUMNS]


def proposal_table(prop: dict, fmt: str = "md") -> str:
    """The proposal table (see :func:`proposal_rows`) as text.

    Parameters
    ----------
    prop : :func:`proposal_document` (or :func:`campaign_proposal`)
    fmt : "md" (Markdown, cells escaped), "latex" (a tabular environment; special characters
        escaped) or "csv" (RFC 4180, cells guarded against spreadsheet formulas)

    Returns
    -------
    str, ending with a newline. Without a requested target only the header and a zero total.
    """
    from rhofollow.io.safety import text_table

    head, rows, total = proposal_rows(prop)
    return text_table(head, rows, fmt, total)


def table_file_name(fmt: str) -> str:
    """File name of the proposal table in a report folder (``proposal_table.md`` / ``.tex`` / ``.csv``).

    Parameters
    ----------
    fmt : one of :data:`TABLE_FORMATS`

    Returns
    -------
    str
    """
    return f"proposal_table.{TABLE_FORMATS[fmt]}"
