"""Catalogue reading and validation (rhofollow.io.catalogue)."""
from __future__ import annotations

import csv
import math
import tempfile
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from astropy.table import Table
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rhofollow.io import CatalogueError, read_catalogue
from rhofollow.io.catalogue import COLUMNS

# Forward SMO values from REFERENCE.md section 1 (COMPUTED there): P = 3 d, a/R* = 10, b = 0.3,
# k = 0.1 give T14 = 2.431095 h, T23 = 1.947903 h.
GOOD = {
    "name": "HTS-101", "period_d": "3.0", "t0_bjd": "2460412.3871", "ra_deg": "148.2391",
    "dec_deg": "21.5872", "a_rs": "10.0", "b": "0.3", "rp_rs": "0.1", "t14_h": "2.431095",
    "t23_h": "1.947903", "depth_ppm": "10000", "rho_star_cgs": "1.41", "rho_star_cgs_err": "0.12",
}
OTHER = dict(GOOD, name="HTS-102")


def write_csv(path: Path, rows: list[dict], header: list[str] | None = None) -> Path:
    if header is None:
        header = []
        for r in rows:
            header += [k for k in r if k not in header]
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        for r in rows:
            w.writerow([r.get(k, "") for k in header])
    return path


def read_rows(tmp_path, *rows, **kw):
    return read_catalogue(write_csv(tmp_path / "cat.csv", list(rows)), **kw)


def only_errors(result, row):
    return [i for i in result.errors if i.row == row]


# --------------------------------------------------------------------------- good input

def test_good_rows_are_kept_with_values_and_errors(tmp_path):
    res = read_rows(tmp_path, GOOD, OTHER)
    assert res.ok and res.n_rows == 2 and res.n_failed == 0
    assert [t.name for t in res.targets] == ["HTS-101", "HTS-102"]
    t = res.targets[0]
    assert t.row == 1 and t.source == str(tmp_path / "cat.csv")
    assert t.values["period_d"].value == 3.0
    assert t.values["rho_star_cgs"].err_lo == t.values["rho_star_cgs"].err_hi == 0.12
    assert not t.values["b"].has_error
    assert "name" not in t.values


def test_asymmetric_errors(tmp_path):
    row = dict(GOOD, rho_star_cgs_err="", rho_star_cgs_errlo="0.05", rho_star_cgs_errhi="0.3")
    res = read_rows(tmp_path, row)
    m = res.targets[0].values["rho_star_cgs"]
    assert (m.value, m.err_lo, m.err_hi) == (1.41, 0.05, 0.3)


def test_header_case_and_spaces_tolerated(tmp_path):
    p = tmp_path / "c.csv"
    keys = list(GOOD)
    p.write_text(",".join(f"  {k.upper()} " for k in keys) + "\n" + ",".join(GOOD.values()) + "\n")
    res = read_catalogue(p)
    assert res.ok and res.targets[0].values["a_rs"].value == 10.0


def test_comment_lines_and_bom_are_ignored(tmp_path):
    p = tmp_path / "c.csv"
    text = "# Heliotrope Transit Survey\n" + ",".join(GOOD) + "\n" + ",".join(GOOD.values()) + "\n"
    p.write_text("\ufeff" + text, encoding="utf-8")
    res = read_catalogue(p)
    assert res.ok and res.n_rows == 1


def test_unknown_columns_warned_once_and_kept_out(tmp_path):
    res = read_rows(tmp_path, dict(GOOD, colour="blue"), dict(OTHER, colour="red"))
    warns = [i for i in res.issues if i.severity == "warning"]
    assert len(warns) == 1 and warns[0].row == 0 and "colour" in warns[0].reason
    assert res.ok and all("colour" not in t.values for t in res.targets)


def test_jitter_column_accepted(tmp_path):
    res = read_rows(tmp_path, dict(GOOD, jitter_ms="3.5"))
    assert res.targets[0].values["jitter_ms"].value == 3.5
    assert not res.issues


def test_each_alternative_route_is_enough(tmp_path):
    geo_only_durations = {k: v for k, v in GOOD.items() if k not in ("a_rs",)}
    rho_circ = {k: v for k, v in GOOD.items() if k not in ("a_rs", "t14_h", "t23_h")}
    rho_circ["rho_circ_cgs"] = "2.1"
    star_m_r = {k: v for k, v in GOOD.items() if not k.startswith("rho_star")}
    star_m_r.update(mstar_msun="1.0", rstar_rsun="1.0")
    star_logg_r = {k: v for k, v in star_m_r.items() if k != "mstar_msun"}
    star_logg_r["logg_cgs"] = "4.44"
    star_torres = {k: v for k, v in GOOD.items() if not k.startswith("rho_star")}
    star_torres.update(teff_k="5800", logg_cgs="4.44", feh_dex="0.0")
    rows = [dict(r, name=f"HTS-{i}") for i, r in
            enumerate([geo_only_durations, rho_circ, star_m_r, star_logg_r, star_torres])]
    res = read_rows(tmp_path, *rows)
    assert res.ok, [str(i) for i in res.errors]
    assert len(res.targets) == 5


# --------------------------------------------------------------------------- bad rows, one rule each

BAD = [
    # (override of GOOD, column named in the issue, words in the reason)
    ({"name": ""}, "name", "missing"),
    ({"period_d": ""}, "period_d", "required"),
    ({"t0_bjd": ""}, "t0_bjd", "required"),
    ({"period_d": "three"}, "period_d", "not a number"),
    ({"a_rs": "nan"}, "a_rs", "not finite"),
    ({"a_rs": "inf"}, "a_rs", "not finite"),
    ({"period_d": "-3"}, "period_d", "positive"),
    ({"period_d": "0"}, "period_d", "positive"),
    ({"t14_h": "0"}, "t14_h", "positive"),
    ({"t23_h": "-1"}, "t23_h", "positive"),
    ({"t23_h": "2.5"}, "t23_h", "shorter than total"),
    ({"depth_ppm": "0"}, "depth_ppm", "(0, 1e6)"),
    ({"depth_ppm": "1000000"}, "depth_ppm", "(0, 1e6)"),
    ({"rp_rs": "1.0"}, "rp_rs", "(0, 1)"),
    ({"rp_rs": "-0.1"}, "rp_rs", "(0, 1)"),
    ({"b": "-0.1"}, "b", "negative"),
    ({"b": "1.2", "t14_h": "", "t23_h": ""}, "b", "1 + rp_rs"),
    ({"t14_h": "80", "t23_h": ""}, "t14_h", "period"),
    ({"a_rs": "1.05"}, "a_rs", "inside the star"),
    ({"a_rs": "", "t23_h": "2.40"}, "t23_h", "b^2"),
    ({"rho_star_cgs": "0"}, "rho_star_cgs", "positive"),
    ({"rho_circ_cgs": "-1"}, "rho_circ_cgs", "positive"),
    ({"companion_rho_cgs": "0"}, "companion_rho_cgs", "positive"),
    ({"mstar_msun": "-1", "rstar_rsun": "1"}, "mstar_msun", "positive"),
    ({"rstar_rsun": "0", "mstar_msun": "1"}, "rstar_rsun", "positive"),
    ({"mp_mearth": "0"}, "mp_mearth", "positive"),
    ({"ecc": "1.0", "omega_deg": "10"}, "ecc", "[0, 1)"),
    ({"ecc": "-0.1", "omega_deg": "10"}, "ecc", "[0, 1)"),
    ({"omega_deg": "90"}, "omega_deg", "without ecc"),
    ({"contam_frac": "1"}, "contam_frac", "[0, 1)"),
    ({"ra_deg": "360"}, "ra_deg", "[0, 360)"),
    ({"ra_deg": "-1"}, "ra_deg", "[0, 360)"),
    ({"dec_deg": "90.5"}, "dec_deg", "[-90, 90]"),
    ({"t0_bjd": "3412.3871"}, "t0_bjd", "full BJD"),
    ({"rho_star_cgs_err": "-0.1"}, "rho_star_cgs_err", "negative"),
    ({"rho_star_cgs_err": "big"}, "rho_star_cgs_err", "not a number"),
    ({"rho_star_cgs_err": "", "rho_star_cgs_errlo": "0.1"}, "rho_star_cgs_errlo", "without"),
    ({"rho_star_cgs_errlo": "0.1", "rho_star_cgs_errhi": "0.2"}, "rho_star_cgs_err", "not both"),
    ({"ra_deg": "09:52:57.4"}, "ra_deg", "sexagesimal"),
    ({"a_rs": "", "t14_h": "", "t23_h": ""}, "a_rs | t14_h | rho_circ_cgs", "transit-geometry"),
    ({"a_rs": "", "depth_ppm": "", "rp_rs": ""}, "a_rs | t14_h | rho_circ_cgs", "transit-geometry"),
    ({"rho_star_cgs": "", "rho_star_cgs_err": "", "teff_k": "5700"},
     "rho_star_cgs | mstar_msun | logg_cgs | teff_k", "stellar-density route"),
]


@pytest.mark.parametrize("override, column, words", BAD,
                         ids=[f"{c}:{w}" for _, c, w in BAD])
def test_each_rule_rejects_the_row_and_keeps_the_good_ones(tmp_path, override, column, words):
    bad = dict(GOOD, name=GOOD["name"] if "name" not in override else "", **{
        k: v for k, v in override.items() if k != "name"})
    bad["name"] = override.get("name", "HTS-BAD")
    res = read_rows(tmp_path, OTHER, bad, dict(GOOD, name="HTS-103"))
    assert [t.name for t in res.targets] == ["HTS-102", "HTS-103"]
    errs = only_errors(res, 2)
    assert errs, "the bad row produced no error"
    assert any(e.column == column and words in e.reason for e in errs), [str(e) for e in errs]
    assert all(e.source == str(tmp_path / "cat.csv") for e in errs)
    assert res.n_failed == 1 and not res.ok


def test_duplicate_names_name_the_first_row(tmp_path):
    res = read_rows(tmp_path, GOOD, OTHER, dict(GOOD), dict(GOOD, name=" hts-101 "))
    assert [t.row for t in res.targets] == [1, 2]
    for row in (3, 4):
        (e,) = only_errors(res, row)
        assert e.column == "name" and "first used in row 1" in e.reason


def test_coordinates_required_only_when_asked(tmp_path):
    row = dict(GOOD, ra_deg="", dec_deg="")
    assert read_rows(tmp_path, row).ok
    res = read_rows(tmp_path, row, require_coords=True)
    assert {e.column for e in res.errors} == {"ra_deg", "dec_deg"}


def test_ragged_rows(tmp_path):
    p = tmp_path / "c.csv"
    head = ",".join(GOOD)
    good = ",".join(GOOD.values())
    p.write_text(f"{head}\n{good}\n{good.replace('HTS-101', 'HTS-2')},x,y\n"
                 f"{good.replace('HTS-101', 'HTS-3')},,\n")
    res = read_catalogue(p)
    assert [t.name for t in res.targets] == ["HTS-101", "HTS-3"]
    (e,) = only_errors(res, 2)
    assert "cells" in e.reason


def test_short_row_is_padded_with_a_warning(tmp_path):
    p = tmp_path / "c.csv"
    keys = list(GOOD) + ["vmag"]
    p.write_text(",".join(keys) + "\n" + ",".join(GOOD.values()) + "\n")
    res = read_catalogue(p)
    assert res.ok and res.targets[0].warnings and "blank" in res.targets[0].warnings[0]


def test_every_problem_of_a_row_is_reported(tmp_path):
    res = read_rows(tmp_path, dict(GOOD, ra_deg="400", rho_star_cgs="-2", period_d="x"))
    assert {e.column for e in res.errors} >= {"ra_deg", "rho_star_cgs", "period_d"}


# --------------------------------------------------------------------------- warnings (row kept)

@pytest.mark.parametrize("override, column, words", [
    ({"rho_star_cgs": "", "rho_star_cgs_err": "", "teff_k": "3400", "logg_cgs": "4.8",
      "feh_dex": "0"}, "teff_k", "Torres"),
    ({"period_d": "3000", "t14_h": "", "t23_h": "", "a_rs": "500"}, "period_d", "extreme"),
    ({"b": "0.95", "t14_h": "", "t23_h": ""}, "b", "grazing"),
    ({"depth_ppm": "40000"}, "depth_ppm", "factor of 2"),
    ({"ecc": "0.3"}, "ecc", "without omega"),
])
def test_warnings_keep_the_row(tmp_path, override, column, words):
    res = read_rows(tmp_path, dict(GOOD, **override))
    assert res.ok and len(res.targets) == 1
    warns = [i for i in res.issues if i.severity == "warning"]
    assert any(w.column == column and words in w.reason and w.row == 1 for w in warns), warns
    assert any(words in w for w in res.targets[0].warnings)


# --------------------------------------------------------------------------- file-level problems

def test_missing_file(tmp_path):
    with pytest.raises(CatalogueError, match="not found") as ei:
        read_catalogue(tmp_path / "nope.csv")
    assert "nope.csv" in str(ei.value)


@pytest.mark.parametrize("name, text, words", [
    ("c.txt", "name\nA\n", "unsupported file type"),
    ("c.csv", "", "empty"),
    ("c.csv", "name,period_d,t0_bjd\n", "no data rows"),
    ("c.csv", "period_d,t0_bjd\n3,2460000\n", "no 'name' column"),
    ("c.csv", "name;period_d;t0_bjd\nA;3;2460000\n", "semicolons"),
    ("c.csv", "name,period_d,period_d\nA,3,3\n", "both give period_d"),
    ("c.ecsv", "this is not ecsv\n", "cannot be read as ECSV"),
    ("c.vot", "<nonsense/>", "cannot be read as VOTable"),
])
def test_file_level_errors_name_the_file(tmp_path, name, text, words):
    p = tmp_path / name
    p.write_text(text)
    with pytest.raises(CatalogueError) as ei:
        read_catalogue(p)
    assert words in str(ei.value) and str(p) in str(ei.value)
    assert isinstance(ei.value, ValueError)


def test_binary_file(tmp_path):
    p = tmp_path / "c.csv"
    p.write_bytes(b"\xff\xfe\x00\x81 binary")
    with pytest.raises(CatalogueError, match="UTF-8"):
        read_catalogue(p)


def test_directory(tmp_path):
    d = tmp_path / "d.csv"
    d.mkdir()
    with pytest.raises(CatalogueError, match="directory"):
        read_catalogue(d)


# --------------------------------------------------------------------------- ECSV / VOTable units

def _table_with_units():
    t = Table()
    t["Name"] = ["HTS-101", "HTS-102"]
    t["period"] = [3.0, 5.0] * u.d                      # stem + unit
    t["t0_bjd"] = [2460412.3871, 2460413.0]             # suffix, no unit
    t["t14_h"] = [2.431095 * 60, 180.0] * u.min         # suffix, but a different unit
    t["t23"] = [1.947903 / 24, 0.1] * u.d
    t["rp_rs"] = [10.0, 5.0] * u.percent
    t["b"] = [0.3, 0.2]
    t["rho_star"] = [1410.0, 2000.0] * u.kg / u.m**3
    t["rho_star_err"] = [120.0, 100.0] * u.kg / u.m**3
    t["logg"] = [4.44, 4.5] * u.dex(u.m / u.s**2)     # -> +2 dex in cgs
    t["teff"] = [26.85, 5500 - 273.15] * u.deg_C
    t["feh_dex"] = [0.0, 0.1]
    t["ra_deg"] = [10.0, 1.0] * u.hourangle
    t["dec_deg"] = [20.0, -5.0] * u.deg
    t["rstar"] = [1.0, 0.9] * u.R_sun
    return t


def _check_units(res):
    assert res.ok, [str(i) for i in res.issues]
    t = res.targets[0]
    assert t.name == "HTS-101"
    assert t.values["period_d"].value == pytest.approx(3.0)
    assert t.values["t14_h"].value == pytest.approx(2.431095)
    assert t.values["t23_h"].value == pytest.approx(1.947903)
    assert t.values["rp_rs"].value == pytest.approx(0.1)
    assert t.values["rho_star_cgs"].value == pytest.approx(1.41)
    assert t.values["rho_star_cgs"].err == pytest.approx(0.12)
    assert t.values["logg_cgs"].value == pytest.approx(6.44)
    assert t.values["teff_k"].value == pytest.approx(300.0)
    assert t.values["ra_deg"].value == pytest.approx(150.0)


def test_ecsv_units_are_converted(tmp_path):
    p = tmp_path / "c.ecsv"
    _table_with_units().write(p, format="ascii.ecsv")
    _check_units(read_catalogue(p))


def test_votable_units_are_converted(tmp_path):
    p = tmp_path / "c.vot"
    t = _table_with_units()
    t["logg"] = [6.44, 6.5]   # VOTable cannot store a function unit; plain numbers mean cgs
    t["teff"] = [300.0, 5500.0] * u.K
    t["rp_rs"] = [0.1, 0.05]  # VOUnit has no percent
    t.write(p, format="votable")
    _check_units(read_catalogue(p))


def test_unit_that_cannot_convert_is_a_column_error(tmp_path):
    t = Table()
    t["name"] = ["A", "B"]
    t["period_d"] = [3.0, 4.0] * u.km
    t["t0_bjd"] = [2460000.0, 2460000.0]
    p = tmp_path / "c.ecsv"
    t.write(p, format="ascii.ecsv")
    res = read_catalogue(p)
    col = [i for i in res.errors if i.row == 0]
    assert len(col) == 1 and col[0].column == "period_d" and "km" in col[0].reason
    assert res.n_failed == 2 and not res.targets
    assert all("unusable column" in e.reason for e in res.errors if e.row > 0
               and e.column == "period_d")


def test_stem_without_unit_in_csv_is_a_column_error(tmp_path):
    row = {k: v for k, v in GOOD.items() if k != "period_d"}
    row["period"] = "3.0"
    res = read_rows(tmp_path, row)
    assert any(i.row == 0 and i.column == "period" and "no unit" in i.reason for i in res.errors)
    assert not res.targets


def test_ppm_unit_and_depth_as_fraction(tmp_path):
    t = Table()
    t["name"] = ["A", "B"]
    t["period_d"] = [3.0, 3.0]
    t["t0_bjd"] = [2460000.0, 2460001.0]
    t["a_rs"] = [10.0, 10.0]
    t["depth"] = [0.01, 0.02] * u.dimensionless_unscaled
    t["rho_star_cgs"] = [1.4, 1.4]
    p = tmp_path / "c.ecsv"
    t.write(p, format="ascii.ecsv")
    assert read_catalogue(p).targets[1].values["depth_ppm"].value == pytest.approx(20000.0)
    text = p.read_text().replace("{name: depth, unit: ''", "{name: depth_ppm, unit: ppm")
    p.write_text(text.replace(" depth ", " depth_ppm "))
    res = read_catalogue(p)
    assert not res.issues, [str(i) for i in res.issues]
    assert res.targets[0].values["depth_ppm"].value == pytest.approx(0.01)


def test_votable_masked_cells_are_blank(tmp_path):
    from astropy.table import MaskedColumn
    t = Table()
    t["name"] = ["A", "B"]
    t["period_d"] = MaskedColumn([3.0, 4.0], mask=[False, True])
    t["t0_bjd"] = [2460000.0, 2460001.0]
    t["a_rs"] = [10.0, 10.0]
    t["rho_star_cgs"] = [1.4, 1.4]
    p = tmp_path / "c.vot"
    t.write(p, format="votable")
    res = read_catalogue(p)
    assert [x.name for x in res.targets] == ["A"]
    assert only_errors(res, 2)[0].column == "period_d"


# --------------------------------------------------------------------------- properties

_finite = dict(allow_nan=False, allow_infinity=False)


@st.composite
def valid_rows(draw):
    k = draw(st.floats(0.005, 0.3, **_finite))
    row = {
        "name": draw(st.from_regex(r"HTS-[0-9]{1,6}", fullmatch=True)),
        "period_d": draw(st.floats(0.2, 500.0, **_finite)),
        "t0_bjd": draw(st.floats(2.45e6, 2.47e6, **_finite)),
        "ra_deg": draw(st.floats(0.0, 359.999, **_finite)),
        "dec_deg": draw(st.floats(-90.0, 90.0, **_finite)),
        "a_rs": draw(st.floats(1.5 + k, 300.0, **_finite)),
        "b": draw(st.floats(0.0, 1.0 + k, **_finite)),
        "rp_rs": k,
        "rho_star_cgs": draw(st.floats(1e-3, 100.0, **_finite)),
        "rho_star_cgs_errlo": draw(st.floats(0.0, 1.0, **_finite)),
        "rho_star_cgs_errhi": draw(st.floats(0.0, 1.0, **_finite)),
        "teff_k": draw(st.floats(2500.0, 50000.0, **_finite)),
        "vmag": draw(st.floats(-2.0, 25.0, **_finite)),
    }
    if draw(st.booleans()):
        row["ecc"] = draw(st.floats(0.0, 0.99, **_finite))
        row["omega_deg"] = draw(st.floats(-360.0, 360.0, **_finite))
    return row


def _expected(row):
    vals = {k: v for k, v in row.items() if k != "name" and not k.endswith(("_errlo", "_errhi"))}
    return vals


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(valid_rows(), min_size=1, max_size=4, unique_by=lambda r: r["name"].casefold()))
def test_valid_rows_survive_csv_and_ecsv_round_trip(rows):
    header = list(dict.fromkeys(k for r in rows for k in r))
    with tempfile.TemporaryDirectory() as d:
        pc = Path(d) / "c.csv"
        write_csv(pc, [{k: (repr(v) if isinstance(v, float) else v) for k, v in r.items()}
                       for r in rows], header)
        t = Table(rows=[[r.get(k, np.nan if k != "name" else "") for k in header] for r in rows],
                  names=header)
        pe = Path(d) / "c.ecsv"
        for k in ("ecc", "omega_deg"):
            if k in t.colnames:
                t[k] = np.ma.masked_invalid(t[k])
        t.write(pe, format="ascii.ecsv")
        for p in (pc, pe):
            res = read_catalogue(p)
            assert res.ok, [str(i) for i in res.errors]
            assert [x.name for x in res.targets] == [r["name"] for r in rows]
            for r, tgt in zip(rows, res.targets):
                got = {k: m.value for k, m in tgt.values.items()}
                assert got == _expected(r)
                m = tgt.values["rho_star_cgs"]
                assert (m.err_lo, m.err_hi) == (r["rho_star_cgs_errlo"], r["rho_star_cgs_errhi"])


_garbage = st.one_of(
    st.text(st.characters(blacklist_categories=("Cs",), blacklist_characters="\x00"), max_size=12),
    st.sampled_from(["nan", "-inf", "1e999", "-0", "0", "1,5", "  ", "--", "1e-400", "True",
                     "12:30:00", "∞", "NaN", "0x10", "1_000", "١٢"]),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
)
_numeric_cols = [c for c in COLUMNS] + ["rho_star_cgs_err", "b_errlo", "b_errhi"]


@settings(max_examples=60, deadline=None)
@given(st.lists(st.dictionaries(st.sampled_from(_numeric_cols), _garbage, max_size=8),
                min_size=1, max_size=5))
def test_garbage_cells_never_raise_only_issues(cells):
    rows = [dict(GOOD, name=f"HTS-{i}", **c) for i, c in enumerate(cells)]
    with tempfile.TemporaryDirectory() as d:
        res = read_catalogue(write_csv(Path(d) / "g.csv", rows))
    assert res.n_rows == len(rows)
    kept = {t.row for t in res.targets}
    failed = {i.row for i in res.errors if i.row > 0}
    assert kept | failed == set(range(1, len(rows) + 1)) and not kept & failed
    for t in res.targets:
        assert all(math.isfinite(m.value) and m.err_lo >= 0 and m.err_hi >= 0
                   for m in t.values.values())


# --------------------------------------------------------------------------- more formats and columns

def test_ecsv_garbage_cell_is_a_row_error_not_a_file_error(tmp_path):
    p = tmp_path / "g.ecsv"
    p.write_text(
        "# %ECSV 1.0\n# ---\n# datatype:\n# - {name: name, datatype: string}\n"
        "# - {name: period, unit: h, datatype: float64}\n# - {name: t0_bjd, datatype: float64}\n"
        "# - {name: a_rs, datatype: float64}\n# - {name: rho_star_cgs, datatype: float64}\n"
        "# schema: astropy-2.0\nname period t0_bjd a_rs rho_star_cgs\n"
        "A 72.0 2460000.5 10 1.4\nB abc 2460000.5 10 1.4\n")
    res = read_catalogue(p)
    assert [t.name for t in res.targets] == ["A"]
    assert res.targets[0].values["period_d"].value == pytest.approx(3.0)
    (e,) = only_errors(res, 2)
    assert e.column == "period" and "'abc' is not a number" in e.reason


def test_ecsv_time_column_gives_t0(tmp_path):
    from astropy.time import Time
    t = Table()
    t["name"] = ["A"]
    t["period_d"] = [3.0]
    t["t0"] = Time([2460000.25], format="jd", scale="tdb")
    t["a_rs"] = [10.0]
    t["rho_star_cgs"] = [1.4]
    p = tmp_path / "t.ecsv"
    t.write(p, format="ascii.ecsv")
    res = read_catalogue(p)
    assert res.ok and res.targets[0].values["t0_bjd"].value == 2460000.25


def test_logg_plain_dex_is_cgs(tmp_path):
    t = Table()
    t["name"] = ["A"]
    t["period_d"] = [3.0]
    t["t0_bjd"] = [2460000.5]
    t["a_rs"] = [10.0]
    t["logg"] = [4.4] * u.dex
    t["logg_err"] = [0.1] * u.dex
    t["rstar_rsun"] = [1.0]
    p = tmp_path / "l.ecsv"
    t.write(p, format="ascii.ecsv")
    res = read_catalogue(p)
    assert res.ok, [str(i) for i in res.issues]
    m = res.targets[0].values["logg_cgs"]
    assert (m.value, m.err) == (4.4, 0.1)


def test_error_without_value_is_warned(tmp_path):
    res = read_rows(tmp_path, dict(GOOD, b_err="0.1", b=""), dict(OTHER, mstar_msun_err="0.1"))
    assert res.ok and len(res.targets) == 2
    file_w = [i for i in res.issues if i.row == 0]
    assert len(file_w) == 1 and file_w[0].column == "mstar_msun_err"
    assert any("no value" in w for w in res.targets[0].warnings)


def test_error_column_with_unconvertible_unit(tmp_path):
    from astropy.table import MaskedColumn
    t = Table()
    t["name"] = ["A", "B"]
    t["period_d"] = [3.0, 4.0]
    t["period_d_err"] = MaskedColumn([0.1, 0.0], mask=[False, True], unit="kg")
    t["t0_bjd"] = [2460000.5, 2460001.5]
    t["a_rs"] = [10.0, 10.0]
    t["rho_star_cgs"] = [1.4, 1.4]
    p = tmp_path / "e.ecsv"
    t.write(p, format="ascii.ecsv")
    res = read_catalogue(p)
    assert [x.name for x in res.targets] == ["B"]   # B has no error cell, so it is unaffected
    assert [e.column for e in res.errors] == ["period_d_err", "period_d_err"]
    assert res.errors[0].row == 0 and res.errors[1].row == 1
