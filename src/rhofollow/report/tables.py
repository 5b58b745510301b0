"""Per-target results of a ``plan`` run as JSON, ECSV and CSV (one row per catalogue target).

The ranking is plain and stated in every report: priority = P(eccentric explanation) x W x
testability, where P(eccentric explanation) is the eccentric orbit's share of the explanations'
evidence (equal prior odds; a likely blend or other-host case ranks low), W = B/(1+B) of the
posterior-to-prior odds B of e > 0.1 (:func:`rhofollow.stages.assess.record_data_weight`, the same W the
night and campaign plans use), and
testability is the larger of (a) P(occultation happens) when at least one occultation window is
observable from the site in the date range, and (b) the fraction of the RV visits needed to confirm
e > 0 that fit in the range (0 when RVs cannot confirm it). Ties go to the larger density mismatch.
"""
from __future__ import annotations

import io
import math

from rhofollow.stages.assess import record_data_weight
from rhofollow.core.samples import QUANTILE_LEVELS

__all__ = ["PRIORITY_RULE", "rank_targets", "results_document", "flat_rows", "rows_to_csv", "rows_to_ecsv",
           "COLUMN_UNITS"]

PRIORITY_RULE = ("priority = P(eccentric explanation) x W x testability; P(eccentric explanation) "
                 "= the eccentric orbit's share of the explanations' evidence (equal prior odds); W = B/(1+B) "
                 "with B the posterior-to-prior odds of e > 0.1 (what the data add to the prior: 0.5 when they "
                 "say nothing); testability = max(P(occultation) if an occultation "
                 "window is observable from the site in the range, fraction of the RV visits needed to "
                 "confirm e > 0 that fit in the range); targets with unreliable quantiles (effective "
                 "sample size below the floor) and targets no explanation fits rank after all others")

#: Units of the flat table's columns (ECSV); a column absent here is dimensionless or text.
COLUMN_UNITS = {"period_d": "d", "rho_circ_cgs": "g / cm3", "rho_star_cgs": "g / cm3", "omega_deg": "deg",
                "occ_duration_h": "h", "depth_ppm": "", "k_ms": "m / s", "mp_mearth": "earthMass",
                "sigma_rv_ms": "m / s", "hours_confirm_ecc": "h", "hours_total": "h"}


def _num(x, default=0.0) -> float:
    try:
        v = float(x)
    except (TypeError, ValueError):
        return default
    return v if math.isfinite(v) else default


def rank_targets(result) -> dict:
    """Rank every target by the priority rule (:data:`PRIORITY_RULE`).

    Parameters
    ----------
    result : rhofollow.pipeline.PipelineResult
        The finished run (assessments, occultations, RV records, campaign).

    Returns
    -------
    dict
        Target name -> ``{"rank", "priority", "testability", "p_eccentric_explanation",
        "p_ecc_gt_0p1", "ecc_data_weight", "fits", "reliable"}`` (priority, testability and the
        probabilities dimensionless, 0-1); a failed target has rank None.
    """
    occ = {r["name"]: r for r in result.occultations["targets"]}
    rv = {r["name"]: r for r in result.rv}
    camp = {t["name"]: t for t in result.campaign["targets"]}
    out = {}
    for a in result.assessments:
        if not a.ok:
            out[a.name] = {"rank": None, "priority": 0.0, "testability": 0.0, "p_ecc_gt_0p1": None}
            continue
        rec, c = a.record, camp.get(a.name, {})
        t_occ = _num(occ.get(a.name, {}).get("p_occultation")) if c.get("occultation_windows") else 0.0
        need = _num(rv.get(a.name, {}).get("n_epochs_confirm_ecc"), 0.0)
        t_rv = min(1.0, len(c.get("rv_visits", [])) / need) if need > 0 else 0.0
        test = max(t_occ, t_rv)
        p_model = _num((rec.get("p_explanation") or {}).get("eccentric"), 1.0)
        # W rewards what the data show, not the prior: B/(1+B) of the posterior-to-prior odds of
        # e > 0.1 (a target without information scores 0.5, not the prior's P(e > 0.1) ~ 0.7); the
        # same W the night and campaign block values use (assess.record_data_weight)
        w_data = _num(record_data_weight(rec))
        out[a.name] = {"priority": round(p_model * w_data * test, 6), "ecc_data_weight": rec.get("ecc_data_weight"),
                       "fits": rec.get("fits", True) is not False,
                       "testability": round(test, 6), "p_eccentric_explanation": round(p_model, 6),
                       "p_ecc_gt_0p1": rec.get("p_ecc_gt_0p1"),
                       "reliable": rec.get("reliable") is not False,
                       "_tie": _num(rec.get("density_ratio_sigma"))}
    # Targets with unreliable quantiles (effective sample size below samples.RELIABLE_ESS) rank
    # after every reliable one: their priority is not known well enough to compete.
    ok = sorted((n for n, v in out.items() if v.get("p_ecc_gt_0p1") is not None),
                key=lambda n: (not out[n]["reliable"], not out[n]["fits"], -out[n]["priority"], -out[n]["_tie"],
                               n))
    for i, n in enumerate(ok, 1):
        out[n]["rank"] = i
    for v in out.values():
        v.pop("_tie", None)
    return out


def _occ_summary(r: dict | None) -> dict:
    if not r:
        return {}
    keep = ("p_occultation", "occ_phase", "occ_duration_h", "occ_full_duration_h", "depth_ppm", "b_occ",
            "light_travel_s", "window_pad_h", "events")
    return {k: r[k] for k in keep if k in r}


def results_document(result, ranking: dict, assumptions: list[str], cautions: list[str]) -> dict:
    """The ``results.json`` document: run metadata, assumptions, cautions and one record per target.

    Each target has ``name, ok, errors, warnings, rank, priority, testability``, the assessment keys
    (quantile objects ``q025 q16 q50 q84 q975``), ``occultation`` (timing, depth, events), ``rv``
    (K, mass, epochs and hours) and ``campaign`` (windows, visits, hours at the site).

    Parameters
    ----------
    result : rhofollow.pipeline.PipelineResult
        The finished run.
    ranking : dict
        :func:`rank_targets` of ``result``.
    assumptions : list of str
        The stated assumptions (sentences).
    cautions : list of str
        The cautions (sentences).

    Returns
    -------
    dict
        The output envelope (:func:`rhofollow.stages.records.envelope`) with ``targets`` in rank
        order; units as in each record's key names (``_cgs`` g/cm3, ``_h`` hours, ``_ms`` m/s,
        ``_bjd_tdb`` days).
    """
    occ = {r["name"]: r for r in result.occultations["targets"]}
    rv = {r["name"]: r for r in result.rv}
    camp = {t["name"]: t for t in result.campaign["targets"]}
    targets = []
    for a in result.assessments:
        rec = dict(a.record) if a.record else {"name": a.name, "ok": a.ok, "errors": list(a.errors),
                                               "warnings": list(a.warnings)}
        extra_w = []
        o = occ.get(a.name)
        if o:
            extra_w += [w for w in o.get("warnings", []) if w not in rec.get("warnings", [])]
        r = rv.get(a.name)
        if r:
            extra_w += [w for w in r.get("warnings", []) if w not in rec.get("warnings", []) + extra_w]
        rec["warnings"] = list(rec.get("warnings", [])) + extra_w
        rec.update(ranking.get(a.name, {}))
        if a.ok:
            rec["occultation"] = _occ_summary(o)
            rec["rv"] = {k: v for k, v in (r or {}).items() if k not in ("name", "ok", "errors", "warnings")}
            c = camp.get(a.name)
            rec["campaign"] = ({k: c[k] for k in ("occultation_windows", "rv_visits", "hours", "notes",
                                                  "n_windows_unobservable") if k in c} if c else {})
        targets.append(rec)
    targets.sort(key=lambda t: (t.get("rank") is None, t.get("rank") or 0, t["name"]))
    # one meaning of failure (records.py): a target fails when any stage failed for it
    from rhofollow.pipeline import planner_targets
    from rhofollow.stages.records import CAUTION, envelope

    merged = {t["name"]: t for t in planner_targets(result.stages)}
    for rec in targets:
        m = merged.get(rec["name"])
        if m is not None:
            rec.update(ok=m["ok"], errors=m["errors"], warnings=m["warnings"])
    opts = result.options
    return envelope(getattr(result, "command", "plan"), catalogue=getattr(result, "catalogue", None),
                    seed=opts.seed, targets=targets, skipped=result.stages.skipped, caution=CAUTION, payload={
        "site": result.site.name, "start": str(result.start), "end": str(result.end),
        "samples": opts.samples, "prior": result.stages.prior.name,
        "prior_description": result.stages.prior.description, "transit_weight": opts.transit_weight,
        "coverage": opts.coverage, "fap": opts.fap, "power": opts.power,
        "instruments": result.stages.instruments, "priority_rule": PRIORITY_RULE,
        "hours_total": result.campaign.get("hours_total", {}), "rv_request": result.campaign.get("rv_request"),
        "assumptions": assumptions,
        "cautions": cautions, "notices": result.stages.notices})


def _q(rec: dict, key: str, prefix: str, row: dict, levels=("q16", "q50", "q84")) -> None:
    q = rec.get(key) or {}
    for lev in levels:
        row[f"{prefix}_{lev}"] = q.get(lev) if q.get(lev) is not None else math.nan


def flat_rows(doc: dict, periods: dict | None = None) -> list[dict]:
    """One flat row per target of ``results_document`` (fixed columns, NaN / empty when unknown).

    Parameters
    ----------
    doc : dict
        :func:`results_document`.
    periods : dict, optional
        Target name -> posterior-mean orbital period (days).

    Returns
    -------
    list of dict
        Column name -> value; units in :data:`COLUMN_UNITS` and the column names' suffixes.
    """
    rows = []
    for t in doc["targets"]:
        row = {"name": t["name"], "ok": bool(t.get("ok")), "rank": t.get("rank") or 0,
               "priority": _num(t.get("priority"), math.nan),
               "period_d": (periods or {}).get(t["name"], math.nan)}
        _q(t, "rho_circ_cgs", "rho_circ_cgs", row)
        _q(t, "rho_star_cgs", "rho_star_cgs", row)
        _q(t, "density_ratio", "density_ratio", row)
        row["density_ratio_sigma"] = _num(t.get("density_ratio_sigma"), math.nan)
        row["ecc_min"] = _num(t.get("ecc_min"), math.nan)
        _q(t, "ecc", "ecc", row, tuple(QUANTILE_LEVELS))
        _q(t, "omega_deg", "omega_deg", row)
        row["p_ecc_gt_0p1"] = _num(t.get("p_ecc_gt_0p1"), math.nan)
        row["p_ecc_gt_0p1_prior"] = _num(t.get("p_ecc_gt_0p1_prior"), math.nan)
        row["ecc_data_weight"] = _num(t.get("ecc_data_weight"), math.nan)
        row["favoured"] = t.get("favoured", "")
        row["ess"] = _num(t.get("ess"), math.nan)
        o = t.get("occultation") or {}
        row["p_occultation"] = _num(o.get("p_occultation"), math.nan)
        _q(o, "occ_phase", "occ_phase", row)
        _q(o, "occ_duration_h", "occ_duration_h", row, ("q50",))
        _q(o, "depth_ppm", "depth_ppm", row, ("q50",))
        ev = (o.get("events") or [{}])[0]
        row["next_occ_mid_utc"] = ev.get("mid_utc", "")
        r = t.get("rv") or {}
        _q(r, "k_ms", "k_ms", row)
        _q(r, "mp_mearth", "mp_mearth", row, ("q50",))
        row["sigma_rv_ms"] = _num(r.get("sigma_rv_ms"), math.nan)
        row["n_epochs_confirm_ecc"] = int(_num(r.get("n_epochs_confirm_ecc"), -1))
        row["hours_confirm_ecc"] = _num(r.get("hours_confirm_ecc"), math.nan)
        c = t.get("campaign") or {}
        row["n_occ_windows_observable"] = len(c.get("occultation_windows", []))
        row["n_rv_visits_planned"] = len(c.get("rv_visits", []))
        row["hours_total"] = round(sum((c.get("hours") or {}).values()), 3)
        row["n_warnings"] = len(t.get("warnings", []))
        row["errors"] = "; ".join(t.get("errors", []))
        rows.append(row)
    return rows


def rows_to_csv(rows: list[dict]) -> str:
    """CSV text (header from the first row; NaN written as an empty cell; text cells that a
    spreadsheet would run as a formula are quoted, see :mod:`rhofollow.io.safety`).

    Parameters
    ----------
    rows : list of dict
        :func:`flat_rows` (units in the column names).

    Returns
    -------
    str
        The CSV text (empty without rows).
    """
    from rhofollow.io.safety import csv_text

    if not rows:
        return ""
    head = list(rows[0])
    return csv_text(head, ([r.get(k) for k in head] for r in rows))


def _unit_of(col: str) -> str:
    for key, unit in COLUMN_UNITS.items():
        if col == key or col.startswith(key + "_q"):
            return unit
    return ""


def rows_to_ecsv(rows: list[dict], meta: dict | None = None) -> str:
    """ECSV text with units on the physical columns and the run metadata in the header.

    Parameters
    ----------
    rows : list of dict
        :func:`flat_rows`.
    meta : dict, optional
        Run metadata (site, dates, seed, samples, prior, priority rule) for the header.

    Returns
    -------
    str
        The ECSV text; units from :data:`COLUMN_UNITS`.
    """
    import astropy.units as u
    from astropy.table import Table

    t = Table(rows=[list(r.values()) for r in rows], names=list(rows[0])) if rows else Table()
    for col in t.colnames:
        unit = _unit_of(col)
        if unit:
            t[col].unit = u.Unit(unit)
    t.meta.update(meta or {})
    buf = io.StringIO()
    t.write(buf, format="ascii.ecsv")
    return buf.getvalue()
