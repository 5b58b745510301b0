"""End-to-end tests of ``rhofollow plan`` / ``rhofollow demo``: the report folder, its contracts,
determinism across worker counts, and atomic writing."""
import base64
import csv
import io
import json
import os
from pathlib import Path

import pytest

from rhofollow.cli import main
from rhofollow.report import files as report_files

ROOT = Path(__file__).resolve().parents[1]
DEMO_CAT = ROOT / "examples" / "hts_candidates.csv"
SITE = ROOT / "site_configs" / "alto_quemado.toml"
QKEYS = {"q025", "q16", "q50", "q84", "q975"}
FAST = ["--samples", "2000", "--sims", "100", "--plot-targets", "2", "--seed", "7"]
DATES = ["--start", "2026-12-10", "--end", "2026-12-12"]


def _subset(tmp_path, names=("HTS-101", "HTS-103", "HTS-104", "HTS-107")) -> Path:
    lines = DEMO_CAT.read_text().splitlines()
    keep = [lines[0]] + [ln for ln in lines[1:] if ln.split(",")[0] in names]
    p = tmp_path / "subset.csv"
    p.write_text("\n".join(keep) + "\n")
    return p


def _check_quantiles(obj, where):
    """Every dict with a q50 key must be a full quantile object."""
    if isinstance(obj, dict):
        if "q50" in obj:
            assert set(obj) == QKEYS, f"{where}: quantile object keys {sorted(obj)}"
        for k, v in obj.items():
            _check_quantiles(v, f"{where}.{k}")
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            _check_quantiles(v, f"{where}[{i}]")


@pytest.fixture(scope="module")
def demo_report(tmp_path_factory):
    """The demo scenario (no catalogue given) over three evenings, fast settings."""
    out = tmp_path_factory.mktemp("demo") / "report"
    rc = main(["plan", "--out", str(out), *DATES, *FAST])
    assert rc == 0
    return out


def test_demo_writes_every_promised_file(demo_report):
    for name in ("summary.md", "summary.html", "results.json", "results.ecsv", "results.csv", "windows.ics",
                 "night.json", "campaign.json"):
        assert (demo_report / name).stat().st_size > 0, name
    n_targets = len(DEMO_CAT.read_text().splitlines()) - 1
    assert len(list((demo_report / "samples").glob("*.ecsv"))) == n_targets
    pngs = {p.name for p in (demo_report / "plots").glob("*.png")}
    assert {"overview.png", "campaign_calendar.png", "night_altitude.png"} <= pngs
    for kind in ("density", "ecc_omega", "occultation", "rv"):
        assert len([p for p in pngs if p.endswith(f"_{kind}.png")]) == 2, kind
    for p in (demo_report / "plots").glob("*.png"):
        assert p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert not list(demo_report.rglob("*.part")), "temporary files left behind"


def test_results_json_contract(demo_report):
    doc = json.loads((demo_report / "results.json").read_text())
    assert doc["command"] == "plan" and doc["targets"]
    assert any("90° − ω" in a for a in doc["assumptions"])
    assert any("override" in c for c in doc["cautions"])
    ranks = []
    for t in doc["targets"]:
        assert {"name", "ok", "errors", "warnings"} <= set(t)
        assert isinstance(t["errors"], list) and isinstance(t["warnings"], list)
        if t["ok"]:
            for key in ("rho_circ_cgs", "rho_star_cgs", "density_ratio", "ecc", "omega_deg"):
                assert set(t[key]) == QKEYS
            assert 0.0 <= t["priority"] <= 1.0
            ranks.append(t["rank"])
            assert set(t["occultation"]["occ_phase"]) == QKEYS
            assert set(t["rv"]["k_ms"]) == QKEYS
        _check_quantiles(t, t["name"])
    assert ranks == list(range(1, len(ranks) + 1)), "targets are listed in rank order"
    prios = [t["priority"] for t in doc["targets"] if t["ok"]]
    assert prios == sorted(prios, reverse=True)


def test_night_and_campaign_json_contract(demo_report):
    night = json.loads((demo_report / "night.json").read_text())
    assert {"site", "night_start_utc", "night_end_utc", "blocks", "skipped"} <= set(night)
    assert night["date"] == "2026-12-10"
    for b in night["blocks"]:
        assert {"name", "kind", "start_utc", "end_utc", "value", "airmass_max"} <= set(b)
        assert b["kind"] in ("occultation", "rv")
    camp = json.loads((demo_report / "campaign.json").read_text())
    assert camp["start"] == "2026-12-10" and camp["end"] == "2026-12-12"
    for t in camp["targets"]:
        assert {"name", "occultation_windows", "rv_visits", "hours"} <= set(t)
    ics = (demo_report / "windows.ics").read_text()
    assert ics.startswith("BEGIN:VCALENDAR")


def test_tables_agree_with_json(demo_report):
    doc = json.loads((demo_report / "results.json").read_text())
    rows = list(csv.DictReader(io.StringIO((demo_report / "results.csv").read_text())))
    assert [r["name"] for r in rows] == [t["name"] for t in doc["targets"]]
    first = next(t for t in doc["targets"] if t["ok"])
    assert float(rows[0]["ecc_q50"]) == pytest.approx(first["ecc"]["q50"])
    from astropy.table import Table

    t = Table.read(demo_report / "results.ecsv", format="ascii.ecsv")
    assert str(t["rho_star_cgs_q50"].unit) == "g / cm3"
    assert t.meta["seed"] == 7


def test_summary_html_embeds_the_figures(demo_report):
    page = (demo_report / "summary.html").read_text()
    imgs = page.count("src='data:image/png;base64,")
    assert imgs == len(list((demo_report / "plots").glob("*.png")))
    start = page.index("data:image/png;base64,") + len("data:image/png;base64,")
    assert base64.b64decode(page[start:page.index("'", start)])[:4] == b"\x89PNG"
    assert "Assumptions" in page and "advisory" in page
    md = (demo_report / "summary.md").read_text()
    assert "plots/overview.png" in md and "## Cautions" in md


def test_same_seed_one_and_two_workers_identical(tmp_path):
    cat = _subset(tmp_path)
    outs = []
    for w in ("1", "2"):
        out = tmp_path / f"w{w}"
        assert main(["plan", str(cat), "--site", str(SITE), *DATES, "--out", str(out), "--workers", w,
                     *FAST]) == 0
        outs.append(out)
    for name in ("results.json", "results.csv", "night.json", "campaign.json", "windows.ics"):
        assert (outs[0] / name).read_bytes() == (outs[1] / name).read_bytes(), name
    for p in (outs[0] / "samples").glob("*.ecsv"):
        assert p.read_bytes() == (outs[1] / "samples" / p.name).read_bytes(), p.name
    # the per-target figures come from a process pool with 2 workers: same files, bytes and order
    pngs = sorted(p.name for p in (outs[0] / "plots").glob("*.png"))
    assert len(pngs) == 3 + 4 * 2 and pngs == sorted(p.name for p in (outs[1] / "plots").glob("*.png"))
    for name in pngs:
        assert (outs[0] / "plots" / name).read_bytes() == (outs[1] / "plots" / name).read_bytes(), name
    for name in ("summary.md", "summary.html"):
        assert (outs[0] / name).read_bytes() == (outs[1] / name).read_bytes(), name


def test_interrupted_run_leaves_no_complete_looking_file(tmp_path, monkeypatch):
    cat = _subset(tmp_path, ("HTS-103", "HTS-104"))
    out = tmp_path / "report"
    from rhofollow.report import plots

    def boom(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr(plots, "rv_figure", boom)
    rc = main(["plan", str(cat), "--site", str(SITE), *DATES, "--out", str(out), *FAST])
    assert rc == 130
    # the report is built in a temporary folder and swapped in whole: nothing of it is left
    assert not out.exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".report.")]
    assert not list(tmp_path.rglob("*.part"))


def test_atomic_write_interrupted_midway(tmp_path, monkeypatch):
    target = tmp_path / "x.png"
    real_fdopen = os.fdopen

    class Half:
        def __init__(self, fh):
            self.fh = fh

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self.fh.close()
            return False

        def write(self, data):
            self.fh.write(data[: len(data) // 2])
            raise OSError("disk full")

    monkeypatch.setattr(report_files.os, "fdopen", lambda fd, mode: Half(real_fdopen(fd, mode)))
    with pytest.raises(OSError):
        report_files.atomic_write_bytes(target, b"0123456789" * 10)
    assert not target.exists()
    assert list(tmp_path.iterdir()) == []


def test_plan_needs_site_and_dates_with_a_catalogue(tmp_path, capsys):
    assert main(["plan", str(DEMO_CAT), "--out", str(tmp_path / "r")]) == 2
    err = capsys.readouterr().err
    assert "--site" in err and "--start" in err
    assert main(["plan", str(DEMO_CAT), "--site", str(SITE), "--start", "2026-12-10", "--end", "2026-12-01",
                 "--out", str(tmp_path / "r")]) == 2
    assert "before --start" in capsys.readouterr().err
    assert not (tmp_path / "r" / "summary.md").exists()
