"""The proposal paragraph per requested RV target: its numbers are the records' numbers.
Consistency of the tool's own outputs with each other, not physics values: common practice, no source."""
from __future__ import annotations

import re

from rhofollow.report.summary import html_summary, markdown_summary, proposal_entries


def _doc():
    visits = [{"night": "2026-12-11", "phase": 0.2513}, {"night": "2027-01-04", "phase": 0.6120},
              {"night": "2026-12-20", "phase": 0.7333}]
    rv = {"request": {"visits": 3, "hours": 1.25, "power": 0.8125, "requested": True,
                      "expected_confirmations": 0.6012},
          "exposure_s": 600.0, "visit_h": (600.0 + 420.0) / 3600.0,
          "overheads": {"exposure_s": 600.0, "instrument_overhead_s": 420.0, "site_slew_setup_s": 0.0}}
    t1 = {"name": "HTS-A", "ok": True, "rank": 1, "rv": rv, "campaign": {"rv_visits": visits},
          "density_ratio": {"q16": 2.1, "q50": 2.437, "q84": 2.8}, "density_ratio_sigma": 4.26, "p_ecc_gt_0p1": 0.913}
    t2 = {"name": "HTS-B", "ok": True, "rank": 2, "rv": {"request": {"visits": 0, "hours": 0.0, "requested": False}},
          "campaign": {}}
    return {"site": "Invented", "start": "2026-12-03", "end": "2027-01-31", "fap": 0.01,
            "instruments": {"rv": "AQ-VEL"}, "targets": [t1, t2], "hours_total": {"AQ-VEL": 1.25},
            "rv_request": {"basis": "threshold", "min_gain_per_hour": 0.01, "loss_fraction": 0.25,
                           "budgets_h": {}, "not_requested": [{"name": "HTS-B", "reason": "costly"}]}}


def test_paragraph_numbers_equal_the_records():
    doc = _doc()
    (p,) = proposal_entries(doc)
    t, num = doc["targets"][0], p["numbers"]
    req = t["rv"]["request"]
    assert (num["visits"], num["hours"], num["power"]) == (req["visits"], req["hours"], req["power"])
    assert num["exposure_s"] == t["rv"]["exposure_s"] and num["overhead_min"] == 7.0
    assert num["phases"] == [0.25, 0.61, 0.73] and num["months"] == ["December", "January"]
    assert num["density_ratio"] == 2.437 and num["p_ecc_gt_0p1"] == 0.913
    text = p["text"]
    for s in ("3 RV visits of 17 min", "600 s exposure + 7 min overhead", "1.2 h in total",
              "phases 0.25, 0.61, 0.73 in December, January", "81 % chance", "false-alarm probability of 1 %",
              "25 % of visits assumed lost", "2.44 times", "(4.3σ)", "P(e > 0.1) = 0.91",
              "Expected confirmed eccentric orbits: 0.60"):
        assert s in text, s
    # every number in the text is one of the stated numbers (formatted)
    stated = {f"{v:.0f}" for v in (3, 17, 600, 7, 81, 1, 25)} | {"1.2", "0.25", "0.61", "0.73", "2.44",
                                                                     "4.3", "0.1", "0.91", "0.60", "0"}
    assert set(re.findall(r"\d+(?:\.\d+)?", text.replace("HTS-A", ""))) <= stated


def test_summaries_carry_the_paragraphs_and_the_unrequested():
    doc = _doc()
    (p,) = proposal_entries(doc)
    md = markdown_summary(dict(doc, assumptions=[], cautions=[]), {}, None)
    assert "RV request: the case per target" in md and "HTS-B: costly" in md
    assert "Total RV request: 1.2 h for 1 target(s)" in md
    page = html_summary(dict(doc, assumptions=[], cautions=[]), {}, None)
    assert "1.2 h in total" in page and "costly" in page
    assert p["text"].split(":")[0] == "HTS-A"
