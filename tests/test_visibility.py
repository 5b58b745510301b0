"""Visibility engine against astropy (AltAz, get_body) and astroplan (Observer, moon_illumination).

References: astroplan's ``Observer.sun_set_time`` / ``sun_rise_time`` (root-finding on astropy's
AltAz of ``get_body('sun')``, no refraction) for sunset, sunrise and twilight; astropy's ``AltAz``
frame (pressure 0, i.e. no refraction) for altitudes and azimuths; astropy ``get_body('moon')``
separation in the Moon's GCRS frame (the frame astroplan's MoonSeparationConstraint uses) and
astroplan ``moon_illumination`` for the Moon.
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import functools
import warnings
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import GCRS, AltAz, SkyCoord, get_body
from astropy.time import Time
from hypothesis import given, settings
from hypothesis import strategies as st

from rhofollow.core import timescales as offline
from rhofollow.planning.site import Constraints, Site, load_site
from rhofollow.planning.visibility import (NightGrid, VisibilityEngine, datetime_to_jd,
                                           jd_to_datetime_utc)

DEMO = Path(__file__).resolve().parents[1] / "site_configs" / "alto_quemado.toml"
JD0 = 2461376.5  # 2026-12-02 00:00 UTC


@functools.lru_cache(maxsize=None)
def demo_site() -> Site:
    return load_site(DEMO, check_files=False)


@functools.lru_cache(maxsize=None)
def engine(twilight: str = "nautical", sunset: float = -50 / 60) -> VisibilityEngine:
    site = demo_site()
    site = dataclasses.replace(site, constraints=dataclasses.replace(site.constraints, twilight=twilight))
    return VisibilityEngine(site, sunset_altitude_deg=sunset)


def random_targets(n, seed):
    rng = np.random.default_rng(seed)
    return rng.uniform(0, 360, n), np.degrees(np.arcsin(rng.uniform(-1, 1, n)))


def astropy_altaz(site, ra, dec, times):
    t = Time(times, format="jd", scale="utc")
    frame = AltAz(obstime=t[None, :], location=site.location)  # pressure 0: no refraction
    return SkyCoord(ra[:, None] * u.deg, dec[:, None] * u.deg).transform_to(frame)


# --------------------------------------------------------------------------- night boundaries

@pytest.mark.parametrize("date", ["2026-12-21", "2027-03-20", "2027-06-21"])
@pytest.mark.parametrize("twilight,level", [("civil", -6), ("nautical", -12), ("astronomical", -18)])
def test_twilight_matches_astroplan_within_one_minute(date, twilight, level):
    # reference: astroplan Observer.sun_set_time / sun_rise_time with horizon = twilight level
    eng = engine(twilight, 0.0)
    g = eng.night(date)
    obs = eng.site.observer()
    noon = Time(g.noon_jd, format="jd")
    ref_dusk = obs.sun_set_time(noon, which="next", horizon=level * u.deg).jd
    ref_dawn = obs.sun_rise_time(noon, which="next", horizon=level * u.deg).jd
    assert abs(g.dusk_jd - ref_dusk) * 1440 < 1.0
    assert abs(g.dawn_jd - ref_dawn) * 1440 < 1.0
    assert g.start_jd == g.dusk_jd and g.end_jd == g.dawn_jd


@pytest.mark.parametrize("horizon", [0.0, -50 / 60])
def test_sunset_sunrise_match_astroplan_within_one_minute(horizon):
    # reference: astroplan Observer.sun_set_time / sun_rise_time (Sun centre at `horizon`, no refraction)
    eng = engine("nautical", horizon)
    obs = eng.site.observer()
    for g in eng.nights("2027-01-05", "2027-01-06") + [eng.night("2027-07-15")]:
        noon = Time(g.noon_jd, format="jd")
        assert abs(g.sunset_jd - obs.sun_set_time(noon, which="next", horizon=horizon * u.deg).jd) * 1440 < 1.0
        assert abs(g.sunrise_jd - obs.sun_rise_time(noon, which="next", horizon=horizon * u.deg).jd) * 1440 < 1.0


def test_night_grid_shape_and_order():
    eng = engine()
    nights = eng.nights("2027-02-01", "2027-02-10")
    assert [g.date for g in nights] == [dt.date(2027, 2, 1) + dt.timedelta(days=i) for i in range(10)]
    for g in nights:
        assert isinstance(g, NightGrid) and g.kind == "normal"
        assert g.noon_jd < g.sunset_jd < g.dusk_jd < g.dawn_jd < g.sunrise_jd < g.next_noon_jd
        t = g.times_jd
        assert t[0] == g.start_jd and t[-1] <= g.end_jd and g.end_jd - t[-1] < 5 / 1440
        assert np.allclose(np.diff(t) * 1440, 5.0)
        # the Sun's centre is below the nautical limit (-12 deg) over the whole grid
        assert np.all(eng.sun_altitude(t) < -12.0)   # including both ends of the grid
    # local evening of the date (America/Santiago, tzdata): sunset between 18:00 and 22:00 local
    local = eng.local_time(nights[0].sunset_jd)
    assert local.date() == dt.date(2027, 2, 1) and 18 <= local.hour < 22


def test_polar_site_has_no_night_in_summer_and_all_dark_in_winter():
    # invented high-Arctic site; midnight Sun near the June solstice, polar night near December
    # (common practice, no source)
    site = Site(name="Polar test", latitude_deg=78.0, longitude_deg=15.0, elevation_m=10.0,
                timezone="Europe/Oslo", constraints=Constraints(min_altitude_deg=10.0, twilight="civil"))
    eng = VisibilityEngine(site)
    june, dec = eng.night("2027-06-21"), eng.night("2026-12-21")
    assert june.kind == "no_night" and june.times_jd.size == 0 and june.duration_hours == 0.0
    assert np.isnan(june.sunset_jd)
    assert dec.kind == "dark_all_day"
    assert dec.start_jd == dec.noon_jd and dec.end_jd == dec.next_noon_jd
    assert np.all(eng.sun_altitude(dec.times_jd) < -6.0)


def test_coming_night_date():
    eng = engine()
    tz = eng.site.tzinfo
    at = lambda h, day=2: datetime_to_jd(dt.datetime(2027, 2, day, h, 0, tzinfo=tz))  # noqa: E731
    assert eng.coming_night_date(at(2)) == dt.date(2027, 2, 1)    # inside last night
    assert eng.coming_night_date(at(10)) == dt.date(2027, 2, 2)   # morning: tonight comes next
    assert eng.coming_night_date(at(23)) == dt.date(2027, 2, 2)


def test_jd_datetime_round_trip():
    d = dt.datetime(2027, 3, 4, 5, 6, 7, 890000, tzinfo=dt.timezone.utc)
    # a float JD near 2.46e6 resolves ~40 microseconds
    assert abs(jd_to_datetime_utc(datetime_to_jd(d)) - d) < dt.timedelta(microseconds=100)
    # JD of 2000-01-01 12:00 UTC is 2451545.0 (common practice, no source)
    assert datetime_to_jd(dt.datetime(2000, 1, 1, 12, tzinfo=dt.timezone.utc)) == 2451545.0


# --------------------------------------------------------------------------- geometry vs astropy

def test_target_altitude_and_azimuth_match_astropy_altaz():
    eng = engine()
    ra, dec = random_targets(120, seed=11)
    times = JD0 + np.sort(np.random.default_rng(12).uniform(0, 300, 40))
    alt, az = eng.altaz(ra, dec, times)
    ref = astropy_altaz(eng.site, ra, dec, times)          # reference: astropy AltAz, no refraction
    assert alt.shape == (120, 40)
    assert np.max(np.abs(alt - ref.alt.deg)) < 0.05
    daz = (az - ref.az.deg + 180.0) % 360.0 - 180.0
    assert np.max(np.abs(daz * np.cos(np.radians(alt)))) < 0.05
    assert np.allclose(eng.altitude(ra, dec, times), alt)


def test_airmass_is_sec_z():
    eng = engine()
    ra, dec = random_targets(30, seed=3)
    times = JD0 + np.linspace(0, 1, 25)
    x = eng.airmass(ra, dec, times)
    ref = astropy_altaz(eng.site, ra, dec, times)
    up = ref.alt.deg > 5
    # reference: astropy AltAz.secz (plane-parallel airmass)
    assert np.allclose(x[up], ref.secz.value[up], rtol=2e-3)
    assert np.all(np.isinf(x[ref.alt.deg < -1]))


def test_sun_and_moon_match_astropy():
    eng = engine()
    times = JD0 + np.linspace(0, 40, 97)
    t = Time(times, format="jd")
    frame = AltAz(obstime=t, location=eng.site.location)
    sun = get_body("sun", t, eng.site.location).transform_to(frame)
    moon = get_body("moon", t, eng.site.location)
    moon_aa = moon.transform_to(frame)
    assert np.max(np.abs(eng.sun_altitude(times) - sun.alt.deg)) < 0.05
    m = eng.moon(times)
    assert np.max(np.abs(m["alt_deg"] - moon_aa.alt.deg)) < 0.05
    daz = (m["az_deg"] - moon_aa.az.deg + 180) % 360 - 180
    assert np.max(np.abs(daz * np.cos(np.radians(m["alt_deg"])))) < 0.05
    from astroplan import moon_illumination

    assert np.max(np.abs(m["illumination"] - moon_illumination(t))) < 0.005  # reference: astroplan


def test_moon_separation_matches_astropy():
    eng = engine()
    ra, dec = random_targets(60, seed=5)
    times = JD0 + np.linspace(0, 30, 31)
    sep = eng.moon_separation(ra, dec, times)
    t = Time(times, format="jd")
    moon = get_body("moon", t, eng.site.location)
    # reference: astropy separation in the Moon's topocentric GCRS frame (as astroplan's constraint)
    frame = GCRS(obstime=t[None, :], obsgeoloc=moon.frame.obsgeoloc[None, :],
                 obsgeovel=moon.frame.obsgeovel[None, :])
    tgt = SkyCoord(ra[:, None] * u.deg, dec[:, None] * u.deg).transform_to(frame)
    ref = moon[None, :].separation(tgt).deg
    assert np.max(np.abs(sep - ref)) < 0.05


# --------------------------------------------------------------------------- constraints

def independent_mask(site, ra, dec, times):
    """The site's constraints evaluated with astropy/astroplan only."""
    from astroplan import moon_illumination

    c = site.constraints
    t = Time(times, format="jd")
    aa = astropy_altaz(site, ra, dec, times)
    frame = AltAz(obstime=t, location=site.location)
    sun_alt = get_body("sun", t, site.location).transform_to(frame).alt.deg
    moon = get_body("moon", t, site.location)
    moon_alt = moon.transform_to(frame).alt.deg
    gframe = GCRS(obstime=t[None, :], obsgeoloc=moon.frame.obsgeoloc[None, :],
                  obsgeovel=moon.frame.obsgeovel[None, :])
    sep = moon[None, :].separation(SkyCoord(ra[:, None] * u.deg, dec[:, None] * u.deg)
                                   .transform_to(gframe)).deg
    need_sep = c.required_moon_separation_deg(moon_illumination(t))
    alt, az = aa.alt.deg, aa.az.deg
    ok = (sun_alt < c.sun_altitude_limit_deg)[None, :] & (alt >= c.required_altitude_deg(az))
    moon_ok = sep >= need_sep[None, :]
    if c.moon_ignore_below_horizon:
        moon_ok |= (moon_alt < 0)[None, :]
    # margins: how far each sample is from a constraint boundary (to skip knife-edge cases)
    margin = np.minimum(np.abs(alt - c.required_altitude_deg(az)),
                        np.minimum(np.abs(sun_alt - c.sun_altitude_limit_deg)[None, :],
                                   np.abs(sep - need_sep[None, :])))
    return ok & moon_ok, margin


@pytest.mark.parametrize("ignore_moon_down", [True, False])
def test_observable_mask_equals_independent_astropy_check(ignore_moon_down):
    site = demo_site()     # has a horizon mask, airmass limit, scaled Moon limit
    site = dataclasses.replace(site, constraints=dataclasses.replace(
        site.constraints, moon_ignore_below_horizon=ignore_moon_down))
    eng = VisibilityEngine(site)
    ra, dec = random_targets(80, seed=21)
    times = np.concatenate([eng.night("2027-01-20").times_jd[::6], eng.night("2027-04-22").times_jd[::6]])
    mask = eng.observable_mask(ra, dec, times)
    ref, margin = independent_mask(site, ra, dec, times)
    clear = margin > 0.02
    assert mask.shape == (80, times.size) and mask.dtype == bool
    assert 0.05 < mask.mean() < 0.95       # the check is not vacuous
    assert np.array_equal(mask[clear], ref[clear])


def test_horizon_mask_blocks_low_east():
    base = demo_site()
    wall = Constraints(min_altitude_deg=10.0, twilight="nautical",
                       horizon_mask=((0.0, 10.0), (45.0, 10.0), (46.0, 60.0), (134.0, 60.0), (135.0, 10.0)))
    eng_wall = VisibilityEngine(dataclasses.replace(base, constraints=wall))
    eng_open = VisibilityEngine(dataclasses.replace(base, constraints=dataclasses.replace(wall, horizon_mask=())))
    ra, dec = random_targets(100, seed=8)
    t = eng_open.night("2027-05-10").times_jd[::3]
    alt, az = eng_open.altaz(ra, dec, t)
    m_wall, m_open = eng_wall.observable_mask(ra, dec, t), eng_open.observable_mask(ra, dec, t)
    east_low = (az > 50) & (az < 130) & (alt > 12) & (alt < 58)
    assert east_low[m_open].any()
    assert not m_wall[east_low].any()                      # hidden behind the wall
    west = (az > 200) & (az < 340)
    assert np.array_equal(m_wall[west], m_open[west])      # untouched elsewhere
    assert np.all(m_wall <= m_open)


@functools.lru_cache(maxsize=None)
def prop_engine():
    return VisibilityEngine(demo_site())


@settings(max_examples=60, deadline=None)
@given(ra=st.floats(0, 360), dec=st.floats(-90, 90), day=st.floats(0, 200))
def test_property_mask_implies_every_constraint(ra, dec, day):
    # invariant of the definition (common practice, no source): observable => Sun below the
    # twilight limit, target above the altitude limit and outside the Moon limit
    eng = prop_engine()
    c = eng.site.constraints
    t = JD0 + day + np.linspace(0, 1, 49)
    ok = eng.observable_mask([ra], [dec], t)[0]
    sun = eng.sun_altitude(t)
    alt, az = eng.altaz([ra], [dec], t)
    assert not np.any(ok & (sun >= c.sun_altitude_limit_deg))
    assert not np.any(ok & (alt[0] < c.required_altitude_deg(az[0])))
    m = eng.moon(t)
    sep = eng.moon_separation([ra], [dec], t)[0]
    moon_bad = (sep < c.required_moon_separation_deg(m["illumination"])) & (m["alt_deg"] >= 0)
    assert not np.any(ok & moon_bad)


# --------------------------------------------------------------------------- windows and slots

def test_window_observability():
    eng = engine()
    g = eng.night("2027-03-10")
    # a star that culminates near the zenith at local midnight-ish: dec ~ latitude
    t_mid = 0.5 * (g.start_jd + g.end_jd)
    ra_grid = np.arange(0, 360, 2.0)
    best = ra_grid[np.argmax(eng.altitude(ra_grid, np.full(ra_grid.size, -30.0), [t_mid])[:, 0])]
    inside = [t_mid - 0.05, t_mid + 0.05]
    across_dawn = [g.end_jd - 0.05, g.end_jd + 0.05]
    res = eng.window_observability([best, best, best], [-30.0, -30.0, -30.0],
                                   [inside, across_dawn, inside], baseline_minutes=30)
    assert res.fraction[0] == 1.0 and res.in_one_night[0] and res.fully_observable[0]
    assert not res.in_one_night[1] and 0.2 < res.fraction[1] < 0.8
    assert res.night_date[0] == dt.date(2027, 3, 10)
    # 12 h of RA away: the target is below the horizon
    res2 = eng.window_observability([(best + 180) % 360], [30.0], [inside])
    assert res2.fraction[0] == 0.0 and res2.min_altitude_deg[0] < 0
    with pytest.raises(ValueError):
        eng.window_observability([0.0], [0.0], [[2.0, 1.0]])


def test_visible_slots_are_observable_and_long_enough():
    eng = engine()
    g = eng.night("2027-04-01")
    ra, dec = random_targets(40, seed=4)
    slots = eng.visible_slots(ra, dec, g, min_duration_minutes=60)
    mask = eng.observable_mask(ra, dec, g.times_jd)
    n_slots = 0
    for i, tgt in enumerate(slots):
        for a, b in tgt:
            n_slots += 1
            assert g.start_jd <= a < b <= g.end_jd and (b - a) * 1440 >= 60 - 1e-6
            inside = (g.times_jd >= a) & (g.times_jd <= b)
            assert mask[i, inside].all()
        if not tgt:  # no slot: no run of >= 60 min (13 samples) in the mask
            run = np.convolve(mask[i].astype(int), np.ones(13, int), "valid")
            assert not np.any(run == 13)
    assert n_slots > 5


# --------------------------------------------------------------------------- cache and offline

def test_cache_is_bounded():
    eng = VisibilityEngine(demo_site(), cache_nights=3)
    nights = eng.nights("2027-01-01", "2027-01-10")
    assert len(nights) == 10 and len(eng._cache) <= 3
    assert eng.night("2027-01-05") == nights[4]   # recomputed identically


def test_offline_configuration_and_single_notice():
    from astropy.utils import iers

    eng = engine()
    assert iers.conf.auto_download is False
    end = offline.iers_table_end_jd()
    offline.reset_notice()
    far = jd_to_datetime_utc(end + 400).date()
    with pytest.warns(offline.OfflineTablesWarning, match="once per run") as rec:
        g1 = eng.night(far)
        g2 = eng.night(far + dt.timedelta(days=30))
        alt = eng.altitude([10.0], [-30.0], g2.times_jd)
    assert len([w for w in rec if issubclass(w.category, offline.OfflineTablesWarning)]) == 1
    assert g1.kind == "normal" and np.all(np.isfinite(alt))
    # past the tables the engine still agrees with astropy's (equally extrapolated) AltAz
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = astropy_altaz(eng.site, np.array([10.0]), np.array([-30.0]), g2.times_jd[::20])
    assert np.max(np.abs(alt[:, ::20] - ref.alt.deg)) < 0.05
    offline.reset_notice()


def test_bad_inputs_raise_value_errors():
    eng = engine()
    with pytest.raises(ValueError):
        eng.altitude([1.0, 2.0], [1.0], [JD0])
    with pytest.raises(ValueError):
        eng.altitude([1.0], [95.0], [JD0])
    with pytest.raises(ValueError):
        eng.nights("2027-01-05", "2027-01-01")
    with pytest.raises(ValueError):
        eng.night("2027-13-01")
    with pytest.raises(ValueError):
        VisibilityEngine(demo_site(), step_minutes=0)


def test_no_network_is_touched(monkeypatch):
    import socket

    def refuse(*a, **k):
        raise AssertionError("network access attempted")

    monkeypatch.setattr(socket.socket, "connect", refuse)
    monkeypatch.setattr(socket, "create_connection", refuse)
    eng = VisibilityEngine(demo_site())
    offline.reset_notice()
    far = jd_to_datetime_utc(offline.iers_table_end_jd() + 100).date()
    with pytest.warns(offline.OfflineTablesWarning):
        g = eng.night(far)
    assert g.kind == "normal"
    assert eng.observable_mask([30.0], [-40.0], g.times_jd).shape == (1, g.times_jd.size)
    offline.reset_notice()


def test_nights_link_across_a_daylight_saving_change():
    # America/Santiago leaves summer time in early April (IANA tzdata); noon-to-noon windows
    # must still tile the time line, one of them 25 h long (common practice, no source)
    eng = engine()
    nights = eng.nights("2027-03-28", "2027-04-12")
    lengths = [round((g.next_noon_jd - g.noon_jd) * 24, 6) for g in nights]
    assert all(a.next_noon_jd == b.noon_jd for a, b in zip(nights, nights[1:]))
    assert lengths.count(25.0) == 1 and lengths.count(24.0) == len(nights) - 1
    for g in nights:
        noon = eng.local_time(g.noon_jd)
        assert abs(noon - noon.replace(hour=12, minute=0, second=0, microsecond=0)) < dt.timedelta(milliseconds=1)
    # a time exactly at local noon belongs to the night that starts that evening
    assert eng.sun_altitude([nights[3].noon_jd]).shape == (1,)
    assert eng._night_date_of(nights[3].noon_jd) == nights[3].date
    assert eng._night_date_of(nights[3].noon_jd - 1e-6) == nights[2].date


def test_window_fraction_agrees_with_observable_mask():
    # the per-window path and the targets x times path must apply the same constraints
    eng = prop_engine()   # demo site: horizon mask, airmass, scaled Moon limit ignored when Moon down
    ra, dec = random_targets(25, seed=31)
    rng = np.random.default_rng(32)
    starts = JD0 + 40 + rng.uniform(0, 3, ra.size)
    windows = np.stack([starts, starts + 1 / 24], axis=1)
    res = eng.window_observability(ra, dec, windows, step_minutes=5)
    w = np.ones(13)
    w[[0, -1]] = 0.5
    for i in range(ra.size):
        t = np.linspace(windows[i, 0], windows[i, 1], 13)
        ok = eng.observable_mask([ra[i]], [dec[i]], t)[0]
        assert res.fraction[i] == pytest.approx(np.sum(ok * w) / w.sum())
        assert res.min_altitude_deg[i] == pytest.approx(eng.altitude([ra[i]], [dec[i]], t).min())
    assert 0 < np.mean(res.fraction) < 1


@settings(max_examples=30, deadline=None)
@given(ra=st.floats(0, 360), dec=st.floats(-90, 90), start=st.floats(0, 200), hours=st.floats(0, 30))
def test_property_window_fraction_bounds(ra, dec, start, hours):
    # a fraction is in [0, 1]; a window that is not inside one night cannot be fully observable
    eng = prop_engine()
    t0 = JD0 + start
    res = eng.window_observability([ra], [dec], [[t0, t0 + hours / 24]])
    assert 0.0 <= res.fraction[0] <= 1.0
    if hours > 14:   # longer than any night at latitude -30 (common practice, no source)
        assert not res.in_one_night[0] and not res.fully_observable[0]


def test_cli_gives_one_concise_notice_for_dates_past_the_tables(capsys):
    """night past the installed tables: one 'notice:' line, no raw warning with a source line
    (issue: a raw OfflineTablesWarning and then a second notice were printed)."""
    from rhofollow.cli import main

    offline.reset_notice()
    root = Path(__file__).resolve().parents[1]
    rc = main(["night", str(root / "examples" / "hts_candidates.csv"), "--site",
               str(root / "site_configs" / "alto_quemado.toml"), "--date", "2029-05-01",
               "--samples", "500"])
    err = capsys.readouterr().err
    offline.reset_notice()
    assert rc in (0, 1)
    notices = [ln for ln in err.splitlines() if "tables" in ln and ln.startswith("notice:")]
    assert len(notices) == 1, err
    assert "OfflineTablesWarning" not in err and "warnings.warn" not in err
