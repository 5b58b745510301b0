"""iCalendar (RFC 5545) export of occultation observing windows, with the icalendar package.

One VEVENT per window piece (an event with a two-humped timing distribution gets two). Each
event carries the target name, the epoch, the window in UTC, the mid-time quantiles (UTC and
BJD_TDB), the occultation probability and the caution text. The output is deterministic: UIDs
come from the target, epoch and piece, and DTSTAMP is the start of the requested range.
"""
from __future__ import annotations

from datetime import datetime, timezone

__all__ = ["windows_to_ics", "write_ics"]

_PRODID = "-//rhofollow//occultation windows//EN"


def _dt(iso: str) -> datetime:
    return datetime.strptime(iso.rstrip("Z"), "%Y-%m-%dT%H:%M:%S").replace(tzinfo=timezone.utc)


def windows_to_ics(result: dict) -> bytes:
    """iCalendar bytes for the ``result`` of :func:`rhofollow.stages.occultations.predict_occultations`.

    Targets without UTC windows (no coordinates) are skipped.

    Parameters
    ----------
    result : dict
        The occultation result: ``start_utc`` (ISO time, UTC), ``caution`` and ``targets``, each with
        its ``events`` (``window_utc`` pieces as ISO UTC pairs, ``mid_bjd_tdb`` quantiles in BJD_TDB days).

    Returns
    -------
    bytes
        The calendar (RFC 5545), one VEVENT per window piece.
    """
    from icalendar import Calendar, Event

    from rhofollow.io.safety import file_stem

    cal = Calendar()
    cal.add("prodid", _PRODID)
    cal.add("version", "2.0")
    cal.add("x-wr-calname", "Occultation windows")
    stamp = _dt(result["start_utc"][:19])
    caution = result.get("caution", "")
    for rec in result.get("targets", []):
        for ev in rec.get("events", []):
            if "window_utc" not in ev:
                continue
            q = ev["mid_bjd_tdb"]
            for j, (a, b) in enumerate(ev["window_utc"]):
                e = Event()
                slug = file_stem(rec["name"])   # unique per exact name (a/b and a-b differ)
                e.add("uid", f"{slug}-occ-{ev['epoch']}-{j}@rhofollow")
                e.add("dtstamp", stamp)
                e.add("dtstart", _dt(a))
                e.add("dtend", _dt(b))
                n_parts = len(ev["window_utc"])
                part = f" (part {j + 1} of {n_parts})" if n_parts > 1 else ""
                e.add("summary", f"{rec['name']} occultation window, epoch {ev['epoch']}{part}")
                lines = [
                    f"Target: {rec['name']}",
                    f"Epoch: {ev['epoch']} (occultations after the reference transit)",
                    f"Window (UTC): {a} to {b}",
                    f"Mid-time median (UTC): {ev.get('mid_utc', '?')}",
                    "Mid-time BJD_TDB quantiles 2.5/16/50/84/97.5 %: "
                    + ", ".join(f"{q[k]:.5f}" for k in ("q025", "q16", "q50", "q84", "q975")),
                    f"Probability that the occultation happens: {rec.get('p_occultation', 0):.3f}",
                ]
                depth = rec.get("depth_ppm", {}).get("q50")
                if depth is not None:
                    lines.append(f"Depth median: {depth:.0f} ppm")
                lines.append(caution)
                e.add("description", "\n".join(lines))
                e.add("categories", ["occultation"])
                cal.add_component(e)
    return cal.to_ical()


def write_ics(path, result: dict):
    """Write the windows of ``result`` to ``path`` atomically.

    Parameters
    ----------
    path : str or path-like
        The ``.ics`` file to write.
    result : dict
        The occultation result, as for :func:`windows_to_ics`.

    Returns
    -------
    pathlib.Path
        ``path``, written.
    """
    from rhofollow.io.atomic import atomic_write_text

    return atomic_write_text(path, windows_to_ics(result).decode("utf-8"))
