"""Human-readable summaries of a ``plan`` run: Markdown and a self-contained HTML page.

Both carry the ranked table, the hours to request, the assumptions and the cautions; the HTML page
embeds every figure as a base64 PNG so it can be mailed or attached to a proposal as one file.
"""
from __future__ import annotations

import base64
import html

from rhofollow.stages.records import CAUTION
from rhofollow.io.safety import md_text
from rhofollow.report.sample_files import sample_files_text

__all__ = ["assumptions", "CAUTIONS", "ranked_table", "first_night_table", "markdown_summary", "html_summary",
           "proposal_entries"]

#: Cautions every report carries.
CAUTIONS = [
    CAUTION,
    "Occultation windows come from the eccentricity posterior; a broad posterior gives windows longer than a "
    "night, which the plans then leave out rather than guess.",
    "The density mismatch can also come from a blend or from the planet orbiting another star; the "
    "'favoured' column weighs those explanations, and follow-up should keep them in mind.",
]


def assumptions(doc: dict, scheduler: dict | None = None) -> list[str]:
    """The stated assumptions of the run (conventions, prior, mass-radius relation, ranking, schedule).

    Parameters
    ----------
    doc : dict
        The results document (``prior``, ``transit_weight``, ``coverage``, ``fap``, ``power``,
        ``priority_rule``, ``seed``, ``samples``).
    scheduler : dict, optional
        The campaign's ``scheduler`` summary (:func:`rhofollow.planning.campaign.scheduler_summary`):
        the solver limits and the gap reached, stated when given.

    Returns
    -------
    list of str
        One sentence (or a few) per assumption.
    """
    tw = ("weighted by the transit probability (1 + e sin ω)/(1 − e²)" if doc.get("transit_weight", True)
          else "not weighted by the transit probability")
    return [
        "ω is the argument of periastron of the star as quoted by RV orbit papers (v* = γ + K[cos(f + ω) + "
        "e cos ω]); the transit happens at true anomaly f = 90° − ω and the occultation at f = −90° − ω, so "
        "ω = 90° puts the transit at periastron (ρ_circ > ρ*).",
        f"Eccentricity prior: {doc.get('prior_description') or doc.get('prior')}, {tw}. A catalogue row with a "
        "measured e (and ω) uses that measurement instead.",
        "Planet mass from the catalogue's mp_mearth when given; otherwise from planet radius through published "
        "mass-radius relations with their scatter (Otegi, Bouchy & Helled 2020 below 1.5 and from 4 to "
        "10 Earth radii; Wolfgang, Rogers & Ford 2016 from 1.5 to 4; a broad log-uniform 0.1-13 Jupiter-mass "
        "prior for giants, whose radius barely constrains mass).",
        f"Occultation windows hold {100 * doc.get('coverage', 0.9):.0f} % of the posterior probability of each "
        "event's mid-time, plus baselines; times are BJD_TDB converted to UTC at the site with the barycentric "
        "correction.",
        f"RV confirmation: likelihood-ratio test of eccentric vs circular at false-alarm probability "
        f"{doc.get('fap', 0.01):g} with {100 * doc.get('power', 0.8):.0f} % power, simulated from the posterior.",
        "Ranking: " + doc.get("priority_rule", ""),
        f"Random seed {doc.get('seed')}, {doc.get('samples')} posterior samples per target: the same inputs and "
        "seed give the same numbers.",
    ] + ([] if not scheduler else [_schedule_sentence(scheduler)])


def _schedule_sentence(sch: dict) -> str:
    """How close to the best the nights' schedules are proven to be (the MILP's limits and gaps)."""
    gap, limit = 100 * float(sch.get("mip_rel_gap", 0.0)), sch.get("time_limit_s")
    reached = sch.get("max_gap")
    text = (f"Each night whose blocks compete is scheduled by a 0/1 programme accepted within {gap:g} % of the "
            f"best possible value (at most {limit:g} s per night); ")
    if reached is None:
        text += "the solver did not report the gap reached on every night."
    else:
        text += (f"the largest gap reached was {100 * float(reached):.2f} % over "
                 f"{sch.get('nights_scheduled', 0)} nights.")
    stopped = [n["night"] for n in sch.get("nights_not_optimal", []) if n.get("status") == "time limit"]
    if stopped:
        text += f" The time limit stopped the solver on {', '.join(stopped)}."
    return text


def _f(x, nd=2):
    try:
        return f"{float(x):.{nd}f}"
    except (TypeError, ValueError):
        return "–"


def _qtxt(q, nd=2):
    if not q or q.get("q50") is None:
        return "–"
    return f"{q['q50']:.{nd}f} [{q['q16']:.{nd}f}, {q['q84']:.{nd}f}]"


def prior_post_text(t: dict) -> str:
    """P(e > 0.1) under the prior alone → after the data (the posterior alone when no prior value).

    Parameters
    ----------
    t : dict
        A target record (``p_ecc_gt_0p1``, ``p_ecc_gt_0p1_prior``: probabilities, 0-1).

    Returns
    -------
    str
        ``"0.70→0.98"``, ``"0.98"``, or ``"–"`` when unknown.
    """
    post, prior = t.get("p_ecc_gt_0p1"), t.get("p_ecc_gt_0p1_prior")
    if post is None:
        return "–"
    return f"{post:.2f}" if prior is None else f"{prior:.2f}→{post:.2f}"


def ranked_table(doc: dict, top: int | None = None) -> tuple[list[str], list[list[str]]]:
    """(header, rows) of the ranked target table (assessed targets only, rank order).

    Parameters
    ----------
    doc : dict
        The results document.
    top : int, optional
        Keep the first ``top`` rows only.

    Returns
    -------
    tuple of (list of str, list of list of str)
        Column headers (units in them: m/s, hours per instrument) and the formatted rows.
    """
    insts = list(doc.get("hours_total", {}))
    head = ["rank", "target", "priority", "P(e>0.1) prior→data", "e [68%]", "ρ_circ/ρ* [68%]", "favoured",
            "P(occ)", "K m/s [68%]", "RV visits to confirm", "occ windows / RV visits at site"] + \
        [f"{i} h" for i in insts]
    rows = []
    for t in doc["targets"]:
        if not t.get("ok") or t.get("rank") is None:
            continue
        rv, occ, c = t.get("rv") or {}, t.get("occultation") or {}, t.get("campaign") or {}
        n = rv.get("n_epochs_confirm_ecc")
        mark = "?" if t.get("reliable") is False else ""   # ?: unreliable (low ESS), ranked last
        rows.append([str(t["rank"]), t["name"], _f(t.get("priority"), 3) + mark, prior_post_text(t),
                     _qtxt(t.get("ecc")), _qtxt(t.get("density_ratio")), t.get("favoured", "–"),
                     _f(occ.get("p_occultation")), _qtxt(rv.get("k_ms"), 1),
                     str(n) if n else ("not confirmable" if rv else "–"),
                     f"{len(c.get('occultation_windows', []))} / {len(c.get('rv_visits', []))}"]
                    + [_f((c.get("hours") or {}).get(i, 0.0), 1) for i in insts])
    return head, rows[:top] if top else rows


_MONTHS = ("January", "February", "March", "April", "May", "June", "July", "August", "September", "October",
           "November", "December")


def proposal_entries(doc: dict) -> list[dict]:
    """One proposal paragraph per requested RV target, with the numbers it states.

    Every number comes from the target's records in ``doc`` (``results.json``): the request
    (``rv.request``: visits, hours, power), the visit cost (``rv.exposure_s``, ``rv.overheads``), the
    placed visits (``campaign.rv_visits``: phases and nights), the assessment (``density_ratio``,
    ``density_ratio_sigma``, ``p_ecc_gt_0p1``).

    Parameters
    ----------
    doc : dict
        The results document.

    Returns
    -------
    list of dict
        ``{"name", "numbers", "text"}`` in rank order; ``numbers`` holds the values as stated
        (before formatting; hours in h, exposures in s).
    """
    out = []
    fap = doc.get("fap", 0.01)
    req_all = doc.get("rv_request") or {}
    loss = req_all.get("loss_fraction")
    inst = (doc.get("instruments") or {}).get("rv", "the spectrograph")
    ranked = sorted((t for t in doc["targets"] if t.get("ok")), key=lambda t: (t.get("rank") is None, t.get("rank") or 0))
    for t in ranked:
        rv, camp = t.get("rv") or {}, t.get("campaign") or {}
        req = rv.get("request") or {}
        if not req.get("requested"):
            continue
        visits = camp.get("rv_visits") or []
        phases = sorted(round(float(v["phase"]), 2) for v in visits if v.get("phase") is not None)
        months = [_MONTHS[int(m) - 1] for m in sorted({v["night"][5:7] for v in visits if v.get("night")},
                                                      key=lambda m: min(v["night"] for v in visits
                                                                        if v["night"][5:7] == m))]
        ov = rv.get("overheads") or {}
        num = {"visits": int(req["visits"]), "hours": float(req["hours"]), "power": float(req["power"]),
               "fap": float(fap), "visit_min": 60.0 * float(rv.get("visit_h") or 0.0),
               "exposure_s": float(rv.get("exposure_s") or 0.0),
               "overhead_min": float(ov.get("instrument_overhead_s", 0.0)) / 60.0,
               "visits_placed": len(visits), "phases": phases, "months": months,
               "density_ratio": (t.get("density_ratio") or {}).get("q50"),
               "density_ratio_sigma": t.get("density_ratio_sigma"), "p_ecc_gt_0p1": t.get("p_ecc_gt_0p1"),
               "expected_confirmations": float(req.get("expected_confirmations", 0.0)),
               "loss_fraction": loss}
        ph = ", ".join(f"{p:.2f}" for p in phases) if phases else "phases the schedule will fix"
        when = f" in {', '.join(months)}" if months else ""
        mism = ""
        if num["density_ratio"] is not None:
            mism = (f"The transit implies a circular-orbit stellar density {num['density_ratio']:.2f} times the "
                    "independent one" + (f" ({num['density_ratio_sigma']:.1f}σ)" if num["density_ratio_sigma"]
                                         is not None else "") + ", ")
        pe = f"P(e > 0.1) = {num['p_ecc_gt_0p1']:.2f}" if num["p_ecc_gt_0p1"] is not None else ""
        text = (f"{t['name']}: {num['visits']} RV visits of {num['visit_min']:.0f} min on {inst} "
                f"({num['exposure_s']:.0f} s exposure + {num['overhead_min']:.0f} min overhead; {num['hours']:.1f} h "
                f"in total) at orbital phases {ph}{when} give {_an(100 * num['power'])} {100 * num['power']:.0f} % chance of confirming "
                f"e > 0 at a false-alarm probability of {100 * fap:g} % (likelihood-ratio test simulated at the "
                "epochs the site can observe"
                + (f", {100 * loss:.0f} % of visits assumed lost" if loss is not None else "") + "). "
                + (mism + pe + "." if mism or pe else "")
                + f" Expected confirmed eccentric orbits: {num['expected_confirmations']:.2f}.")
        out.append({"name": t["name"], "numbers": num, "text": text})
    return out


def _an(pct: float) -> str:
    """'an' before a percentage read with a vowel sound (8, 11, 18, 80-89 ...), else 'a'."""
    t = f"{pct:.0f}"
    return "an" if t.startswith("8") or t in ("11", "18") else "a"


def _proposal_total(doc: dict, entries: list[dict]) -> str:
    req = doc.get("rv_request") or {}
    hrs = sum(e["numbers"]["hours"] for e in entries)
    basis = (f"within the budget of {', '.join(f'{k} {v:g} h' for k, v in req.get('budgets_h', {}).items())}"
             if req.get("basis") == "budget" else
             f"targets giving at least {req.get('min_gain_per_hour', 0):g} expected confirmations per hour")
    return (f"Total RV request: {hrs:.1f} h for {len(entries)} target(s) ({basis}), overheads included, "
            f"{sum(e['numbers']['expected_confirmations'] for e in entries):.2f} expected confirmed eccentric orbits.")


def _local_hm(iso_utc: str, tz) -> tuple[str, str]:
    """('HH:MM', zone abbreviation) of an ISO UTC time in the time zone ``tz`` (a ZoneInfo)."""
    import datetime as dt

    t = dt.datetime.fromisoformat(iso_utc.replace("Z", "+00:00"))
    if t.tzinfo is None:
        t = t.replace(tzinfo=dt.timezone.utc)
    loc = t.astimezone(tz)
    return loc.strftime("%H:%M"), loc.tzname() or ""


def first_night_table(night: dict) -> tuple[list[str], list[list[str]]]:
    """(header, rows) of the first night's blocks: local time at the site (its IANA ``timezone``), UTC,
    target, kind, value, max airmass. Without a usable time zone the local column is left out.

    Parameters
    ----------
    night : dict
        The night JSON (``blocks`` with ``start_utc`` / ``end_utc`` ISO times, ``value``,
        ``airmass_max``; ``timezone``).

    Returns
    -------
    tuple of (list of str, list of list of str)
        Column headers and rows (times HH:MM, airmass sec z).
    """
    from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

    try:
        tz = ZoneInfo(night["timezone"]) if night.get("timezone") else None
    except (ZoneInfoNotFoundError, ValueError):
        tz = None
    blocks = night.get("blocks", [])
    rows, zones = [], []
    for b in blocks:
        row = [f"{b['start_utc'][11:16]}-{b['end_utc'][11:16]}", b["name"], b["kind"], _f(b["value"], 3),
               _f(b["airmass_max"])]
        if tz is not None:
            (t0, z0), (t1, z1) = _local_hm(b["start_utc"], tz), _local_hm(b["end_utc"], tz)
            zones += [z0, z1]
            row.insert(0, f"{t0}-{t1}")
        rows.append(row)
    head = ["UTC", "target", "kind", "value", "max airmass"]
    if tz is not None:
        names = "/".join(dict.fromkeys(zones)) or night["timezone"]
        head.insert(0, f"local ({names}, {night['timezone']})")
    return head, rows


def _md_table(head, rows) -> str:
    """A Markdown table; every cell escaped (:func:`rhofollow.io.safety.md_text`)."""
    out = ["| " + " | ".join(md_text(c) for c in head) + " |", "|" + "|".join("---" for _ in head) + "|"]
    out += ["| " + " | ".join(md_text(c) for c in r) + " |" for r in rows]
    return "\n".join(out)


def _failed(doc):
    return [t for t in doc["targets"] if not t.get("ok")]


def markdown_summary(doc: dict, figures: dict[str, list[str]], night: dict | None) -> str:
    """Markdown text of the summary.

    Parameters
    ----------
    doc : dict
        The results document.
    figures : dict
        Section title -> relative PNG paths.
    night : dict or None
        The night JSON, or None without a first night.

    Returns
    -------
    str
        The Markdown text.
    """
    e = md_text
    lines = [f"# rhofollow plan: {e(doc['site'])}, {e(doc['start'])} to {e(doc['end'])}", "",
             f"> {CAUTIONS[0]}", ""]
    head, rows = ranked_table(doc)
    lines += ["## Targets by priority", "", _md_table(head, rows), ""]
    tot = doc.get("hours_total", {})
    if tot:
        lines += ["Hours to request (blocks + overheads): " + ", ".join(f"{k} {v:.1f} h" for k, v in tot.items()),
                  ""]
    prop = proposal_entries(doc)
    if prop:
        lines += ["## RV request: the case per target", ""] + [e(p["text"]) + "\n" for p in prop] + \
            [e(_proposal_total(doc, prop)), ""]
    nreq = (doc.get("rv_request") or {}).get("not_requested") or []
    if nreq:
        lines += ["Not requested:", ""] + [f"- {e(t['name'])}: {e(t['reason'])}" for t in nreq] + [""]
    if night is not None:
        lines += [f"## First night ({e(night.get('date'))})", ""]
        if night.get("blocks"):
            lines += [_md_table(*first_night_table(night)), ""]
        else:
            lines += ["No block can be scheduled on the first night.", ""]
    for title, paths in figures.items():
        lines += [f"## {e(title)}", ""] + [f"![{e(title)}]({p})" for p in paths] + [""]
    bad = _failed(doc)
    if bad:
        lines += ["## Targets not assessed", ""] + [f"- {e(t['name'])}: {e('; '.join(t.get('errors', [])))}"
                                                    for t in bad] + [""]
    lines += ["## Assumptions", ""] + [f"- {a}" for a in doc.get("assumptions", [])] + [""]
    lines += ["## Cautions", ""] + [f"- {c}" for c in doc.get("cautions", CAUTIONS)] + [""]
    if doc.get("notices"):
        lines += ["## Notices", ""] + [f"- {e(n)}" for n in doc["notices"]] + [""]
    samples = sample_files_text(doc.get("sample_files"))
    lines += ["Files: results.json / results.ecsv / results.csv (per target), night.json, campaign.json, "
              f"windows.ics, {samples}, plots/*.png.", ""]
    return "\n".join(lines)


_CSS = """body{font-family:system-ui,sans-serif;max-width:1180px;margin:2em auto;padding:0 1em;color:#222}
table{border-collapse:collapse;font-size:13px;margin:0.5em 0 1.2em}th,td{border:1px solid #ccc;padding:3px 7px;
text-align:right}th{background:#eef3f1}td:nth-child(2),th:nth-child(2){text-align:left}
.caution{border-left:5px solid #b5532f;background:#fbf1ec;padding:0.6em 1em}
figure{margin:1em 0}figure img{max-width:100%;border:1px solid #ddd}figcaption{font-size:12px;color:#555}"""


def _html_table(head, rows) -> str:
    h = "".join(f"<th>{html.escape(c)}</th>" for c in head)
    b = "".join("<tr>" + "".join(f"<td>{html.escape(c)}</td>" for c in r) + "</tr>" for r in rows)
    return f"<table><thead><tr>{h}</tr></thead><tbody>{b}</tbody></table>"


def html_summary(doc: dict, figures: dict[str, list[tuple[str, bytes]]], night: dict | None) -> str:
    """A self-contained HTML page of the summary (figures embedded).

    Parameters
    ----------
    doc : dict
        The results document.
    figures : dict
        Section title -> list of (caption, PNG bytes).
    night : dict or None
        The night JSON, or None without a first night.

    Returns
    -------
    str
        The HTML text.
    """
    e = html.escape
    parts = [f"<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'><title>rhofollow plan: "
             f"{e(doc['site'])}</title><style>{_CSS}</style></head><body>",
             f"<h1>rhofollow plan: {e(doc['site'])}, {e(doc['start'])} to {e(doc['end'])}</h1>",
             f"<p class='caution'>{e(CAUTIONS[0])}</p>", "<h2>Targets by priority</h2>",
             _html_table(*ranked_table(doc))]
    tot = doc.get("hours_total", {})
    if tot:
        parts.append("<p>Hours to request (blocks + overheads): "
                     + e(", ".join(f"{k} {v:.1f} h" for k, v in tot.items())) + "</p>")
    prop = proposal_entries(doc)
    if prop:
        parts.append("<h2>RV request: the case per target</h2>")
        parts += [f"<p>{e(p['text'])}</p>" for p in prop]
        parts.append(f"<p><b>{e(_proposal_total(doc, prop))}</b></p>")
    nreq = (doc.get("rv_request") or {}).get("not_requested") or []
    if nreq:
        parts.append("<p>Not requested:</p><ul>" + "".join(f"<li>{e(t['name'])}: {e(t['reason'])}</li>"
                                                           for t in nreq) + "</ul>")
    if night is not None:
        parts.append(f"<h2>First night ({e(str(night.get('date')))})</h2>")
        if night.get("blocks"):
            parts.append(_html_table(*first_night_table(night)))
        else:
            parts.append("<p>No block can be scheduled on the first night.</p>")
    for title, figs in figures.items():
        parts.append(f"<h2>{e(title)}</h2>")
        for cap, png in figs:
            b64 = base64.b64encode(png).decode("ascii")
            parts.append(f"<figure><img alt='{e(cap)}' src='data:image/png;base64,{b64}'>"
                         f"<figcaption>{e(cap)}</figcaption></figure>")
    bad = _failed(doc)
    if bad:
        parts.append("<h2>Targets not assessed</h2><ul>" + "".join(
            f"<li>{e(t['name'])}: {e('; '.join(t.get('errors', [])))}</li>" for t in bad) + "</ul>")
    parts.append("<h2>Assumptions</h2><ul>" + "".join(f"<li>{e(a)}</li>" for a in doc.get("assumptions", []))
                 + "</ul>")
    parts.append("<h2>Cautions</h2><ul>" + "".join(f"<li>{e(c)}</li>" for c in doc.get("cautions", CAUTIONS))
                 + "</ul>")
    if doc.get("notices"):
        parts.append("<h2>Notices</h2><ul>" + "".join(f"<li>{e(n)}</li>" for n in doc["notices"]) + "</ul>")
    parts.append("</body></html>")
    return "\n".join(parts)
