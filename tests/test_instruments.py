"""Instrument TOML files: the demo files load; every bad key gets a message naming file and key."""
from pathlib import Path

import pytest

from rhofollow.io.instruments import InstrumentError, Photometer, Spectrograph, read_instrument, read_instruments

ROOT = Path(__file__).resolve().parents[1]
SPEC = ('kind = "spectrograph"\nname = "X"\nprecision_ref_ms = 2.0\nvmag_ref = 9.0\nexposure_ref_s = 900\n'
        'floor_ms = 0.5\noverhead_min = 5\n')


def test_demo_files():
    v = read_instrument(ROOT / "site_configs/instruments/aq_vel.toml")
    c = read_instrument(ROOT / "site_configs/instruments/aq_cam.toml")
    assert isinstance(v, Spectrograph) and v.name == "AQ-VEL" and v.overhead_s == 420.0
    assert isinstance(c, Photometer) and c.name == "AQ-CAM" and c.overhead_min > 0
    assert set(read_instruments([v.source, c.source])) == {"AQ-VEL", "AQ-CAM"}


@pytest.mark.parametrize("text, match", [
    (SPEC.replace('kind = "spectrograph"', 'kind = "camera"'), "key 'kind'"),
    (SPEC.replace("precision_ref_ms = 2.0\n", ""), "key 'precision_ref_ms' is missing"),
    (SPEC.replace("floor_ms = 0.5", "floor_ms = -1"), "key 'floor_ms' must be >= 0"),
    (SPEC.replace("exposure_ref_s = 900", "exposure_ref_s = 0"), "key 'exposure_ref_s' must be > 0"),
    (SPEC.replace("vmag_ref = 9.0", 'vmag_ref = "nine"'), "key 'vmag_ref' must be a number"),
    (SPEC + "colour = 3\n", "unknown key 'colour'"),
    (SPEC.replace('name = "X"', 'name = ""'), "key 'name'"),
    (SPEC + "exposure_min_s = 900\nexposure_max_s = 600\n", "key 'exposure_min_s'"),
    ("kind = \n", "not valid TOML"),
])
def test_bad_files(tmp_path, text, match):
    p = tmp_path / "inst.toml"
    p.write_text(text)
    with pytest.raises(InstrumentError, match=match) as exc:
        read_instrument(p)
    assert str(p) in str(exc.value)


def test_missing_and_duplicate(tmp_path):
    with pytest.raises(InstrumentError, match="not found"):
        read_instrument(tmp_path / "none.toml")
    a, b = tmp_path / "a.toml", tmp_path / "b.toml"
    a.write_text(SPEC)
    b.write_text(SPEC)
    with pytest.raises(InstrumentError, match="repeats instrument 'X'"):
        read_instruments([a, b])
