"""RV file reading, the project's only RV reader: good files, the rules (target, time order,
repeats, file kinds), every kind of malformed file (each problem named by file, row and column,
all of them at once, nothing half-read), and the two entry points that use it (``--rv-data`` and
the ledger's RV ingest) reading the same files identically. All data are invented; no physics is
checked in this file."""
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from rhofollow.cli import main
from rhofollow.io.ledger import IngestError, Ledger
from rhofollow.io.rvdata import RVData, RVDataError, RVSeries, read_rv_data, read_rv_dir, read_rv_file

ROOT = Path(__file__).resolve().parents[1]
HEAD = "bjd_tdb,rv_ms,rv_err_ms,instrument\n"
GOOD = HEAD + "2460401.51,12.3,2.1,AQ-VEL\n2460402.55,-4.0,2.3,AQ-VEL\n2460403.60,1.1,2.0,AQ-VEL\n"
MULTI = ("target,bjd_tdb,rv_ms,rv_err_ms,instrument\n"
         "HTS-104,2460402.5,2,2,B\nHTS-107,2460401.5,3,2,A\nHTS-104,2460401.5,1,2,A\n")


def write(tmp_path, text, name="HTS-104.csv"):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_good_csv(tmp_path):
    out = read_rv_file(write(tmp_path, "# comment line\n" + GOOD), known_instruments={"AQ-VEL"})
    d = out["HTS-104"]
    assert isinstance(d, RVSeries) and RVData is RVSeries
    assert d.n == 3 and d.instruments == ["AQ-VEL"] and list(d.rows) == [1, 2, 3]
    np.testing.assert_allclose(d.rv_ms, [12.3, -4.0, 1.1])


def test_target_column_splits(tmp_path):
    out = read_rv_file(write(tmp_path, MULTI, "all.csv"))
    assert sorted(out) == ["HTS-104", "HTS-107"] and out["HTS-104"].instruments == ["A", "B"]
    assert list(out["HTS-104"].groups()) == [0, 1]


def test_rows_in_any_order_come_back_in_time_order(tmp_path):
    d = read_rv_file(write(tmp_path, HEAD + "2460403.6,3,2,A\n2460401.5,1,2,A\n2460402.5,2,2,B\n"))["HTS-104"]
    assert list(d.bjd_tdb) == [2460401.5, 2460402.5, 2460403.6]
    assert list(d.rv_ms) == [1.0, 2.0, 3.0] and list(d.rows) == [2, 3, 1]


def test_exact_repeat_is_kept_once(tmp_path):
    d = read_rv_file(write(tmp_path, HEAD + "2460401.5,1,2,A\n2460402.5,1,2,A\n2460401.5,1,2,A\n"))["HTS-104"]
    assert d.n == 2 and list(d.rows) == [1, 2]


def test_same_time_two_instruments_allowed(tmp_path):
    d = read_rv_file(write(tmp_path, HEAD + "2460401.5,1,2,A\n2460401.5,1,2,B\n"))["HTS-104"]
    assert d.n == 2 and list(d.instrument) == ["A", "B"]


def test_target_given_or_required(tmp_path):
    p = write(tmp_path, GOOD, "rv.csv")
    assert list(read_rv_file(p)) == ["rv"]                      # named after the file
    assert list(read_rv_file(p, target="HTS-104")) == ["HTS-104"]
    with pytest.raises(RVDataError) as ei:
        read_rv_file(p, name_from_stem=False)
    (issue,) = ei.value.issues
    assert (issue.source, issue.row, issue.column) == (str(p), 0, "target")
    m = write(tmp_path, MULTI, "all.csv")
    with pytest.raises(RVDataError) as ei:
        read_rv_file(m, target="HTS-104")
    (issue,) = ei.value.issues
    assert (issue.row, issue.column, issue.name) == (2, "target", "HTS-107")


def test_ecsv(tmp_path):
    from astropy.table import Table
    import astropy.units as u

    t = Table({"bjd_tdb": [2460402.5, 2460401.5], "rv_ms": [1.0, 2.0] * u.m / u.s,
               "rv_err_ms": [1.5, 1.5] * u.m / u.s, "instrument": ["AQ-VEL", "AQ-VEL"]})
    p = tmp_path / "HTS-107.ecsv"
    t.write(p, format="ascii.ecsv")
    d = read_rv_file(p)["HTS-107"]
    assert d.n == 2 and list(d.rv_ms) == [2.0, 1.0]


def test_directory(tmp_path):
    write(tmp_path, GOOD, "HTS-104.csv")
    write(tmp_path, GOOD, "HTS-107.csv")
    (tmp_path / "notes.txt").write_text("ignored")
    assert sorted(read_rv_dir(tmp_path)) == ["HTS-104", "HTS-107"]
    assert sorted(read_rv_data(tmp_path)) == ["HTS-104", "HTS-107"]


# (file text, data row, column, words of the reason); row 0 = the file or its header
MALFORMED = [
    ("missing_column", "bjd_tdb,rv_ms,instrument\n2460401.5,1,A\n", 0, "rv_err_ms",
     "required column is missing"),
    ("duplicate_column", "bjd_tdb,rv_ms,rv_err_ms,instrument,rv_ms\n2460401.5,1,2,A,1\n", 0, "rv_ms",
     "more than once"),
    ("header_only", HEAD, 0, "", "no data rows"),
    ("empty", "", 0, "", "no header line"),
    ("conflicting_repeat", HEAD + "2460401.5,1,2,A\n2460401.5,3,2,A\n", 2, "rv_ms,rv_err_ms",
     "same entry as row 1 with different values"),
    ("negative_error", HEAD + "2460401.5,1,-2,A\n", 1, "rv_err_ms", "must be > 0"),
    ("zero_error", HEAD + "2460401.5,1,0,A\n", 1, "rv_err_ms", "must be > 0"),
    ("not_a_number", HEAD + "2460401.5,abc,2,A\n", 1, "rv_ms", "'abc' is not a number"),
    ("nan", HEAD + "2460401.5,nan,2,A\n", 1, "rv_ms", "not a finite number"),
    ("missing_value", HEAD + "2460401.5,,2,A\n", 1, "rv_ms", "value is missing"),
    ("short_bjd", HEAD + "60401.5,1,2,A\n", 1, "bjd_tdb", "not a full BJD_TDB"),
    ("empty_instrument", HEAD + "2460401.5,1,2,\n", 1, "instrument", "value is missing"),
    ("extra_field", HEAD + "2460401.5,1,2,A,extra\n", 1, "", "has 5 fields, the header has 4"),
    ("missing_field", HEAD + "2460401.5,1,2\n", 1, "", "has 3 fields, the header has 4"),
]


@pytest.mark.parametrize("case,text,row,column,why", MALFORMED, ids=[m[0] for m in MALFORMED])
def test_malformed_named_by_file_row_and_column(tmp_path, case, text, row, column, why):
    p = write(tmp_path, text)
    with pytest.raises(RVDataError) as exc:
        read_rv_file(p)
    issues = exc.value.issues
    assert [(i.source, i.row, i.column) for i in issues] == [(str(p), row, column)]
    assert why in issues[0].reason and str(issues[0]) in str(exc.value)


def test_every_problem_of_a_file_is_reported_at_once(tmp_path):
    p = write(tmp_path, HEAD + "2460401.5,1,2,A\n2460402.5,x,2,A\n2460403.5,1,-1,A\n"
              "2460404.5,1,2,\n60405.5,1,2,A\n")
    with pytest.raises(RVDataError) as exc:
        read_rv_file(p)
    assert [(i.row, i.column) for i in exc.value.issues] == [
        (2, "rv_ms"), (3, "rv_err_ms"), (4, "instrument"), (5, "bjd_tdb")]
    msg = str(exc.value)
    assert f"{p}, row 2, column 'rv_ms'" in msg and f"{p}, row 5, column 'bjd_tdb'" in msg


def test_unknown_instrument(tmp_path):
    p = write(tmp_path, HEAD + "2460401.5,1,2,AQ-VEL\n2460402.5,1,2,OTHER\n")
    with pytest.raises(RVDataError, match=r"row 2, column 'instrument': unknown instrument 'OTHER'"):
        read_rv_file(p, known_instruments={"AQ-VEL"})


def test_target_in_two_files(tmp_path):
    write(tmp_path, GOOD, "HTS-104.csv")
    write(tmp_path, "bjd_tdb,rv_ms,rv_err_ms,instrument,target\n2460401.5,1,2,A,HTS-104\n", "more.csv")
    with pytest.raises(RVDataError, match="also in"):
        read_rv_dir(tmp_path)


def test_missing_file_and_empty_dir(tmp_path):
    with pytest.raises(RVDataError, match="not found"):
        read_rv_file(tmp_path / "nope.csv")
    with pytest.raises(RVDataError, match="no .csv or .ecsv"):
        read_rv_dir(tmp_path)


@settings(max_examples=25, deadline=None)
@given(st.permutations(range(6)))
def test_row_order_does_not_change_the_series(perm):
    """Invariant (common practice, no source): a file's row order never changes what is read."""
    import tempfile

    lines = [f"{2460401.5 + k * 0.7},{k - 2.5},{1 + k / 10},{'AB'[k % 2]}\n" for k in range(6)]
    with tempfile.TemporaryDirectory() as d:
        a = read_rv_file(write(Path(d), HEAD + "".join(lines), "a.csv"), target="T")["T"]
        b = read_rv_file(write(Path(d), HEAD + "".join(lines[i] for i in perm), "b.csv"), target="T")["T"]
    for col in ("bjd_tdb", "rv_ms", "rv_err_ms", "instrument"):
        assert list(getattr(a, col)) == list(getattr(b, col))


# ------------------------------------------------------------------ both entry points, one reader

def _ledger_series(tmp_path, files, target=None):
    with Ledger(tmp_path / "l.sqlite") as lg:
        for f in files:
            lg.ingest_rv_file(f, target=target)
        return {n: lg.rv_series(n) for n in lg.targets()}


def _same(a: RVSeries, b: RVSeries):
    assert a.target == b.target
    for col in ("bjd_tdb", "rv_ms", "rv_err_ms"):
        assert getattr(a, col).tolist() == getattr(b, col).tolist(), col
    assert a.instrument.tolist() == b.instrument.tolist()


def test_demo_folder_reads_the_same_through_the_ledger(tmp_path):
    """The demo RVs (examples/rv, what --rv-data reads) give the same series via the ledger."""
    via_option = read_rv_data(ROOT / "examples" / "rv")
    via_ledger = {}
    for name in via_option:
        (tmp_path / name).mkdir()
        via_ledger.update(_ledger_series(tmp_path / name, [ROOT / "examples" / "rv" / f"{name}.csv"],
                                         target=name))
    assert sorted(via_ledger) == sorted(via_option)
    for name in via_option:
        _same(via_option[name], via_ledger[name])


def test_multi_target_file_reads_the_same_through_the_ledger(tmp_path):
    """The ledger demo RV file (several targets, several instruments) read both ways."""
    f = ROOT / "examples" / "ledger" / "rv_heliotrope.csv"
    via_option = read_rv_data(f)
    via_ledger = _ledger_series(tmp_path, [f])
    assert sorted(via_ledger) == sorted(via_option)
    for name in via_option:
        _same(via_option[name], via_ledger[name])


def test_unordered_ecsv_reads_the_same_through_the_ledger(tmp_path):
    from astropy.table import Table

    t = Table({"target": ["B", "A", "B"], "bjd_tdb": [2460403.5, 2460401.5, 2460402.5],
               "rv_ms": [3.0, 1.0, 2.0], "rv_err_ms": [1.0, 1.5, 2.0], "instrument": ["X", "Y", "X"]})
    p = tmp_path / "mixed.ecsv"
    t.write(p, format="ascii.ecsv")
    via_option, via_ledger = read_rv_data(p), _ledger_series(tmp_path, [p])
    assert sorted(via_option) == sorted(via_ledger) == ["A", "B"]
    for name in via_option:
        _same(via_option[name], via_ledger[name])
    assert via_option["B"].bjd_tdb.tolist() == [2460402.5, 2460403.5]


def test_bad_file_gives_the_same_issues_on_both_routes(tmp_path):
    p = write(tmp_path, "target,bjd_tdb,rv_ms,rv_err_ms,instrument\n"
              "HTS-104,2460401.5,1,2,A\nHTS-104,2460402.5,five,2,A\nHTS-104,2460403.5,1,-2,A\n", "bad.csv")
    with pytest.raises(RVDataError) as a:
        read_rv_data(p)
    with Ledger(tmp_path / "l.sqlite") as lg, pytest.raises(IngestError) as b:
        lg.ingest_rv_file(p)
    where = [(i.source, i.row, i.column, i.name) for i in a.value.issues]
    assert where == [(str(p), 2, "rv_ms", "HTS-104"), (str(p), 3, "rv_err_ms", "HTS-104")]
    assert [(i.source, i.row, i.column, i.name, i.reason) for i in b.value.issues] == [
        (i.source, i.row, i.column, i.name, i.reason) for i in a.value.issues]


def test_bad_file_named_by_both_commands(tmp_path, capsys):
    """Through the CLI: 'rv --rv-data' and 'log rv' print the same file, row and column."""
    d = tmp_path / "rv"
    d.mkdir()
    bad = write(d, "target,bjd_tdb,rv_ms,rv_err_ms,instrument\nHTS-104,2460401.5,1,2,AQ-VEL\n"
                "HTS-104,2460402.5,1,2,\n", "HTS-104.csv")
    cat = ROOT / "examples" / "hts_candidates.csv"
    vel = ROOT / "site_configs" / "instruments" / "aq_vel.toml"
    capsys.readouterr()
    assert main(["rv", str(cat), "--instrument", str(vel), "--rv-data", str(d)]) == 2
    err_option = "".join(capsys.readouterr().err.split())       # the terminal may wrap lines
    assert main(["log", "rv", str(bad), "--ledger", str(tmp_path / "l.sqlite")]) == 2
    err_log = "".join(capsys.readouterr().err.split())
    needle = "".join(f"{bad}, row 2, column 'instrument' (HTS-104): value is missing".split())
    assert needle in err_option and needle in err_log
    assert "nothingwaswritten" in err_log and "Traceback" not in err_option + err_log
