"""The first-night table of summary.md / summary.html gives the site's local time beside UTC."""
from rhofollow.report.summary import first_night_table, html_summary, markdown_summary


def _night(day, tz="America/Santiago"):
    return {"date": day, "timezone": tz, "blocks": [
        {"start_utc": f"{day}T01:30:00Z", "end_utc": f"{day}T03:10:00Z", "name": "HTS-1", "kind": "rv",
         "value": 0.5, "airmass_max": 1.2}]}


def test_local_time_follows_the_site_time_zone_and_its_daylight_saving():
    # offsets from the IANA time-zone database through Python's zoneinfo (a general-purpose library):
    # Chile keeps UTC-3 in the southern summer and UTC-4 in winter
    head, rows = first_night_table(_night("2026-12-11"))
    assert head[:2] == ["local (-03, America/Santiago)", "UTC"] and rows[0][:2] == ["22:30-00:10", "01:30-03:10"]
    head, rows = first_night_table(_night("2026-07-01"))
    assert head[0] == "local (-04, America/Santiago)" and rows[0][0] == "21:30-23:10"


def test_without_a_time_zone_the_table_keeps_utc_only():
    head, rows = first_night_table(_night("2026-12-11", tz=None))
    assert head[0] == "UTC" and len(rows[0]) == len(head) == 5
    head, _ = first_night_table(_night("2026-12-11", tz="Not/AZone"))
    assert head[0] == "UTC"


def test_both_summaries_carry_the_local_column():
    doc = {"site": "S", "start": "2026-12-11", "end": "2026-12-12", "targets": [], "hours_total": {}}
    md = markdown_summary(doc, {}, _night("2026-12-11"))
    page = html_summary(doc, {}, _night("2026-12-11"))
    assert "| local (-03, America/Santiago) | UTC |" in md and "22:30-00:10" in md
    assert "<th>local (-03, America/Santiago)</th>" in page and "22:30-00:10" in page
