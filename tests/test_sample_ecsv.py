"""The fast ECSV writer of the sample files: astropy reads it, and every value comes back exactly."""
import io

import numpy as np
from astropy.table import Table
from hypothesis import given, settings, strategies as st
from hypothesis.extra.numpy import arrays

from rhofollow.core.samples import SAMPLE_COLUMNS, SampleSet


def _samples(n, rng, teff_nan=True, **over):
    cols = {c: rng.uniform(0.01, 3.0, n) for c in SAMPLE_COLUMNS}
    cols["t0"] = 2461000.0 + rng.random(n)
    if teff_nan:
        cols["teff"] = np.full(n, np.nan)
    cols.update(over)
    return SampleSet(name="HTS-9 b", weights=rng.random(n) + 0.1, meta={"vmag": 11.2, "band": "V", "n_rounds": 3},
                     **cols)


def _astropy_text(s):
    buf = io.StringIO()
    s.to_table().write(buf, format="ascii.ecsv")
    return buf.getvalue()


def test_same_table_as_astropys_writer():
    # Reference: astropy.table's own ECSV writer and reader (general-purpose library).
    s = _samples(500, np.random.default_rng(1))
    fast = Table.read(s.to_ecsv_text(), format="ascii.ecsv")
    ref = Table.read(_astropy_text(s), format="ascii.ecsv")
    assert fast.colnames == ref.colnames
    assert dict(fast.meta) == dict(ref.meta)
    for c in ref.colnames:
        assert fast[c].unit == ref[c].unit
        np.testing.assert_array_equal(np.asarray(fast[c]), np.asarray(ref[c]))
    assert s.to_ecsv_text() == _astropy_text(s)   # the same text, byte for byte, here


def test_round_trip_exact():
    # What the file holds reads back bit for bit; the SampleSet columns stored in internal units
    # come back exactly (omega and inc are stored in degrees, so radians(degrees(x)) may differ
    # from x in the last bit, as with astropy's writer).
    s = _samples(300, np.random.default_rng(2), teff_nan=False)
    t = s.to_table()
    read = Table.read(s.to_ecsv_text(), format="ascii.ecsv")
    for c in t.colnames:
        np.testing.assert_array_equal(np.asarray(read[c]), np.asarray(t[c]))
    back = SampleSet.from_table(read)
    for c in SAMPLE_COLUMNS:
        if c not in ("omega", "inc"):
            np.testing.assert_array_equal(getattr(back, c), getattr(s, c))
    # weights are normalised again on construction (last-bit changes, as with astropy's writer)
    np.testing.assert_allclose(back.weights, s.weights, rtol=1e-14, atol=0)
    assert back.name == s.name and back.meta == s.meta


def test_no_samples_is_a_readable_empty_table():
    s = SampleSet(name="empty", weights=np.zeros(0), **{c: np.zeros(0) for c in SAMPLE_COLUMNS})
    t = Table.read(s.to_ecsv_text(), format="ascii.ecsv")
    assert len(t) == 0 and "weight" in t.colnames


@given(arrays(np.float64, st.integers(1, 40),
              elements=st.floats(allow_nan=True, allow_infinity=True, width=64)))
@settings(max_examples=60, deadline=None)
def test_any_float_reads_back_bit_for_bit(x):
    # Shortest round-trip repr (Python's float repr) against astropy's reader, NaN and inf included.
    n = x.size
    s = _samples(n, np.random.default_rng(3), e=x)
    t = Table.read(s.to_ecsv_text(), format="ascii.ecsv")
    got = np.asarray(t["e"], dtype=float)
    np.testing.assert_array_equal(got, np.asarray(s.to_table()["e"], dtype=float))
