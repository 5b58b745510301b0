"""The per-target sample files: FITS binary tables that read back bit for bit, the --sample-format
option (auto: ECSV up to a threshold, FITS above), and parallel writing that gives the serial bytes.
These check file formats and options, no physics value (common practice, no source)."""
import io
import json
import struct
from pathlib import Path

import numpy as np
import pytest
from astropy.table import Table
from hypothesis import given, settings, strategies as st
from hypothesis.extra.numpy import arrays

from rhofollow.cli import main
from rhofollow.core import sample_fits
from rhofollow.core.samples import SAMPLE_COLUMNS, SampleSet
from rhofollow.io.safety import file_stem
from rhofollow.pipeline.spool import SampleSpool
from rhofollow.report import sample_files
from rhofollow.report.sample_files import resolve_sample_format, write_sample_files

ROOT = Path(__file__).resolve().parents[1]
SITE = ROOT / "site_configs" / "alto_quemado.toml"
FAST = ["--samples", "500", "--sims", "100", "--plot-targets", "1", "--seed", "5"]
DATES = ["--start", "2026-12-10", "--end", "2026-12-11"]
SPECIAL = [0.0, -0.0, 5e-324, -5e-324, 2.2250738585072014e-308, 1.7976931348623157e308, -1.7976931348623157e308,
           np.nan, np.inf, -np.inf, 0.1, 1 / 3]


def _bits(x):
    return np.asarray(x, dtype=np.float64).view(np.int64)


def _sets_equal(a: SampleSet, b: SampleSet) -> None:
    """Every array bit for bit (NaN payloads included), the same name and meta."""
    for c in (*SAMPLE_COLUMNS, "weights"):
        np.testing.assert_array_equal(_bits(getattr(a, c)), _bits(getattr(b, c)), err_msg=c)
    assert a.name == b.name
    assert json.dumps(a.meta, sort_keys=True) == json.dumps(b.meta, sort_keys=True)


def _set(n, rng, name="HTS-9 b", meta=None, **over):
    cols = {c: rng.uniform(0.01, 3.0, n) for c in SAMPLE_COLUMNS}
    cols["t0"] = 2461000.0 + rng.random(n)
    cols.update(over)
    return SampleSet(name=name, weights=rng.random(n) + 0.1,
                     meta={"vmag": 11.2, "route_transit": "duration", "n_rounds": 3} if meta is None else meta, **cols)


def _read_fits(data: bytes) -> Table:
    return Table.read(io.BytesIO(data), format="fits")


def _astropy_bytes(table) -> bytes:
    """Reference: astropy's own writer (``fits.table_to_hdu`` and ``HDUList.writeto``) of the same
    columns and units, with the same meta cards."""
    from astropy.io import fits

    plain = Table([np.asarray(table[c], dtype=float) for c in table.colnames], names=table.colnames)
    for c in table.colnames:
        plain[c].unit = table[c].unit
    hdu = fits.table_to_hdu(plain)
    for card in sample_fits._cards(dict(table.meta))[0]:
        hdu.header.append(card, end=True)
    buf = io.BytesIO()
    fits.HDUList([fits.PrimaryHDU(), hdu]).writeto(buf)
    return buf.getvalue()


def _check_file_holds_the_table(s: SampleSet) -> None:
    t = s.to_table()
    data = s.to_fits_bytes()
    assert data == _astropy_bytes(t), "not the bytes of astropy's FITS writer"
    read = _read_fits(data)
    assert read.colnames == t.colnames
    for c in t.colnames:
        assert read[c].unit == t[c].unit, c
        np.testing.assert_array_equal(_bits(read[c]), _bits(t[c]), err_msg=c)
    # the samples from the file are those from the in-memory table, bit for bit
    _sets_equal(SampleSet.from_table(read), SampleSet.from_table(t))


floats = st.floats(allow_nan=True, allow_infinity=True, width=64) | st.sampled_from(SPECIAL)


@given(arrays(np.float64, st.integers(1, 30), elements=floats), st.sampled_from(sorted(SAMPLE_COLUMNS)))
@settings(max_examples=60, deadline=None)
def test_any_float_in_any_column_reads_back_bit_for_bit(x, column):
    s = _set(x.size, np.random.default_rng(4), **{column: x})
    with np.errstate(over="ignore"):       # a huge omega or inc overflows in degrees (to_table)
        _check_file_holds_the_table(s)
        back = SampleSet.from_table(_read_fits(s.to_fits_bytes()))
    if column not in ("omega", "inc"):     # stored in degrees (as in the ECSV file)
        np.testing.assert_array_equal(_bits(getattr(back, column)), _bits(getattr(s, column)))


keys = st.from_regex(r"[a-z][a-z0-9_]{0,24}", fullmatch=True).filter(
    lambda k: k not in ("name", "ess") and not k.upper().startswith(sample_fits._COLUMN_PREFIXES)
    and k.upper() not in sample_fits._RESERVED and k != sample_fits.JSON_KEYS_CARD)
values = (st.booleans() | st.integers(-2**62, 2**62) | floats
          | st.text(max_size=90) | st.sampled_from(["", "  lead", "trail  ", "it's", "ρ★", "json:x", "NaN"]))


@given(st.dictionaries(keys, values, max_size=8), st.text(min_size=1, max_size=60))
@settings(max_examples=80, deadline=None)
def test_any_scalar_meta_and_name_read_back_exactly(meta, name):
    s = _set(3, np.random.default_rng(5), name=name, meta=meta)
    back = SampleSet.from_table(_read_fits(s.to_fits_bytes()))
    assert back.name == name
    assert list(back.meta) == list(meta)
    for k, v in meta.items():
        got = back.meta[k]
        assert type(got) is type(v), k
        if isinstance(v, float) and v != v:
            assert got != got, k           # NaN comes back as NaN (its sign and payload are not kept)
        elif isinstance(v, float):
            assert struct.pack("<d", got) == struct.pack("<d", v), k
        else:
            assert got == v, k


def test_long_keys_are_hierarch_cards_with_their_case():
    s = _set(5, np.random.default_rng(6), meta={"route_transit": "duration", "mp_mearth_err": 1.25, "Vmag": 9.0})
    read = _read_fits(s.to_fits_bytes())
    # every value that a card holds exactly is shown as itself (no JSON listing needed)
    assert dict(read.meta) == {"name": "HTS-9 b", "ess": s.ess, "route_transit": "duration", "mp_mearth_err": 1.25,
                               "Vmag": 9.0}
    from astropy.io import fits

    header = fits.open(io.BytesIO(s.to_fits_bytes()))[1].header
    assert "HIERARCH route_transit = 'duration'" in header.tostring()


def test_reserved_or_unwritable_keys_are_refused():
    for key in ("naxis", "TTYPE1", "bad key", "x" * 41, "ü"):
        with pytest.raises(ValueError, match="FITS"):
            _set(2, np.random.default_rng(7), meta={key: 1}).to_fits_bytes()


def test_empty_set_is_a_readable_empty_table():
    s = SampleSet(name="empty", weights=np.zeros(0), **{c: np.zeros(0) for c in SAMPLE_COLUMNS})
    assert s.to_fits_bytes() == _astropy_bytes(s.to_table())
    t = _read_fits(s.to_fits_bytes())
    assert len(t) == 0 and "weight" in t.colnames and t.meta["name"] == "empty"


def test_a_pipeline_sample_set_reads_back_from_both_formats(tmp_path):
    from rhofollow.io.catalogue import read_catalogue
    from rhofollow.physics.priors import DEFAULT_PRIOR, parse_prior
    from rhofollow.stages.assess_many import assess_stream

    targets = [t for t in read_catalogue(ROOT / "examples" / "hts_candidates.csv").targets
               if t.name in ("HTS-103", "HTS-111")]
    sets = [a.samples for part in assess_stream(targets, n_samples=500, prior=parse_prior(DEFAULT_PRIOR), seed=3) for a in part]
    assert len(sets) == 2
    for s in sets:
        _check_file_holds_the_table(s)
        fits_back = SampleSet.from_table(_read_fits(s.to_fits_bytes()))
        ecsv_back = SampleSet.from_table(Table.read(s.to_ecsv_text(), format="ascii.ecsv"))
        _sets_equal(fits_back, ecsv_back)
        for c in SAMPLE_COLUMNS:
            if c not in ("omega", "inc"):
                np.testing.assert_array_equal(_bits(getattr(fits_back, c)), _bits(getattr(s, c)), err_msg=c)
        assert fits_back.meta == s.meta or json.dumps(fits_back.meta) == json.dumps(s.meta)


def test_auto_is_ecsv_up_to_the_threshold_and_fits_above(monkeypatch):
    monkeypatch.setattr(sample_files, "AUTO_FITS_ABOVE", 3)
    assert [resolve_sample_format("auto", n) for n in (0, 1, 3, 4, 50)] == ["ecsv"] * 3 + ["fits"] * 2
    assert resolve_sample_format("ecsv", 10 ** 6) == "ecsv" and resolve_sample_format("fits", 1) == "fits"
    with pytest.raises(ValueError, match="xml"):
        resolve_sample_format("xml", 1)


@pytest.mark.parametrize("fmt", ["ecsv", "fits"])
def test_pool_writes_the_serial_bytes_from_the_spool(tmp_path, fmt):
    rng = np.random.default_rng(8)
    sets = [_set(400, rng, name=f"T-{i}") for i in range(5)]
    spool = SampleSpool(tmp_path)
    try:
        items = [(s.name, spool.put(s)) for s in sets]
        assert type(items[0][1]).__name__ == "SpooledSamples"
        serial = write_sample_files(items, tmp_path / "serial", fmt)
        pooled = write_sample_files(items, tmp_path / "pooled", fmt, workers=2)
    finally:
        spool.close()
    assert [p.name for p in serial] == [p.name for p in pooled] == [f"{file_stem(s.name)}.{fmt}" for s in sets]
    for a, b, s in zip(serial, pooled, sets):
        assert a.read_bytes() == b.read_bytes(), a.name
        t = Table.read(a, format="fits" if fmt == "fits" else "ascii.ecsv")
        _sets_equal(SampleSet.from_table(t), SampleSet.from_table(s.to_table()))


@pytest.mark.parametrize("command", [["plan", "--out", "x"], ["demo"], ["assess", "cat.csv"]])
def test_a_bad_format_is_one_argparse_error(command, capsys):
    with pytest.raises(SystemExit) as exc:
        main([*command, "--sample-format", "xml"])
    assert exc.value.code == 2
    err = capsys.readouterr().err
    assert err.count("invalid choice: 'xml'") == 1 and "--sample-format" in err and "Traceback" not in err


def _catalogue(tmp_path, names):
    lines = (ROOT / "examples" / "hts_candidates.csv").read_text().splitlines()
    p = tmp_path / "cat.csv"
    p.write_text("\n".join([lines[0]] + [ln for ln in lines[1:] if ln.split(",")[0] in names]) + "\n")
    return p


def test_assess_samples_out_follows_auto(tmp_path, monkeypatch):
    cat = _catalogue(tmp_path, ("HTS-101", "HTS-103"))
    got = {}
    for limit in (2, 1):            # two targets: ECSV at a threshold of 2, FITS at 1
        monkeypatch.setattr(sample_files, "AUTO_FITS_ABOVE", limit)
        d, js = tmp_path / f"s{limit}", tmp_path / f"a{limit}.json"
        assert main(["assess", str(cat), "--samples", "500", "--samples-out", str(d), "--json", str(js)]) == 0
        got[limit] = sorted(p.suffix for p in d.iterdir())
        assert json.loads(js.read_text())["sample_files"]["format"] == got[limit][0][1:]
    assert got == {2: [".ecsv", ".ecsv"], 1: [".fits", ".fits"]}
    name = file_stem("HTS-103")
    _sets_equal(SampleSet.from_table(Table.read(tmp_path / "s1" / f"{name}.fits")),
                SampleSet.from_table(Table.read(tmp_path / "s2" / f"{name}.ecsv", format="ascii.ecsv")))


def test_plan_auto_above_the_threshold_writes_fits_and_says_so(tmp_path, monkeypatch):
    cat = _catalogue(tmp_path, ("HTS-101", "HTS-103"))
    args = ["plan", str(cat), "--site", str(SITE), *DATES, *FAST]
    assert main([*args, "--out", str(tmp_path / "ecsv"), "--sample-format", "ecsv"]) == 0
    monkeypatch.setattr(sample_files, "AUTO_FITS_ABOVE", 1)
    assert main([*args, "--out", str(tmp_path / "auto"), "--workers", "2"]) == 0
    out = tmp_path / "auto"
    fits_files = sorted((out / "samples").iterdir())
    assert [p.suffix for p in fits_files] == [".fits", ".fits"]
    doc = json.loads((out / "results.json").read_text())
    assert doc["sample_files"] == {"format": "fits", "files": "samples/*.fits", "requested": "auto",
                                   "auto_fits_above": 1}
    md = (out / "summary.md").read_text()
    assert "samples/*.fits (weighted posterior samples, FITS binary tables; --sample-format auto" in md
    assert "samples/*.ecsv" not in md
    assert "samples/*.ecsv (weighted posterior samples, ECSV text)" in (tmp_path / "ecsv" / "summary.md").read_text()
    for p in fits_files:
        e = tmp_path / "ecsv" / "samples" / (p.stem + ".ecsv")
        _sets_equal(SampleSet.from_table(Table.read(p)), SampleSet.from_table(Table.read(e, format="ascii.ecsv")))
    assert not [p for p in out.parent.iterdir() if p.name.endswith((".partdir", ".old"))]
