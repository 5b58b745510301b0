"""Hostile and careless inputs against the output side: CSV formula injection, file names from
target names, the report folder swap, file modes, a full disk, the same measurement twice,
Markdown escaping and a bad Moon limit. Common practice, no source (CSV-injection guidance:
prefix a single quote to text cells starting with = + - @ tab CR)."""
from __future__ import annotations

import csv
import errno
import io
import os
import sqlite3
import stat
from pathlib import Path

import pytest

from rhofollow.cli import main
from rhofollow.io import atomic
from rhofollow.io.ledger import DuplicateMeasurementError, Ledger, LedgerError
from rhofollow.io.safety import MAX_STEM_BYTES, csv_cell, csv_text, csv_unquote, file_stem, md_text
from rhofollow.report import folder
from rhofollow.report.tables import rows_to_csv

ROOT = Path(__file__).resolve().parents[1]
EVIL = ["=HYPERLINK(\"http://x\",\"y\")", "+cmd|' /C calc'!A0", "-2+3", "@SUM(A1)", "\tfoo", "\rbar", "'=x"]


@pytest.mark.parametrize("text", EVIL)
def test_formula_cells_are_quoted_and_round_trip(text):
    cell = csv_cell(text)
    assert cell.startswith("'") and csv_unquote(cell) == text


def test_numbers_stay_numbers():
    assert csv_cell(-3.2) == -3.2 and csv_cell("-3.2") == "-3.2" and csv_cell("+1e-5") == "+1e-5"
    assert csv_cell(float("nan")) == "" and csv_cell(None) == "" and csv_cell("HTS-103") == "HTS-103"


def test_results_csv_neutralises_names():
    text = rows_to_csv([{"name": n, "ecc_q50": -0.5} for n in EVIL])
    rows = list(csv.DictReader(io.StringIO(text)))
    assert all(r["name"].startswith("'") for r in rows)
    assert [float(r["ecc_q50"]) for r in rows] == [-0.5] * len(EVIL)


def test_campaign_csv_table_neutralises_names():
    from rhofollow.planning.campaign import hours_table

    class Plan:
        instruments = {"rv": "AQ-Vel"}
        targets = [{"name": "=1+1", "occultation_windows": [], "rv_visits": [], "hours": {"AQ-Vel": 1.0}}]
        hours_total = {"AQ-Vel": 1.0}

    rows = list(csv.reader(io.StringIO(hours_table(Plan(), "csv"))))
    assert rows[1][0] == "'=1+1" and rows[1][3] == "1.00"
    md = hours_table(Plan(), "md")
    assert "| =1+1 |" in md


def test_ledger_export_neutralises_and_import_restores(tmp_path):
    with Ledger(tmp_path / "a.sqlite") as lg:
        lg.add_occultation("=HYPERLINK(1)", mid_bjd_tdb=2461157.69, mid_err_min=4.0, instrument="@cam")
        lg.export(tmp_path / "out")
        content = lg.content()
    text = (tmp_path / "out" / "occultations.csv").read_text()
    assert "\n'=HYPERLINK(1)," in text and ",'@cam" in text
    with Ledger(tmp_path / "b.sqlite") as lg:
        lg.import_folder(tmp_path / "out")
        assert lg.content() == content


def test_file_stems_unique_and_bounded():
    names = ["a/b", "a-b", "a?b", "a b", "a:b", "a*b", "a\\b", "A-B", "a_b", "a.b", "..a-b"]
    stems = {file_stem(n) for n in names}
    assert len(stems) == 11
    long = file_stem("x" * 300)
    assert len(long.encode()) <= MAX_STEM_BYTES and "/" not in long
    assert not file_stem("..").startswith(".") and file_stem("ü" * 300)


def test_plan_with_long_and_colliding_names(tmp_path):
    lines = (ROOT / "examples" / "hts_candidates.csv").read_text().splitlines()
    head, row = lines[0], next(ln for ln in lines[1:] if ln.startswith("HTS-103,"))
    names = ["a/b", "a-b", "a?b", "y" * 40, "=cmd|x", "<script>alert(1)</script>", "p|q"]
    cat = tmp_path / "c.csv"
    cat.write_text("\n".join([head] + ['"' + n.replace('"', '""') + '"' + row[len("HTS-103"):] for n in names]) + "\n")
    out = tmp_path / "rep"
    rc = main(["plan", str(cat), "--site", str(ROOT / "site_configs" / "alto_quemado.toml"),
               "--start", "2026-12-10", "--end", "2026-12-11", "--out", str(out), "--samples", "600",
               "--sims", "100", "--plot-targets", "0", "--seed", "3"])
    assert rc == 0
    assert len(list((out / "samples").glob("*.ecsv"))) == len(names)
    assert len(list((out / "plots").glob("*_rv.png"))) == len(names)
    md = (out / "summary.md").read_text()
    assert "<script>" not in md and "&lt;script&gt;" in md and "p\\|q" in md
    names_csv = [r["name"] for r in csv.DictReader(io.StringIO((out / "results.csv").read_text()))]
    assert "'=cmd|x" in names_csv


def test_md_text_escapes_html_and_pipes():
    assert md_text("<script>x</script>|*a*\nb") == "&lt;script&gt;x&lt;/script&gt;\\|\\*a\\* b"


def _fake_files(names, fail_after=None):
    def write(result, out, **kw):
        files = []
        for i, n in enumerate(names):
            if fail_after is not None and i == fail_after:
                raise OSError(errno.ENOSPC, "No space left on device")
            p = Path(out) / ("samples" if n.endswith(".ecsv") else "") / n
            files.append(atomic.atomic_write_text(p, n))
        return {"files": files, "doc": {}, "ranking": {}}
    return write


def test_report_folder_swapped_whole(tmp_path, monkeypatch):
    out = tmp_path / "rep"
    monkeypatch.setattr(folder, "write_report_files", _fake_files(["summary.md", "a.ecsv"]))
    folder.write_report(None, out)
    monkeypatch.setattr(folder, "write_report_files", _fake_files(["summary.md", "b.ecsv"]))
    w = folder.write_report(None, out)
    assert sorted(p.name for p in (out / "samples").iterdir()) == ["b.ecsv"], "stale file kept"
    assert all(str(f).startswith(str(out.absolute())) for f in w["files"])
    # interrupted (full disk) run: the earlier complete folder stays, no half folder, truthful error
    monkeypatch.setattr(folder, "write_report_files", _fake_files(["results.json", "c.ecsv"], fail_after=1))
    with pytest.raises(atomic.NoSpaceError, match="no space left on .*nothing was written"):
        folder.write_report(None, out)
    assert sorted(p.name for p in (out / "samples").iterdir()) == ["b.ecsv"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["rep"]


def test_report_folder_refuses_a_foreign_folder(tmp_path):
    (tmp_path / "mine.txt").write_text("keep me")
    with pytest.raises(folder.ReportFolderError, match="not part of a report"):
        folder.check_report_folder(tmp_path)


def test_atomic_write_honours_umask(tmp_path):
    old = os.umask(0o022)
    try:
        p = atomic.atomic_write_text(tmp_path / "x.txt", "x")
        assert stat.S_IMODE(p.stat().st_mode) == 0o644
        os.umask(0o077)
        q = atomic.atomic_write_text(tmp_path / "y.txt", "y")
        assert stat.S_IMODE(q.stat().st_mode) == 0o600
    finally:
        os.umask(old)


def test_atomic_write_full_disk_named(tmp_path, monkeypatch):
    def full(*a):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(atomic.os, "replace", full)
    with pytest.raises(atomic.NoSpaceError, match=r"no space left on .*x\.txt; nothing was written"):
        atomic.atomic_write_text(tmp_path / "x.txt", "x")
    assert list(tmp_path.iterdir()) == []


def test_ledger_full_disk_named(tmp_path, monkeypatch):
    db = tmp_path / "l.sqlite"
    with Ledger(db) as lg:
        lg.add_occultation("T-1", mid_bjd_tdb=2461000.5, mid_err_min=3.0)
        before = lg.content()

        def full(self, *a, **k):
            self._conn.execute("ROLLBACK")      # what SQLite does itself on SQLITE_FULL
            raise sqlite3.OperationalError("database or disk is full")

        monkeypatch.setattr(Ledger, "_insert", full)
        with pytest.raises(LedgerError, match="no space left on .*nothing was written"):
            lg.add_occultation("T-2", mid_bjd_tdb=2461001.5, mid_err_min=3.0)
        monkeypatch.undo()
        assert lg.content() == before


def test_same_occultation_twice_is_refused(tmp_path, capsys):
    db = tmp_path / "l.sqlite"
    f = ROOT / "examples" / "ledger" / "occultations_heliotrope.csv"
    assert main(["log", "occultation", str(f), "--ledger", str(db)]) == 0
    entry = ["log", "occultation", "--target", "HTS-103", "--mid", "2461157.692", "--err-min", "4.5",
             "--ledger", str(db)]
    capsys.readouterr()
    assert main(entry) == 2
    err = " ".join(capsys.readouterr().err.split())
    assert "same measurement" in err and "--replace" in err and "--keep-both" in err
    with Ledger(db) as lg:
        assert len([o for o in lg.occultation_timings("HTS-103") if o.kind == "detection"]) == 1
    assert main(entry + ["--replace"]) == 0
    with Ledger(db) as lg:
        occ = [o for o in lg.occultation_timings("HTS-103") if o.kind == "detection"]
        assert len(occ) == 1 and occ[0].mid_bjd_tdb == 2461157.692
    with Ledger(tmp_path / "k.sqlite") as lg:
        lg.ingest_occultation_file(f)
        with pytest.raises(DuplicateMeasurementError):
            lg.add_occultation("HTS-103", mid_bjd_tdb=2461157.692, mid_err_min=4.5)
        lg.add_occultation("HTS-103", mid_bjd_tdb=2461157.692, mid_err_min=4.5, duplicates="keep_both")
        assert len([o for o in lg.occultation_timings("HTS-103") if o.kind == "detection"]) == 2


def test_same_rv_twice_is_refused_and_rv_ingest_summarised(tmp_path, capsys):
    db = tmp_path / "l.sqlite"
    a = tmp_path / "a.csv"
    a.write_text("target,bjd_tdb,rv_ms,rv_err_ms,instrument\n"
                 + "".join(f"T{i % 3},{2461000.0 + i:.5f},1.0,2.0,S1\n" for i in range(30)))
    b = tmp_path / "b.csv"
    b.write_text("target,bjd_tdb,rv_ms,rv_err_ms,instrument\nT0,2461000.00020,1.1,2.0,S2\n")
    assert main(["log", "rv", str(a), "--ledger", str(db)]) == 0
    out = capsys.readouterr().out
    assert "added 30 RVs for 3 targets" in " ".join(out.split()) and "+ rv_measurements" not in out
    assert main(["log", "rv", str(b), "--ledger", str(db)]) == 2
    assert "same measurement" in capsys.readouterr().err
    assert main(["log", "rv", str(b), "--ledger", str(db), "--keep-both"]) == 0


def test_bad_moon_limit_gives_one_message(tmp_path):
    from rhofollow.planning.site import ConfigError, load_site

    src = (ROOT / "site_configs" / "alto_quemado.toml").read_text().splitlines()
    text = "\n".join("min_moon_separation_deg = -30" if ln.startswith("min_moon_separation_deg") else ln
                     for ln in src)
    p = tmp_path / "s.toml"
    p.write_text(text)
    with pytest.raises(ConfigError) as ei:
        load_site(p, check_files=False)
    msg = str(ei.value)
    assert "min_moon_separation_deg" in msg and "-30" in msg and "0.0 to 180.0" in msg
    assert "min_moon_separation_new_deg" not in msg


# One table renderer for every proposal table (io.safety.text_table). LaTeX's ten special characters
# are those of the LaTeX manual's "special characters" list (common practice, no source).
_LATEX_SPECIALS = set("\\&%$#_{}~^")


def _unescape_latex(cell: str) -> str:
    for esc, ch in ((r"\textbackslash{}", "\\"), (r"\textasciitilde{}", "~"), (r"\textasciicircum{}", "^")):
        cell = cell.replace(esc, ch)
    for ch in "&%$#_{}":
        cell = cell.replace("\\" + ch, ch)
    return cell


from hypothesis import given, settings, strategies as st  # noqa: E402

from rhofollow.io.safety import latex_text, text_table  # noqa: E402

_cells = st.text(alphabet=st.characters(codec="utf-8", exclude_categories=("Cs", "Cc")), max_size=12)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.lists(_cells, min_size=3, max_size=3), min_size=1, max_size=4))
def test_text_table_keeps_every_cell_in_every_format(rows):
    head = ["Target", "a & b", "100% _x_"]
    total = ["Total", "1", "2"]
    # CSV: the cells read back exactly (after the formula quote is undone)
    back = list(csv.reader(io.StringIO(text_table(head, rows, "csv", total))))
    assert back[0] == head and [[csv_unquote(c) for c in r] for r in back[1:]] == rows + [total]
    # LaTeX: every row has the header's number of cells and no unescaped special character
    tex = text_table(head, rows, "latex", total).splitlines()
    body = [ln for ln in tex if ln.endswith(r" \\")]
    assert len(body) == len(rows) + 2
    for ln, want in zip(body, [head] + rows + [total]):
        cells = ln[:-3].split(" & ")
        assert [_unescape_latex(c) for c in cells] == list(want)
    # Markdown: one line per row, the cell separators intact
    md = text_table(head, rows, "md", total).splitlines()
    assert len(md) == len(rows) + 3 and all(ln.count(" | ") >= 2 for ln in md if not ln.startswith("|---"))


def test_latex_text_escapes_the_ten_specials():
    text = latex_text("A_b&c%d$e#f{g}h~i^j\\k")
    rest = text
    for esc in (r"\textbackslash{}", r"\textasciitilde{}", r"\textasciicircum{}", r"\&", r"\%", r"\$", r"\#",
                r"\_", r"\{", r"\}"):
        rest = rest.replace(esc, "")
    assert not (set(rest) & _LATEX_SPECIALS) and _unescape_latex(text) == "A_b&c%d$e#f{g}h~i^j\\k"


def test_text_table_refuses_an_unknown_format():
    with pytest.raises(ValueError, match="unknown table format"):
        text_table(["a"], [["b"]], "html")
