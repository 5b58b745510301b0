"""The RV request of a date range: time-to-confirm at reachable epochs for every target, then which
targets get how many visits (a budget knapsack with ``--hours``, else a gain-per-hour threshold).

:func:`plan_rv_requests` updates the RV records in place (keys of :mod:`.rvreach` plus ``request`` =
``{"visits", "hours", "power", "expected_confirmations", "p_eccentric", "basis", "requested",
"reason"}``) and returns the run-level summary that the campaign JSON carries as ``rv_request``::

    {"basis": "budget" | "threshold", "budgets_h": {...}, "min_gain_per_hour",
     "loss_fraction", "expected_confirmations", "hours_requested": {instrument: h},
     "requested": [names], "not_requested": [{"name", "hours", "visits", "reason"}]}

The campaign then places the requested visits only (:func:`rhofollow.planning.campaign.plan_campaign`).
"""
from __future__ import annotations

from rhofollow.planning.budget import MIN_GAIN_PER_HOUR, solve_budget, target_options, threshold_requests
from rhofollow.planning.rvreach import reachable_rv

__all__ = ["plan_rv_requests", "p_eccentric_of"]


def p_eccentric_of(assessment, fallback: float) -> float:
    """P(eccentric explanation) of an assessment (``p_explanation["eccentric"]``), else ``fallback``.

    Parameters
    ----------
    assessment : object with a ``record`` dict (an assessment), or None
    fallback : float, probability used when the record has none or it is not a number (0-1)

    Returns
    -------
    float, probability (0-1)
    """
    rec = getattr(assessment, "record", None) or {}
    p = (rec.get("p_explanation") or {}).get("eccentric")
    try:
        return float(p) if p is not None else float(fallback)
    except (TypeError, ValueError):
        return float(fallback)


def plan_rv_requests(assessments, science: list[dict], nights, inst, *, loss_fraction: float,
                     fap: float = 0.01, power: float = 0.8, seed: int = 0, n_alt: int = 400,
                     n_null: int = 2000, hours: dict | None = None,
                     min_gain_per_hour: float = MIN_GAIN_PER_HOUR, progress=None,
                     epochs_in_hand: dict | None = None, workers: int = 1, dask_address: str | None = None) -> dict:
    """Reachable-epoch time-to-confirm, then the request (see the module docstring).

    Parameters
    ----------
    assessments, science, nights, inst, loss_fraction, fap, power, seed, n_alt, n_null :
        as for :func:`rhofollow.planning.rvreach.reachable_rv`
    hours : spectrograph name -> budget (hours), or None for the threshold rule
    min_gain_per_hour : threshold of the rule without a budget (expected confirmations per hour)
    epochs_in_hand : target name -> (BJD_TDB, errors in m/s) of the RVs already measured (e.g.
        :func:`rhofollow.planning.rvreach.epochs_from_ledger`): the visits requested are on top
    workers, dask_address : where the power curves run (:func:`rhofollow.planning.rvreach.reachable_rv`)

    Returns
    -------
    dict, the run-level summary (module docstring)
    """
    reachable_rv(assessments, science, nights, inst, loss_fraction=loss_fraction, fap=fap, power=power,
                 seed=seed, n_alt=n_alt, n_null=n_null, progress=progress, epochs_in_hand=epochs_in_hand,
                 workers=workers, dask_address=dask_address)
    by_name = {a.name: a for a in assessments}
    items, recs = [], {}
    for entry in science:
        rec = entry.get("rv")
        cr = (rec or {}).get("confirm_reachable")
        if not rec or cr is None:
            continue
        p_ecc = p_eccentric_of(by_name.get(entry["name"]), entry.get("evidence", 0.0))
        opts = target_options(cr["power_curve"], rec["visit_h"], p_ecc)
        items.append({"name": entry["name"], "instrument": inst.name, "options": opts,
                      "visits_to_power": cr["visits"], "visit_h": rec["visit_h"], "p_eccentric": p_ecc,
                      "value_at_power": p_ecc * float(rec.get("power_at_n") or 0.0)})
        recs[entry["name"]] = rec
    if hours is not None:
        sol = solve_budget(items, hours)
        basis = "budget"
    else:
        sol = threshold_requests(items, power, min_gain_per_hour)
        basis = "threshold"
    out = {"basis": basis, "budgets_h": dict(hours or {}), "min_gain_per_hour": min_gain_per_hour,
           "loss_fraction": loss_fraction, "expected_confirmations": 0.0, "hours_requested": {},
           "requested": [], "not_requested": []}
    for it in items:
        s, rec = sol[it["name"]], recs[it["name"]]
        curve = {pt["n"]: pt["power"] for pt in rec["confirm_reachable"]["power_curve"]}
        requested = s["visits"] > 0
        if basis == "budget":
            reason = (f"funded within the {hours.get(it['instrument'], 0.0):g} h budget of {it['instrument']}"
                      if requested else
                      f"not funded within the {hours.get(it['instrument'], 0.0):g} h budget of {it['instrument']}")
        else:
            reason = s["reason"]
        rec["request"] = {"visits": s["visits"], "hours": s["hours"],
                          "power": curve.get(s["visits"], 0.0) if requested else 0.0,
                          "expected_confirmations": s["value"], "p_eccentric": it["p_eccentric"],
                          "basis": basis, "requested": requested, "reason": reason}
        if requested:
            out["requested"].append(it["name"])
            out["expected_confirmations"] += s["value"]
            out["hours_requested"][it["instrument"]] = out["hours_requested"].get(it["instrument"], 0.0) + s["hours"]
        else:
            n = it["visits_to_power"]
            full = it["options"][-1] if it["options"] else None
            cost_n = n if n is not None else (full.n if full else None)
            out["not_requested"].append({"name": it["name"], "visits": cost_n,
                                         "hours": None if cost_n is None else cost_n * it["visit_h"],
                                         "reason": reason})
    out["expected_confirmations"] = round(out["expected_confirmations"], 4)
    out["hours_requested"] = {k: round(v, 3) for k, v in out["hours_requested"].items()}
    return out
