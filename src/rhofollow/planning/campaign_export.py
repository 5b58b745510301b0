"""The campaign plan's exports: the proposal table of hours (Markdown, LaTeX, CSV) and iCalendar.

Both read a :class:`~rhofollow.planning.campaign.CampaignPlan` (its ``targets``, ``instruments``,
``hours_total``, ``site``, ``start`` and ``end``) and return text or bytes; writing the files is the
caller's (atomic writes in :mod:`rhofollow.io.atomic`).
"""
from __future__ import annotations

from typing import TYPE_CHECKING

from rhofollow.io.safety import TABLE_FORMATS, text_table
from rhofollow.stages.records import CAUTION

if TYPE_CHECKING:
    from rhofollow.planning.campaign import CampaignPlan

__all__ = ["TABLE_FORMATS", "hours_table", "to_ical"]


def hours_table(plan: CampaignPlan, fmt: str = "md") -> str:
    """The proposal table: per target the windows, visits, hours per instrument and the RV exposure
    per visit, and totals.

    Parameters
    ----------
    plan : CampaignPlan
        The campaign plan.
    fmt : {"md", "latex", "csv"}
        Markdown, a LaTeX tabular environment, or CSV.

    Returns
    -------
    str
        The table text, ending in a newline: counts, hours (h, two decimals) per instrument and in
        total, RV exposure per visit (s).
    """
    insts = list(dict.fromkeys(plan.instruments.values()))
    head = (["Target", "Occultation windows", "RV visits"] + [f"{i} (h)" for i in insts]
            + ["RV exposure (s)", "Total (h)"])
    rows = []
    for t in plan.targets:
        hs = [t["hours"].get(i, 0.0) for i in insts]
        ex = next((v.get("exposure_s") for v in t["rv_visits"] if v.get("exposure_s")), None)
        rows.append([t["name"], str(len(t["occultation_windows"])), str(len(t["rv_visits"]))]
                    + [f"{h:.2f}" for h in hs] + [f"{ex:.0f}" if ex else "", f"{sum(hs):.2f}"])
    tot = plan.hours_total
    hs = [tot.get(i, 0.0) for i in insts]
    total = (["Total", str(sum(len(t["occultation_windows"]) for t in plan.targets)),
              str(sum(len(t["rv_visits"]) for t in plan.targets))]
             + [f"{h:.2f}" for h in hs] + ["", f"{sum(hs):.2f}"])
    return text_table(head, rows, fmt, total)


def to_ical(plan: CampaignPlan) -> bytes:
    """iCalendar (RFC 5545) text of every occultation window and RV visit, times in UTC.

    Parameters
    ----------
    plan : CampaignPlan
        The campaign plan.

    Returns
    -------
    bytes
        The calendar: one event per window or visit (start and end in UTC), its value, highest
        airmass, the predicted window and the caution in the description.
    """
    from datetime import datetime, timezone

    from icalendar import Calendar, Event

    def dt(iso):
        return datetime.fromisoformat(iso.replace("Z", "+00:00")).astimezone(timezone.utc)

    cal = Calendar()
    cal.add("prodid", "-//rhofollow//campaign plan//EN")
    cal.add("version", "2.0")
    cal.add("x-wr-calname", f"rhofollow campaign {plan.site} {plan.start} to {plan.end}")
    for t in plan.targets:
        items = [("occultation", w) for w in t["occultation_windows"]] + [("RV", v) for v in t["rv_visits"]]
        for kind, it in items:
            ev = Event()
            label = f"E{it['epoch']}" if kind == "occultation" else f"phase {it['phase']:.2f}"
            ev.add("summary", f"{t['name']} {kind} ({label})")
            ev.add("dtstart", dt(it["start_utc"]))
            ev.add("dtend", dt(it["end_utc"]))
            ev.add("uid", f"{t['name']}-{kind}-{it['start_utc']}@rhofollow".replace(" ", "_"))
            ev.add("dtstamp", dt(it["start_utc"]))
            desc = [f"site: {plan.site}", f"value: {it['value']}", f"max airmass: {it['airmass_max']}"]
            if kind == "occultation":
                desc.append(f"predicted window (UTC): {it['window_utc'][0]} to {it['window_utc'][1]}, "
                            f"baselines {it['baseline_h']} h each side")
            if it.get("clash"):
                desc.append("clashes with a more valuable item that night")
            desc.append(CAUTION)
            ev.add("description", "\n".join(desc))
            cal.add_component(ev)
    return cal.to_ical()
