"""Site files: loading the demo site and one clear error per bad-config rule."""
from __future__ import annotations

import dataclasses
import math
import textwrap
from pathlib import Path

import numpy as np
import pytest

from rhofollow.planning.site import (ConfigError, Site, airmass_to_altitude_deg, check_site, load_site)

DEMO = Path(__file__).resolve().parents[1] / "site_configs" / "alto_quemado.toml"

GOOD = textwrap.dedent("""\
    instruments = ["inst/spec.toml"]

    [site]
    name = "Test Ridge"
    latitude_deg = -30.0
    longitude_deg = -70.0
    elevation_m = 2000.0
    timezone = "America/Santiago"

    [constraints]
    min_altitude_deg = 20.0
    twilight = "astronomical"
    min_moon_separation_deg = 25.0

    [overheads]
    slew_minutes = 3.0
    setup_minutes = 5.0
    """)


def write(tmp_path, text, name="site.toml", with_instruments=True):
    p = tmp_path / name
    p.write_text(text)
    if with_instruments:
        (tmp_path / "inst").mkdir(exist_ok=True)
        (tmp_path / "inst" / "spec.toml").write_text(
            'kind = "spectrograph"\nname = "TestSpec"\nprecision_ref_ms = 2.0\nvmag_ref = 10.0\n'
            'exposure_ref_s = 900\nfloor_ms = 1.0\noverhead_min = 5\n')
    return p


def edit(old, new):
    assert old in GOOD
    return GOOD.replace(old, new)


def problems_for(tmp_path, text):
    p = write(tmp_path, text)
    probs = check_site(p)
    with pytest.raises(ConfigError) as ei:
        load_site(p)
    assert str(p) in str(ei.value)
    assert ei.value.problems  # every problem is also carried by the exception
    return probs, str(ei.value)


def test_demo_site_loads():
    site = load_site(DEMO, check_files=False)
    assert site.name == "Alto Quemado Observatory"
    assert site.latitude_deg == pytest.approx(-30.4127)
    assert site.longitude_deg == pytest.approx(-70.5361)
    assert site.timezone == "America/Santiago"
    assert site.constraints.twilight == "nautical"
    # max_airmass = 2 (sec z) is altitude 30 deg, stricter than min_altitude_deg = 25
    # (sec z = 1/cos z: common practice, no source)
    assert site.constraints.min_altitude_deg == pytest.approx(30.0)
    assert site.constraints.sun_altitude_limit_deg == -12.0   # REFERENCE.md section 12 (nautical)
    assert [p.name for p in site.instruments] == ["aq_vel.toml", "aq_cam.toml"]
    assert all(p.is_absolute() and p.parent == DEMO.parent / "instruments" for p in site.instruments)
    assert site.slew_minutes == 4.0 and site.setup_minutes == 6.0


def test_good_file_and_location(tmp_path):
    site = load_site(write(tmp_path, GOOD))
    assert check_site(tmp_path / "site.toml") == []
    assert site.instruments == ((tmp_path / "inst" / "spec.toml").resolve(),)
    loc = site.location  # astropy EarthLocation round trip of the geodetic coordinates
    assert loc.lat.deg == pytest.approx(-30.0, abs=1e-9)
    assert loc.lon.deg == pytest.approx(-70.0, abs=1e-9)
    assert loc.height.to_value("m") == pytest.approx(2000.0, abs=1e-6)
    assert site.tzinfo.key == "America/Santiago"
    with pytest.raises(dataclasses.FrozenInstanceError):
        site.latitude_deg = 0.0
    assert hash(site) == hash(load_site(tmp_path / "site.toml"))


def test_instruments_inside_site_table_are_accepted(tmp_path):
    text = GOOD.replace('instruments = ["inst/spec.toml"]\n', "").replace(
        'timezone = "America/Santiago"', 'timezone = "America/Santiago"\ninstruments = ["inst/spec.toml"]')
    site = load_site(write(tmp_path, text))
    assert len(site.instruments) == 1


def test_longitude_0_360_is_wrapped(tmp_path):
    site = load_site(write(tmp_path, edit("longitude_deg = -70.0", "longitude_deg = 290.0")))
    assert site.longitude_deg == pytest.approx(-70.0)


@pytest.mark.parametrize("old,new,key,words", [
    ("latitude_deg = -30.0\n", "", "site.latitude_deg", "missing"),
    ('name = "Test Ridge"\n', "", "site.name", "missing"),
    ('timezone = "America/Santiago"\n', "", "site.timezone", "missing"),
    ('twilight = "astronomical"\n', "", "constraints.twilight", "missing"),
    ("min_altitude_deg = 20.0\n", "", "constraints.min_altitude_deg", "max_airmass"),
    ("latitude_deg = -30.0", "latitude_deg = 95.0", "site.latitude_deg", "-90"),
    ("latitude_deg = -30.0", "latitude_deg = -90.5", "site.latitude_deg", "-90"),
    ('timezone = "America/Santiago"', 'timezone = "America/Santago"', "site.timezone", "America/Santiago"),
    ('timezone = "America/Santiago"', 'timezone = "Mars/Olympus"', "site.timezone", "unknown IANA"),
    ('twilight = "astronomical"', 'twilight = "astronomic"', "constraints.twilight", "'nautical'"),
    ("latitude_deg = -30.0", 'latitude_deg = "-30"', "site.latitude_deg", "must be a number"),
    ("elevation_m = 2000.0", "elevation_m = true", "site.elevation_m", "must be a number"),
    ("min_altitude_deg = 20.0", "min_altitude_deg = 20.0\nmax_airmass = 0.9", "constraints.max_airmass", "> 1.0"),
    ("slew_minutes = 3.0", "slew_minutes = -1", "overheads.slew_minutes", ">= 0"),
    ('instruments = ["inst/spec.toml"]', 'instruments = "inst/spec.toml"', "instruments", "list"),
    ('instruments = ["inst/spec.toml"]', 'instruments = ["inst/nope.toml"]', "instruments[0]", "not found"),
    ("min_moon_separation_deg = 25.0", "min_moon_separation_deg = 25.0\nmin_moon_separation_new_deg = 40.0",
     "constraints.min_moon_separation_new_deg", "must not exceed"),
    ("slew_minutes = 3.0", "slew_minuts = 3.0", "overheads.slew_minuts", "did you mean 'overheads.slew_minutes'"),
    ("[overheads]", "[overhead]", "overhead", "did you mean 'overheads'"),
    ("[constraints]\n", "[limits]\n", "constraints", "missing table"),
    ("min_moon_separation_deg = 25.0", "min_moon_separation_deg = 25.0\nmoon_ignore_below_horizon = 1",
     "constraints.moon_ignore_below_horizon", "true or false"),
])
def test_each_bad_config_rule_names_file_and_key(tmp_path, old, new, key, words):
    probs, msg = problems_for(tmp_path, edit(old, new))
    hits = [p for p in probs if f"key '{key}'" in p]
    assert hits, probs
    assert words in hits[0]
    assert all(p.startswith(str(tmp_path / "site.toml")) for p in probs)
    assert f"key '{key}'" in msg


@pytest.mark.parametrize("mask,words", [
    ("[[0, 10], [180, 20], [90, 15]]", "strictly increasing"),
    ("[[0, 10], [90, 10], [90, 15]]", "strictly increasing"),
    ("[[0, 10], [90]]", "pair"),
    ("[[0, 10], [400, 10]]", "0-360"),
    ("[[0, 10], [360, 10]]", "same direction"),
    ("[]", "non-empty"),
    ('"east"', "non-empty list"),
])
def test_horizon_mask_rules(tmp_path, mask, words):
    text = edit("min_moon_separation_deg = 25.0", f"min_moon_separation_deg = 25.0\nhorizon_mask = {mask}")
    probs, _ = problems_for(tmp_path, text)
    assert any("constraints.horizon_mask" in p and words in p for p in probs), probs


def test_all_problems_reported_at_once(tmp_path):
    text = edit("latitude_deg = -30.0", "latitude_deg = 123.0").replace(
        'twilight = "astronomical"', 'twilight = "dusk"')
    probs, msg = problems_for(tmp_path, text)
    assert len(probs) == 2
    assert "2 problems" in msg


def test_unreadable_files(tmp_path):
    assert "file not found" in check_site(tmp_path / "absent.toml")[0]
    bad = write(tmp_path, "[site\nname = 1\n", name="broken.toml")
    probs = check_site(bad)
    assert len(probs) == 1 and "not valid TOML" in probs[0] and str(bad) in probs[0]
    with pytest.raises(ValueError, match="not valid TOML"):  # ConfigError is a ValueError
        load_site(bad)


def test_check_files_false_skips_instrument_existence(tmp_path):
    p = write(tmp_path, edit('"inst/spec.toml"', '"inst/later.toml"'))
    assert load_site(p, check_files=False).instruments[0].name == "later.toml"
    assert any("not found" in x for x in check_site(p))


def test_horizon_mask_interpolation_wraps_at_north():
    from rhofollow.planning.site import Constraints

    c = Constraints(min_altitude_deg=10.0, horizon_mask=((10.0, 30.0), (90.0, 20.0), (350.0, 40.0)))
    # linear in azimuth between the listed points, across 360 -> 0 as well (common practice, no source)
    assert c.required_altitude_deg(50.0) == pytest.approx(25.0)
    assert c.required_altitude_deg(0.0) == pytest.approx(35.0)      # halfway from 350 (40) to 370 (30)
    assert c.required_altitude_deg(360.0) == pytest.approx(35.0)
    assert c.required_altitude_deg(220.0) == pytest.approx(30.0)    # halfway from 90 (20) to 350 (40)
    no_mask = Constraints(min_altitude_deg=10.0)
    assert np.all(no_mask.required_altitude_deg(np.array([0.0, 200.0])) == 10.0)


def test_moon_separation_scales_with_illumination():
    from rhofollow.planning.site import Constraints

    c = Constraints(min_moon_separation_deg=30.0, min_moon_separation_new_deg=10.0)
    assert np.allclose(c.required_moon_separation_deg([0.0, 0.5, 1.0]), [10.0, 20.0, 30.0])
    assert np.allclose(Constraints(min_moon_separation_deg=30.0).required_moon_separation_deg([0, 1]), 30.0)


def test_airmass_to_altitude():
    # sec z = X  <=>  alt = 90 deg - arccos(1/X) (plane-parallel airmass, REFERENCE.md section 12)
    assert airmass_to_altitude_deg(2.0) == pytest.approx(30.0)
    assert airmass_to_altitude_deg(1.0 / math.cos(math.radians(60.0))) == pytest.approx(30.0)
    assert airmass_to_altitude_deg(1.5) == pytest.approx(41.8103149, abs=1e-6)


def test_site_is_a_plain_value():
    s = Site(name="x", latitude_deg=1.0, longitude_deg=2.0, elevation_m=3.0, timezone="UTC")
    assert s.constraints.twilight == "astronomical" and s.instruments == ()


def test_check_site_also_validates_instrument_files(tmp_path):
    p = write(tmp_path, GOOD)
    (tmp_path / "inst" / "spec.toml").write_text('kind = "telescope"\nname = "x"\n')
    probs = check_site(p)
    assert len(probs) == 1 and "spec.toml" in probs[0] and "kind" in probs[0]


def test_demo_site_and_its_instruments_are_valid():
    assert check_site(DEMO) == []
