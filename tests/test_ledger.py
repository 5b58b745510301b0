"""The campaign ledger: idempotent, all-or-nothing ingest, read API, migration, export round trip.

All data here is invented (Heliotrope Transit Survey targets); no physics is checked in this file.
"""
from __future__ import annotations

import json
import sqlite3
import tempfile
from pathlib import Path

import pytest
from hypothesis import given, settings, strategies as st

from rhofollow.io.ledger import schema as ledger_schema
from rhofollow.io.ledger import IngestError, Ledger, LedgerError, SCHEMA_VERSION
from rhofollow.core.types import Measurement, Target

RV_HEADER = "target,bjd_tdb,rv_ms,rv_err_ms,instrument\n"


def write(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture
def led(tmp_path):
    with Ledger(tmp_path / "campaign.sqlite") as lg:
        yield lg


@pytest.fixture
def rv_file(tmp_path):
    return write(tmp_path / "rv.csv", RV_HEADER
                 + "HTS-101,2460100.51,12.3,2.1,Alder\n"
                 + "HTS-101,2460101.52,-3.3,2.0,Alder\n"
                 + "HTS-102,2460101.60,5.0,3.0,Birch\n")


def test_new_ledger_is_wal_with_current_schema(tmp_path):
    with Ledger(tmp_path / "a.sqlite") as lg:
        assert lg.journal_mode == "wal"
        assert lg.schema_version == SCHEMA_VERSION == 2
        assert lg.targets() == []
        assert lg.integrity_ok()


def test_rv_ingest_reports_exactly_what_was_added(led, rv_file):
    rep = led.ingest_rv_file(rv_file)
    assert not rep.already_ingested
    assert rep.counts == {"targets": 2, "rv_measurements": 3}
    assert [r["bjd_tdb"] for r in rep.added["rv_measurements"]] == [2460100.51, 2460101.52,
                                                                    2460101.60]
    rvs = led.rv_measurements("HTS-101")
    assert [(r.bjd_tdb, r.rv_ms, r.rv_err_ms, r.instrument) for r in rvs] == [
        (2460100.51, 12.3, 2.1, "Alder"), (2460101.52, -3.3, 2.0, "Alder")]
    assert led.targets() == ["HTS-101", "HTS-102"]
    assert led.catalogue_row("HTS-101") is None  # a stub target, no catalogue row yet


def test_reingest_same_file_is_a_noop(led, rv_file):
    led.ingest_rv_file(rv_file)
    before = led.content()
    rep = led.ingest_rv_file(rv_file)
    assert rep.already_ingested and rep.n_added == 0
    assert "already" in rep.describe()
    assert led.content() == before
    assert len(led.ingests()) == 1


def test_overlapping_file_adds_only_new_rows(led, rv_file, tmp_path):
    led.ingest_rv_file(rv_file)
    more = write(tmp_path / "rv2.csv", RV_HEADER
                 + "HTS-101,2460101.52,-3.3,2.0,Alder\n"     # already there
                 + "HTS-101,2460102.50,7.7,2.2,Alder\n")     # new
    rep = led.ingest_rv_file(more)
    assert rep.counts == {"rv_measurements": 1}
    assert rep.duplicates == 1
    assert len(led.rv_measurements("HTS-101")) == 3


def test_single_target_file_needs_target_option(led, tmp_path):
    f = write(tmp_path / "one.csv", "bjd_tdb,rv_ms,rv_err_ms,instrument\n2460100.5,1.0,1.0,Alder\n")
    with pytest.raises(IngestError, match="target"):
        led.ingest_rv_file(f)
    rep = led.ingest_rv_file(f, target="HTS-103")
    assert rep.counts["rv_measurements"] == 1
    assert led.rv_measurements("HTS-103")[0].rv_ms == 1.0


def test_conflicting_row_rejects_the_whole_file(led, rv_file, tmp_path):
    led.ingest_rv_file(rv_file)
    before = led.content()
    bad = write(tmp_path / "conflict.csv", RV_HEADER
                + "HTS-104,2460103.50,1.0,1.0,Alder\n"      # new, would be fine alone
                + "HTS-101,2460100.51,99.0,2.1,Alder\n")    # same key, other velocity
    with pytest.raises(IngestError) as ei:
        led.ingest_rv_file(bad)
    assert "conflict.csv" in str(ei.value) and "different values" in str(ei.value)
    assert led.content() == before
    assert len(led.ingests()) == 1


MALFORMED = [
    ("missing_column", "target,bjd_tdb,rv_ms,instrument\nHTS-101,2460100.5,1,Alder\n",
     "rv_err_ms", "required column is missing"),
    ("not_a_number", RV_HEADER + "HTS-101,2460100.5,1,1,A\nHTS-101,2460101.5,abc,1,A\n",
     "row 2, column 'rv_ms'", "not a number"),
    ("negative_error", RV_HEADER + "HTS-101,2460100.5,1,-1,A\n", "column 'rv_err_ms'", "> 0"),
    ("short_bjd", RV_HEADER + "HTS-101,60100.5,1,1,A\n", "column 'bjd_tdb'", "full BJD_TDB"),
    ("ragged_row", RV_HEADER + "HTS-101,2460100.5,1,1\n", "row 1", "fields"),
    ("nan_value", RV_HEADER + "HTS-101,2460100.5,nan,1,A\n", "column 'rv_ms'", "finite"),
    ("same_key_twice", RV_HEADER + "HTS-101,2460100.5,1,1,A\nHTS-101,2460100.5,2,1,A\n",
     "row 2", "same entry as row 1"),
    ("empty", "", "rv.csv", "no header"),
]


@pytest.mark.parametrize("case,text,where,why", MALFORMED, ids=[m[0] for m in MALFORMED])
def test_malformed_rv_file_rejected_with_nothing_written(led, tmp_path, case, text, where, why):
    led.add_done("HTS-101", "2026-01-05T03:00:00", "rv")
    before = led.content()
    f = write(tmp_path / "rv.csv", text)
    with pytest.raises(IngestError) as ei:
        led.ingest_rv_file(f)
    msg = str(ei.value)
    assert str(f) in msg and where in msg and why in msg, msg
    assert "nothing was written" in msg
    assert led.content() == before
    assert len(led.ingests()) == 1


OCC_HEADER = ("target,kind,mid_bjd_tdb,mid_err_min,window_start_bjd_tdb,window_end_bjd_tdb,"
              "depth_limit_ppm,band_um,instrument\n")


def test_occultation_file_and_read_api(led, tmp_path):
    f = write(tmp_path / "occ.csv", OCC_HEADER
              + "HTS-101,detection,2460105.2501,3.5,,,,4.5,Cedar\n"
              + "HTS-101,non_detection,,,2460110.10,2460110.40,450,3.6,Cedar\n")
    rep = led.ingest_occultation_file(f)
    assert rep.counts == {"targets": 1, "occultation_timings": 2}
    det, non = led.occultation_timings("HTS-101")
    assert det.kind == "detection" and det.mid_bjd_tdb == 2460105.2501
    assert det.mid_err_d == pytest.approx(3.5 / 1440.0)
    assert non.kind == "non_detection" and non.window_end_bjd_tdb == 2460110.40
    assert non.depth_limit_ppm == 450 and non.mid_bjd_tdb is None
    assert led.ingest_occultation_file(f).already_ingested


@pytest.mark.parametrize("row,where", [
    ("HTS-101,seen,2460105.25,3,,,,,C\n", "column 'kind'"),
    ("HTS-101,detection,2460105.25,,,,,,C\n", "column 'mid_err_min'"),
    ("HTS-101,non_detection,,,2460110.4,2460110.1,450,,C\n", "column 'window_end_bjd_tdb'"),
    ("HTS-101,non_detection,,,2460110.1,2460110.4,,,C\n", "column 'depth_limit_ppm'"),
    ("HTS-101,detection,2460105.25,3,2460110.1,,,,C\n", "column 'window_start_bjd_tdb'"),
    ("HTS-101,detection,2460105.25,3,,,,45,C\n", "column 'band_um'"),
])
def test_malformed_occultation_rows(led, tmp_path, row, where):
    f = write(tmp_path / "occ.csv", OCC_HEADER + "HTS-102,detection,2460105.0,2,,,,,C\n" + row)
    with pytest.raises(IngestError, match="row 2") as ei:
        led.ingest_occultation_file(f)
    assert where in str(ei.value)
    assert led.targets() == []


def test_single_occultation_entry_is_idempotent(led):
    a = led.add_occultation("HTS-105", mid_bjd_tdb=2460200.123, mid_err_min=4.0)
    b = led.add_occultation("HTS-105", mid_bjd_tdb=2460200.123, mid_err_min=4.0)
    assert a.counts["occultation_timings"] == 1 and b.n_added == 0
    with pytest.raises(IngestError, match="mid_err_min"):
        led.add_occultation("HTS-105", mid_bjd_tdb=2460201.0, mid_err_min=-1.0)


def test_done_entries_and_file(led, tmp_path):
    led.add_done("HTS-101", "2026-02-01T01:30:00Z", "rv", instrument="Alder")
    led.add_done("HTS-102", "2026-02-02T04:00:00+02:00", "occultation", outcome="lost",
                 note="clouds")
    assert led.is_done("HTS-101", "rv") and not led.is_done("HTS-101", "occultation")
    assert not led.is_done("HTS-102")  # lost to weather does not count as done
    assert led.done("HTS-102")[0].start_utc == "2026-02-02T02:00:00"  # converted to UTC
    f = write(tmp_path / "done.csv", "target,start_utc,end_utc,kind,instrument,outcome,note\n"
              "HTS-103,2026-02-03T01:00:00,2026-02-03T03:00:00,transit,Cedar,ok,full\n")
    assert led.ingest_done_file(f).counts == {"targets": 1, "observations": 1}
    bad = write(tmp_path / "bad.csv", "target,start_utc,kind\nHTS-103,yesterday,rv\n")
    with pytest.raises(IngestError, match="row 1, column 'start_utc'"):
        led.ingest_done_file(bad)


def hts_target(name: str, rho: float) -> Target:
    return Target(name=name, row=1, source="hts.csv", values={
        "period_d": Measurement(4.2, 1e-5, 1e-5), "rho_star_cgs": Measurement(rho, 0.1, 0.2),
        "vmag": Measurement(float("nan"))})


def test_targets_with_catalogue_rows_and_updates(led):
    r1 = led.add_targets([hts_target("HTS-101", 1.4)], "hts.csv")
    assert r1.counts == {"targets": 1}
    row = led.catalogue_row("HTS-101")
    assert row["values"]["rho_star_cgs"] == [1.4, 0.1, 0.2]
    assert row["values"]["vmag"][0] is None
    assert led.add_targets([hts_target("HTS-101", 1.4)], "hts.csv").already_ingested
    r3 = led.add_targets([hts_target("HTS-101", 1.5)], "hts-v2.csv")
    assert r3.n_added == 0 and len(r3.updated["targets"]) == 1
    assert led.catalogue_row("HTS-101")["values"]["rho_star_cgs"][0] == 1.5


def test_posterior_versions(led):
    a = led.add_posterior_version("HTS-101", source_hash="abc", n_samples=100, ess=42.5,
                                  summary={"e": {"q50": 0.3}})
    b = led.add_posterior_version("HTS-101", source_hash="abc", n_samples=100, ess=42.5,
                                  summary={"e": {"q50": 0.3}})
    assert a.counts == {"targets": 1, "posterior_versions": 1} and b.n_added == 0
    led.add_posterior_version("HTS-101", source_hash="def", n_samples=100, ess=30.0,
                              summary={"e": {"q50": 0.31}})
    versions = led.posterior_versions("HTS-101")
    assert [v.source_hash for v in versions] == ["abc", "def"]
    assert led.latest_posterior("HTS-101").summary == {"e": {"q50": 0.31}}


def fill(lg: Ledger, folder: Path):
    lg.add_targets([hts_target("HTS-101", 1.4), hts_target("HTS-102", 0.8)], "hts.csv")
    lg.ingest_rv_file(write(folder / "in_rv.csv", RV_HEADER
                            + "HTS-101,2460100.123456789,12.345678901,2.1,Alder\n"
                            + "HTS-103,2460100.2,0.1,0.3,Birch\n"))
    lg.add_occultation("HTS-101", mid_bjd_tdb=2460105.25, mid_err_min=3.0, band_um=4.5)
    lg.add_occultation("HTS-101", kind="non_detection", window_start_bjd_tdb=2460110.1,
                       window_end_bjd_tdb=2460110.4, depth_limit_ppm=300.0)
    lg.add_done("HTS-102", "2026-02-01T01:30:00", "rv", instrument="Alder", note='say "hi", ok')
    lg.add_posterior_version("HTS-101", source_hash="h1", n_samples=10, ess=3.3,
                             summary={"e": {"q50": 0.25}})


def test_export_import_round_trip(tmp_path):
    with Ledger(tmp_path / "one.sqlite") as a:
        fill(a, tmp_path)
        a.export(tmp_path / "out")
        with Ledger(tmp_path / "two.sqlite") as b:
            reports = b.import_folder(tmp_path / "out")
            assert sum(r.n_added for r in reports) > 0
            assert b.content() == a.content()
            # importing again adds nothing
            assert all(r.already_ingested for r in b.import_folder(tmp_path / "out"))
            assert b.content() == a.content()
    names = sorted(p.name for p in (tmp_path / "out").iterdir())
    assert names == ["done.csv", "occultations.csv", "posteriors.jsonl", "rv.csv",
                     "targets.jsonl"]


floats = st.floats(min_value=-1e4, max_value=1e4, allow_nan=False, allow_infinity=False)


@settings(max_examples=20, deadline=None)
@given(rows=st.lists(st.tuples(st.sampled_from(["HTS-101", "HTS-102"]),
                               st.floats(2450000.0, 2470000.0), floats,
                               st.floats(0.01, 100.0), st.sampled_from(["Alder", "Birch"])),
                     min_size=1, max_size=12, unique_by=lambda r: (r[0], r[1], r[4])))
def test_property_ingest_twice_and_round_trip(rows):
    with tempfile.TemporaryDirectory() as d:
        d = Path(d)
        text = RV_HEADER + "".join(f"{t},{b!r},{v!r},{s!r},{i}\n" for t, b, v, s, i in rows)
        f = write(d / "rv.csv", text)
        with Ledger(d / "a.sqlite") as a:
            assert a.ingest_rv_file(f).counts["rv_measurements"] == len(rows)
            snap = a.content()
            assert a.ingest_rv_file(f).n_added == 0 and a.content() == snap
            a.export(d / "x")
            with Ledger(d / "b.sqlite") as b:
                b.import_folder(d / "x")
                assert b.content() == snap


def test_user_path_with_sql_characters_is_stored_verbatim(led, tmp_path):
    f = write(tmp_path / "it's \"q\"; DROP TABLE targets; --.csv", RV_HEADER
              + "HTS-101,2460100.5,1,1,A\n")
    led.ingest_rv_file(f)
    assert led.ingests()[0]["source"] == str(f)
    assert led.targets() == ["HTS-101"]


def make_v1(path: Path):
    con = sqlite3.connect(path)
    con.executescript(ledger_schema._SCHEMA_V1)
    con.execute("INSERT INTO targets VALUES ('HTS-101', ?)", (json.dumps({"row": 1}),))
    con.execute("INSERT INTO rv_measurements (target, bjd_tdb, rv_ms, rv_err_ms, instrument) "
                "VALUES ('HTS-101', 2460100.5, 1.5, 2.0, 'Alder')")
    con.execute("INSERT INTO rv_measurements (target, bjd_tdb, rv_ms, rv_err_ms, instrument) "
                "VALUES ('HTS-102', 2460100.6, -1.5, 2.0, 'Alder')")  # target without a row
    con.execute("INSERT INTO occultation_timings (target, mid_bjd_tdb, mid_err_d) "
                "VALUES ('HTS-101', 2460105.25, 0.002)")
    con.execute("INSERT INTO observations (target, time_utc, instrument, kind, outcome) "
                "VALUES ('HTS-101', '2026-01-01T00:00:00', 'Alder', 'rv', 'ok')")
    con.execute("INSERT INTO posterior_versions (target, created_utc, summary_json) "
                "VALUES ('HTS-101', '2026-01-02T00:00:00Z', ?)",
                (json.dumps({"ess": 12.5, "n_samples": 400}),))
    con.commit()
    con.close()


def test_migration_from_v1(tmp_path):
    p = tmp_path / "old.sqlite"
    make_v1(p)
    with Ledger(p) as lg:
        assert lg.schema_version == 2
        assert lg.integrity_ok()
        assert lg.targets() == ["HTS-101", "HTS-102"]
        assert lg.catalogue_row("HTS-101") == {"row": 1}
        assert [r.rv_ms for r in lg.rv_measurements("HTS-102")] == [-1.5]
        (occ,) = lg.occultation_timings("HTS-101")
        assert occ.kind == "detection" and occ.mid_err_min == pytest.approx(0.002 * 1440)
        assert lg.done("HTS-101")[0].start_utc == "2026-01-01T00:00:00"
        (pv,) = lg.posterior_versions("HTS-101")
        assert pv.ess == 12.5 and pv.n_samples == 400
        # migrated rows keep their identity: the same RV again is a duplicate
        f = write(tmp_path / "rv.csv", RV_HEADER + "HTS-101,2460100.5,1.5,2.0,Alder\n")
        rep = lg.ingest_rv_file(f)
        assert rep.n_added == 0 and rep.duplicates == 1
    with Ledger(p) as lg:  # reopening a migrated ledger changes nothing
        assert lg.schema_version == 2 and len(lg.rv_measurements("HTS-101")) == 1


def test_newer_schema_and_foreign_files_are_refused(tmp_path):
    p = tmp_path / "new.sqlite"
    with Ledger(p):
        pass
    con = sqlite3.connect(p)
    con.execute("UPDATE schema_version SET version = 99")
    con.commit()
    con.close()
    with pytest.raises(LedgerError, match="newer"):
        Ledger(p)
    q = tmp_path / "other.sqlite"
    con = sqlite3.connect(q)
    con.execute("CREATE TABLE stuff (x)")
    con.commit()
    con.close()
    with pytest.raises(LedgerError, match="not a rhofollow ledger"):
        Ledger(q)
    junk = write(tmp_path / "junk.sqlite", "this is not a database at all" * 100)
    with pytest.raises(LedgerError, match="not a usable ledger"):
        Ledger(junk)
