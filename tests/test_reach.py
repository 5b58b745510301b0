"""Targets that never reach a site's altitude limit (planning.reach)."""
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rhofollow.planning.reach import _circle, highest_altitude_deg, unreachable_targets
from rhofollow.planning.site import Constraints, Site


def _site(lat, min_alt=30.0, mask=()):
    return Site(name="Test Site", latitude_deg=lat, longitude_deg=0.0, elevation_m=0.0, timezone="UTC",
                constraints=Constraints(min_altitude_deg=min_alt, horizon_mask=mask))


@settings(max_examples=60, deadline=None)
@given(lat=st.floats(-89.0, 89.0), dec=st.floats(-89.5, 89.5))
def test_top_of_the_diurnal_circle_is_the_upper_culmination(lat, dec):
    # upper culmination altitude 90 - |phi - delta| (standard spherical astronomy; common practice, no source)
    alt, _az = _circle([dec], lat)
    assert alt.max() == pytest.approx(highest_altitude_deg(dec, lat), abs=1e-3)


def test_pole_and_meridian_geometry():
    # the celestial pole stands at altitude = latitude (common practice, no source)
    alt, _ = _circle([90.0], 40.0)
    assert np.allclose(alt, 40.0)
    # a star south of the zenith culminates due south (az 180) as seen from the northern hemisphere
    alt, az = _circle([0.0], 40.0)
    assert az[0, np.argmax(alt[0])] == pytest.approx(180.0, abs=0.5)
    # and one north of the zenith seen from the south culminates due north (az 0)
    alt, az = _circle([10.0], -30.0)
    assert min(az[0, np.argmax(alt[0])], 360.0 - az[0, np.argmax(alt[0])]) < 0.5


def test_unreachable_targets_at_a_southern_site():
    s = _site(-30.4)
    out = unreachable_targets(s, [("far-north", 75.0), ("low-north", 50.0), ("ok", 29.0), ("south", -60.0),
                                  ("no-dec", math.nan)])
    assert set(out) == {"far-north", "low-north"}
    assert "never rises" in out["far-north"] and "highest altitude -15.4" in out["far-north"]
    assert "altitude limit" in out["low-north"] and "9.6" in out["low-north"]


def test_horizon_mask_can_hide_a_target():
    # dec +14.6 at latitude -30.4 culminates 45 deg above the northern horizon: above a 30 deg limit,
    # below a 50 deg wall of the horizon mask all round
    assert float(highest_altitude_deg(14.6, -30.4)) == pytest.approx(45.0)
    assert unreachable_targets(_site(-30.4, 30.0), [("x", 14.6)]) == {}
    walled = _site(-30.4, 30.0, mask=((0.0, 50.0), (180.0, 50.0)))
    assert "altitude limit" in unreachable_targets(walled, [("x", 14.6)])["x"]
