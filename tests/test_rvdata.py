"""RV file reading: good files, then every kind of malformed file (clear message, nothing half-read)."""
import numpy as np
import pytest

from rhofollow.io.rvdata import RVDataError, read_rv_data, read_rv_dir, read_rv_file

HEAD = "bjd_tdb,rv_ms,rv_err_ms,instrument\n"
GOOD = HEAD + "2460401.51,12.3,2.1,AQ-VEL\n2460402.55,-4.0,2.3,AQ-VEL\n2460403.60,1.1,2.0,AQ-VEL\n"


def write(tmp_path, text, name="HTS-104.csv"):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_good_csv(tmp_path):
    out = read_rv_file(write(tmp_path, "# comment line\n" + GOOD), known_instruments={"AQ-VEL"})
    d = out["HTS-104"]
    assert d.n == 3 and d.instruments == ["AQ-VEL"]
    np.testing.assert_allclose(d.rv_ms, [12.3, -4.0, 1.1])


def test_target_column_splits(tmp_path):
    text = ("bjd_tdb,rv_ms,rv_err_ms,instrument,target\n2460401.5,1,2,A,HTS-104\n"
            "2460401.5,3,2,A,HTS-107\n2460402.5,2,2,B,HTS-104\n")
    out = read_rv_file(write(tmp_path, text, "all.csv"))
    assert sorted(out) == ["HTS-104", "HTS-107"] and out["HTS-104"].instruments == ["A", "B"]
    assert list(out["HTS-104"].groups()) == [0, 1]


def test_ecsv(tmp_path):
    from astropy.table import Table
    import astropy.units as u

    t = Table({"bjd_tdb": [2460401.5, 2460402.5], "rv_ms": [1.0, 2.0] * u.m / u.s,
               "rv_err_ms": [1.5, 1.5] * u.m / u.s, "instrument": ["AQ-VEL", "AQ-VEL"]})
    p = tmp_path / "HTS-107.ecsv"
    t.write(p, format="ascii.ecsv")
    assert read_rv_file(p)["HTS-107"].n == 2


def test_directory(tmp_path):
    write(tmp_path, GOOD, "HTS-104.csv")
    write(tmp_path, GOOD, "HTS-107.csv")
    (tmp_path / "notes.txt").write_text("ignored")
    assert sorted(read_rv_dir(tmp_path)) == ["HTS-104", "HTS-107"]
    assert sorted(read_rv_data(tmp_path)) == ["HTS-104", "HTS-107"]


@pytest.mark.parametrize("text, match", [
    ("bjd_tdb,rv_ms,instrument\n2460401.5,1,A\n", r"missing column 'rv_err_ms'"),
    (HEAD, "no data rows"),
    (HEAD + "2460401.5,1,2,A\n2460401.4,1,2,A\n", r"row 2, column 'bjd_tdb'.*not in increasing order"),
    (HEAD + "2460401.5,1,2,A\n2460401.5,1,2,A\n", r"row 2, column 'bjd_tdb'.*duplicate time"),
    (HEAD + "2460401.5,1,-2,A\n", r"row 1, column 'rv_err_ms'.*must be positive"),
    (HEAD + "2460401.5,1,0,A\n", r"row 1, column 'rv_err_ms'.*must be positive"),
    (HEAD + "2460401.5,abc,2,A\n", r"row 1, column 'rv_ms': not a number"),
    (HEAD + "2460401.5,nan,2,A\n", r"row 1, column 'rv_ms': value must be finite"),
    (HEAD + "60401.5,1,2,A\n", r"row 1, column 'bjd_tdb'.*not a full BJD_TDB"),
    (HEAD + "2460401.5,1,2,\n", r"row 1, column 'instrument': empty"),
    (HEAD + "2460401.5,1,2,A,extra\n", r"row 1: more fields"),
])
def test_malformed(tmp_path, text, match):
    p = write(tmp_path, text)
    with pytest.raises(RVDataError, match=match) as exc:
        read_rv_file(p)
    assert str(p) in str(exc.value)


def test_unknown_instrument(tmp_path):
    p = write(tmp_path, HEAD + "2460401.5,1,2,AQ-VEL\n2460402.5,1,2,OTHER\n")
    with pytest.raises(RVDataError, match=r"row 2, column 'instrument': unknown instrument 'OTHER'"):
        read_rv_file(p, known_instruments={"AQ-VEL"})


def test_same_time_two_instruments_allowed(tmp_path):
    d = read_rv_file(write(tmp_path, HEAD + "2460401.5,1,2,A\n2460401.5,1,2,B\n"))["HTS-104"]
    assert d.n == 2


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
