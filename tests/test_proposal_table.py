"""``--table md|latex|csv``: the RV request per target for a proposal. Every number of the table is
the JSON's number (the results records for ``plan``, the ``proposal`` block and the per-target
records for ``campaign``), in every format; LaTeX and Markdown cells are escaped.
Consistency of the tool's own outputs with each other, not physics values: common practice, no source."""
from __future__ import annotations

import csv
import html
import io
import json
import re
from pathlib import Path

import pytest

from rhofollow.io.safety import csv_unquote
from rhofollow.report.proposal import COLUMNS, campaign_proposal, proposal_document, proposal_table

ROOT = Path(__file__).resolve().parents[1]
DEMO_CAT = ROOT / "examples" / "hts_candidates.csv"
SITE = ROOT / "site_configs" / "alto_quemado.toml"
KEYS = [k for _, k, _ in COLUMNS]
NDS = {k: nd for _, k, nd in COLUMNS}


def _doc(name="HTS_A&B%1"):
    visits = [{"night": "2026-12-11", "phase": 0.2513}, {"night": "2027-01-04", "phase": 0.6120},
              {"night": "2026-12-20", "phase": 0.7333}]
    rv = {"request": {"visits": 3, "hours": 0.85, "power": 0.8125, "requested": True,
                      "expected_confirmations": 0.6012},
          "exposure_s": 600.0, "visit_h": (600.0 + 420.0) / 3600.0,
          "overheads": {"exposure_s": 600.0, "instrument_overhead_s": 420.0, "site_slew_setup_s": 0.0}}
    t1 = {"name": name, "ok": True, "rank": 1, "rv": rv, "campaign": {"rv_visits": visits},
          "density_ratio": {"q16": 2.1, "q50": 2.437, "q84": 2.8}, "density_ratio_sigma": 4.26,
          "p_ecc_gt_0p1": 0.913}
    rv2 = {"request": {"visits": 7, "hours": 7 * 1500 / 3600.0, "power": 0.9, "requested": True,
                       "expected_confirmations": 0.3},
           "exposure_s": 1080.0, "visit_h": 1500 / 3600.0,
           "overheads": {"exposure_s": 1080.0, "instrument_overhead_s": 420.0, "site_slew_setup_s": 0.0}}
    t2 = {"name": "=cmd()", "ok": True, "rank": 2, "rv": rv2, "campaign": {"rv_visits": []},
          "density_ratio": {"q50": 1.2}, "density_ratio_sigma": None, "p_ecc_gt_0p1": 0.4}
    t3 = {"name": "HTS-C", "ok": True, "rank": 3, "rv": {"request": {"visits": 0, "hours": 0.0,
                                                                      "requested": False}}, "campaign": {}}
    return {"site": "Invented", "fap": 0.01, "instruments": {"rv": "AQ-VEL"}, "targets": [t1, t2, t3],
            "rv_request": {"basis": "threshold", "loss_fraction": 0.25}}


def _unlatex(cell: str) -> str:
    return re.sub(r"\\textbackslash\{\}", "\\\\", re.sub(r"\\([&%$#_{}])", r"\1", cell)) \
        .replace(r"\textasciitilde{}", "~").replace(r"\textasciicircum{}", "^")


def parse(text: str, fmt: str) -> list[list[str]]:
    """Rows of cells (header first) of a table printed by ``proposal_table``."""
    if fmt == "csv":   # cells read back as written, the formula guard undone
        return [[csv_unquote(c) for c in r] for r in csv.reader(io.StringIO(text))]
    if fmt == "md":
        lines = [ln for ln in text.splitlines() if ln.startswith("|") and not ln.startswith("|---")]
        return [[html.unescape(re.sub(r"\\(.)", r"\1", c)).strip() for c in re.split(r"(?<!\\)\|", ln)[1:-1]]
                for ln in lines]
    rows = [ln[:-len(r" \\")] for ln in text.splitlines() if ln.endswith(r" \\")]
    return [[_unlatex(c.strip()) for c in re.split(r"(?<!\\)&", r)] for r in rows]


def _expected(value, nd):
    if isinstance(value, list):
        return " ".join(_expected(v, nd) for v in value)
    if value is None:
        return ""
    return str(value) if nd is None else f"{float(value):.{nd}f}"


def assert_table_is_the_json(rows, targets, total):
    """Each row's cells are the JSON numbers formatted to the column's decimals; the total sums."""
    assert rows[0] == [h for h, _, _ in COLUMNS]
    body, tot = rows[1:-1], rows[-1]
    assert [r[0] for r in body] == [t["name"] for t in targets]
    for r, t in zip(body, targets):
        for cell, key in zip(r, KEYS):
            want = ", ".join(t[key]) if key == "months" else _expected(t.get(key), NDS[key])
            assert cell == want, (t["name"], key)
    assert tot[0] == "Total"
    for key in ("visits", "hours", "expected_confirmations"):
        assert tot[KEYS.index(key)] == _expected(total[key], NDS[key])
        assert float(tot[KEYS.index(key)]) == pytest.approx(sum(t[key] for t in targets),
                                                            abs=0.51 * 10 ** -NDS[key])


@pytest.mark.parametrize("fmt", ["md", "latex", "csv"])
def test_table_numbers_are_the_records(fmt):
    doc = _doc()
    prop = proposal_document(doc)
    rows = parse(proposal_table(prop, fmt), fmt)
    assert_table_is_the_json(rows, prop["targets"], prop["total"])
    # and the proposal numbers are the records' own (requested targets only, rank order)
    t1, t2 = doc["targets"][:2]
    a, b = prop["targets"]
    assert (a["visits"], a["hours"], a["power"]) == (3, 0.85, 0.8125)
    assert a["exposure_s"] == t1["rv"]["exposure_s"] and a["overhead_min"] == 7.0
    assert a["phases"] == [0.25, 0.61, 0.73] and a["months"] == ["December", "January"]
    assert a["density_ratio"] == 2.437 and a["p_ecc_gt_0p1"] == 0.913
    assert b["name"] == t2["name"] and b["hours"] == t2["rv"]["request"]["hours"]
    assert prop["total"]["visits"] == 10 and prop["total"]["hours"] == pytest.approx(0.85 + 7 * 1500 / 3600)


def test_latex_cells_are_escaped():
    tex = proposal_table(proposal_document(_doc("A_b&c%d$e#f{g}h~i^j\\k")), "latex")
    row = next(ln for ln in tex.splitlines() if ln.startswith("A"))
    assert row.startswith(r"A\_b\&c\%d\$e\#f\{g\}h\textasciitilde{}i\textasciicircum{}j\textbackslash{}k & ")
    # compile-safe: outside escapes no special character is left, and every row has one & per column gap
    body = [ln for ln in tex.splitlines() if ln.endswith(r" \\")]
    for ln in body:
        bare = re.sub(r"\\(textbackslash|textasciitilde|textasciicircum)\{\}|\\[&%$#_{}]", "", ln[:-3])
        assert not re.search(r"[%$#_{}~^\\]", bare), ln
        assert len(re.findall(r"(?<!\\)&", ln)) == len(COLUMNS) - 1
    assert tex.startswith(r"\begin{tabular}{l" + "r" * (len(COLUMNS) - 1) + "}")
    assert tex.rstrip().endswith(r"\end{tabular}")


def test_markdown_and_csv_cells_are_guarded():
    prop = proposal_document(_doc("a|b*c"))
    md = proposal_table(prop, "md")
    assert r"a\|b\*c" in md
    raw = list(csv.reader(io.StringIO(proposal_table(prop, "csv"))))
    assert raw[2][0] == "'=cmd()"   # no spreadsheet formula
    with pytest.raises(ValueError, match="unknown table format"):
        proposal_table(prop, "html")


def test_no_requested_target_gives_a_zero_total():
    doc = _doc()
    doc["targets"] = doc["targets"][2:]
    rows = parse(proposal_table(proposal_document(doc), "csv"), "csv")
    assert len(rows) == 2 and rows[1][0] == "Total" and rows[1][KEYS.index("hours")] == "0.00"


# ---------------------------------------------------------------- the commands

def _catalogue(tmp_path, names=("HTS-115", "HTS-119")) -> Path:
    lines = [ln for ln in DEMO_CAT.read_text(encoding="utf-8").splitlines() if not ln.startswith("#")]
    keep = [lines[0]] + [ln for ln in lines[1:] if ln.split(",")[0] in names]
    p = tmp_path / "cat.csv"
    p.write_text("\n".join(keep) + "\n", encoding="utf-8")
    return p


@pytest.fixture(scope="module")
def campaign_run(tmp_path_factory):
    from rhofollow.cli import main

    tmp = tmp_path_factory.mktemp("camp")
    out = tmp / "camp.json"
    # ten nights: at least five visits (the eccentric model's parameters and one more) must fit
    rc = main(["campaign", str(_catalogue(tmp)), "--site", str(SITE), "--start", "2026-12-10",
               "--end", "2026-12-19", "--samples", "300", "--json", str(out), "--table", "csv"])
    assert rc == 0
    return json.loads(out.read_text())


@pytest.mark.parametrize("fmt", ["md", "latex", "csv"])
def test_campaign_table_is_its_json(campaign_run, capsys, fmt):
    d = campaign_run
    prop = d["proposal"]
    assert prop["targets"], "the two invented targets are requested over ten nights"
    assert_table_is_the_json(parse(proposal_table(prop, fmt), fmt), prop["targets"], prop["total"])
    by_name = {t["name"]: t for t in d["targets"]}
    for t in prop["targets"]:
        rec = by_name[t["name"]]
        req = rec["rv_request"]
        assert (t["visits"], t["hours"], t["power"]) == (req["visits"], req["hours"], req["power"])
        vis = rec["rv_visits"]
        assert t["phases"] == sorted(round(v["phase"], 2) for v in vis)
        assert t["exposure_s"] == vis[0]["exposure_s"] and t["overhead_min"] == vis[0]["overhead_s"] / 60.0
    assert prop["total"]["hours"] == pytest.approx(d["rv_request"]["hours_requested"]["AQ-VEL"], abs=1e-3)


def test_campaign_prints_the_csv_table(tmp_path, capsys):
    # the printed table (the command's own output) is the JSON's proposal block
    from rhofollow.cli import main

    out = tmp_path / "c.json"
    rc = main(["campaign", str(_catalogue(tmp_path, ("HTS-119",))), "--site", str(SITE), "--start",
               "2026-12-10", "--end", "2026-12-19", "--samples", "300", "--json", str(out), "--table", "latex"])
    assert rc == 0
    printed = capsys.readouterr().out
    prop = json.loads(out.read_text())["proposal"]
    tex = printed[printed.index(r"\begin{tabular}"):printed.index(r"\end{tabular}") + len(r"\end{tabular}")] + "\n"
    assert tex == proposal_table(prop, "latex")
    assert_table_is_the_json(parse(tex, "latex"), prop["targets"], prop["total"])
    # then the hours per instrument (occultation windows included), in the same format
    second = printed[printed.index(r"\end{tabular}") + len(r"\end{tabular}"):]
    assert r"\begin{tabular}" in second and "Occultation windows" in second


def test_plan_writes_the_table_into_the_report(tmp_path, capsys):
    from rhofollow.cli import main

    out = tmp_path / "report"
    rc = main(["plan", str(_catalogue(tmp_path)), "--site", str(SITE), "--start", "2026-12-10", "--end",
               "2026-12-19", "--out", str(out), "--samples", "500", "--sims", "100", "--plot-targets", "1",
               "--table", "md"])
    assert rc in (0, 1)
    md = (out / "proposal_table.md").read_text(encoding="utf-8")
    assert md in capsys.readouterr().out
    doc = json.loads((out / "results.json").read_text())
    prop = proposal_document(doc)
    assert prop["targets"]
    assert_table_is_the_json(parse(md, "md"), prop["targets"], prop["total"])
    recs = {t["name"]: t for t in doc["targets"]}
    for t in prop["targets"]:
        req = recs[t["name"]]["rv"]["request"]
        assert (t["visits"], t["hours"], t["power"]) == (req["visits"], req["hours"], req["power"])
        assert t["p_ecc_gt_0p1"] == recs[t["name"]]["p_ecc_gt_0p1"]
        assert t["density_ratio"] == recs[t["name"]]["density_ratio"]["q50"]
    # an earlier report with a table is replaced as a whole by a run without one
    rc = main(["plan", str(_catalogue(tmp_path)), "--site", str(SITE), "--start", "2026-12-10", "--end",
               "2026-12-12", "--out", str(out), "--samples", "500", "--sims", "100", "--plot-targets", "1"])
    assert rc in (0, 1) and not (out / "proposal_table.md").exists()


def test_campaign_proposal_joins_the_records():
    class A:
        def __init__(self, name, record):
            self.name, self.record = name, record

    doc = _doc()
    t1 = doc["targets"][0]
    camp = {"instruments": {"rv": "AQ-VEL"}, "rv_request": doc["rv_request"],
            "targets": [{"name": t1["name"], "ok": True, "rv_visits": t1["campaign"]["rv_visits"]}]}
    rec = {k: t1[k] for k in ("density_ratio", "density_ratio_sigma", "p_ecc_gt_0p1")}
    prop = campaign_proposal(camp, [A(t1["name"], rec)], [{"name": t1["name"], "rv": t1["rv"]}], 0.01)
    assert prop == {"targets": proposal_document(dict(doc, targets=[t1]))["targets"],
                    "total": proposal_document(dict(doc, targets=[t1]))["total"]}
