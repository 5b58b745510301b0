"""The time helpers' one home (rhofollow.core.timescales), checked against astropy Time as the
reference library; and the offline-tables notice of the night and campaign documents."""
from __future__ import annotations

import datetime as dt
import json
import warnings
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rhofollow.core import timescales as ts

ROOT = Path(__file__).resolve().parents[1]
DAY_S = 86400.0


def _utc_time(value, **kw):
    from astropy.time import Time

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")   # dubious-year warnings of far dates
        return Time(value, scale="utc", **kw)


@pytest.mark.parametrize("iso", ["2027-01-10", "2027-01-10T18:30:15", "2030-06-01T00:00:00Z",
                                 "1999-12-31T23:59:59+00:00", "2027-03-01T12:00:00-03:00"])
def test_iso_to_jd_agrees_with_astropy(iso):
    # reference: astropy Time (UTC scale, ISO input); no leap second inside any of these days
    ref = _utc_time(dt.datetime.fromisoformat(iso.replace("Z", "+00:00")))
    assert ts.iso_to_jd(iso) == pytest.approx(ref.jd, abs=1e-9)


def test_iso_to_jd_passes_a_jd_and_takes_naive_datetimes_as_utc():
    assert ts.iso_to_jd(2461416.25) == 2461416.25
    assert ts.iso_to_jd(np.float64(2461416.25)) == 2461416.25
    naive = dt.datetime(2027, 1, 10, 6, 0, 0)
    assert ts.iso_to_jd(naive) == pytest.approx(_utc_time(naive).jd, abs=1e-9)   # astropy Time


def test_jd_to_iso_agrees_with_astropy_to_the_second():
    # reference: astropy Time(jd, format="jd", scale="utc").isot, rounded to the second
    for jd in (2461416.0, 2461416.123456, 2462000.99999, 2451544.5):
        ref = _utc_time(jd, format="jd")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ref_s = _utc_time(round(ref.unix), format="unix").isot[:19] + "Z"
        assert ts.jd_to_iso(jd) == ref_s


def test_datetime_to_jd_agrees_with_astropy_in_any_zone():
    # reference: astropy Time of an aware datetime (converted to UTC)
    for d in (dt.datetime(2027, 1, 10, 21, 15, tzinfo=ZoneInfo("America/Santiago")),
              dt.datetime(2027, 7, 1, 3, 0, 7, 250000, tzinfo=dt.timezone.utc),
              dt.datetime(2031, 3, 29, 2, 30, tzinfo=ZoneInfo("Europe/Madrid"))):
        assert ts.datetime_to_jd(d) == pytest.approx(_utc_time(d.astimezone(dt.timezone.utc)).jd, abs=1e-9)
    with pytest.raises(ValueError, match="timezone-aware"):
        ts.datetime_to_jd(dt.datetime(2027, 1, 1))


def test_jd_to_datetime_utc_agrees_with_astropy():
    # reference: astropy Time.to_datetime (UTC), within a microsecond
    for jd in (2461416.0, 2461416.37512345, 2463000.5):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")   # dubious-year warnings of far dates
            ref = _utc_time(jd, format="jd").to_datetime(timezone=dt.timezone.utc)
        got = ts.jd_to_datetime_utc(jd)
        assert got.tzinfo is not None and abs((got - ref).total_seconds()) <= 1e-6


@settings(max_examples=60, deadline=None)
@given(jd=st.floats(2440000.0, 2480000.0))
def test_property_round_trips(jd):
    # invariants: JD -> datetime -> JD within a microsecond; JD -> ISO -> JD within half a second
    assert abs(ts.datetime_to_jd(ts.jd_to_datetime_utc(jd)) - jd) * DAY_S < 2e-6
    assert abs(ts.iso_to_jd(ts.jd_to_iso(jd)) - jd) * DAY_S <= 0.5 + 1e-6


def test_bjd_minus_jd_is_tdb_minus_utc_plus_light_travel():
    # reference: astropy Time (TDB - UTC = 32.184 s + 37 s of leap seconds since 2017, IERS
    # Bulletin C) and the size of the barycentric correction (|ltt| <= 1.02 au / c ~ 509 s)
    from astropy.coordinates import EarthLocation

    site = EarthLocation.from_geodetic(-70.4, -24.6, 2600.0)
    jd = ts.iso_to_jd("2027-01-10T03:00:00")
    d = ts.bjd_minus_jd([150.0, 10.0, 90.0], [-20.0, 45.0, -66.56], jd, site) * DAY_S
    assert d.shape == (3,)
    assert np.all(np.abs(d - 69.184) < 510.0)
    # the south ecliptic pole (RA 6 h, Dec -66.56 deg) is normal to the Earth's orbit: the light-travel
    # term is only the few-second out-of-plane part (geometry, common practice, no source)
    assert abs(d[2] - 69.184) < 10.0 and abs(d[0] - 69.184) > 10.0


def test_bjd_minus_jd_inverts_bjd_tdb_to_utc():
    # two routes to the same barycentric correction: astropy's Time.light_travel_time (bjd_minus_jd)
    # and the frame-free geometry of bjd_tdb_to_utc; the UTC time comes back to the second
    from astropy.coordinates import EarthLocation

    site = EarthLocation.from_geodetic(-70.4, -24.6, 2600.0)
    jd = ts.iso_to_jd("2027-02-01T05:00:00")
    bjd = jd + ts.bjd_minus_jd(150.0, -20.0, jd, site)[0]
    iso, notice = ts.bjd_tdb_to_utc([bjd], 150.0, -20.0, location=site)
    assert abs(ts.iso_to_jd(iso[0]) - jd) * DAY_S <= 1.0
    assert notice == ""


def test_old_import_places_are_the_same_functions():
    from rhofollow.planning import night, tasks
    from rhofollow.planning import visibility
    from rhofollow.stages import occultations

    assert tasks.iso_to_jd is ts.iso_to_jd and tasks.jd_to_iso is ts.jd_to_iso
    assert visibility.datetime_to_jd is ts.datetime_to_jd
    assert visibility.jd_to_datetime_utc is ts.jd_to_datetime_utc
    assert night.bjd_minus_jd is ts.bjd_minus_jd and occultations.bjd_tdb_to_utc is ts.bjd_tdb_to_utc


# --- the offline-tables notice in the documents (review bug: it went missing from the night and
# --- campaign JSON when the visibility code had emitted the run's notice first)

CAT = ROOT / "examples" / "hts_candidates.csv"
SITE = ROOT / "site_configs" / "alto_quemado.toml"


@pytest.fixture
def offline(monkeypatch):
    """No network (any connection attempt fails the test) and a fresh once-per-run notice state."""
    import socket

    def refuse(*a, **k):
        raise AssertionError("network access attempted")

    monkeypatch.setattr(socket.socket, "connect", refuse)
    monkeypatch.setattr(socket, "create_connection", refuse)
    ts.reset_notice()
    yield
    ts.reset_notice()


def _far_date(days: float) -> dt.date:
    return ts.jd_to_datetime_utc(ts.iers_table_end_jd() + days).date()


def _notices(path) -> list[str]:
    return json.loads(Path(path).read_text())["notices"]


def test_night_and_campaign_documents_carry_the_notice_when_visibility_gave_it_first(offline, tmp_path, capsys):
    from rhofollow.cli import main

    night = _far_date(500)
    for run in (1, 2):   # a second in-process run: the notice was already given and shown
        rc = main(["night", str(CAT), "--site", str(SITE), "--date", str(night), "--samples", "300",
                   "--json", str(tmp_path / f"night{run}.json")])
        assert rc in (0, 1)
        assert ts.TABLES_NOTICE in _notices(tmp_path / f"night{run}.json")
    rc = main(["campaign", str(CAT), "--site", str(SITE), "--start", str(night),
               "--end", str(night + dt.timedelta(days=2)), "--samples", "300",
               "--json", str(tmp_path / "campaign.json")])
    assert rc in (0, 1)
    assert ts.TABLES_NOTICE in _notices(tmp_path / "campaign.json")
    # the terminal still says it once for the whole session
    err = capsys.readouterr().err
    assert len([ln for ln in err.splitlines() if ln.startswith("notice:") and "tables" in ln]) == 1, err


def test_documents_within_the_tables_carry_no_notice(offline):
    from rhofollow.stages.occultations import predict_occultations

    assert ts.TABLES_NOTICE not in predict_occultations([], "2027-01-10", "2027-01-12")["notices"]
    start = _far_date(10)
    doc = predict_occultations([], str(start), str(start + dt.timedelta(days=2)))
    assert doc["notices"] == [ts.TABLES_NOTICE]


def test_the_notice_does_not_depend_on_what_ran_before(offline):
    # every conversion past the tables reports it, given or not given before
    for _ in range(2):
        _, notice = ts.bjd_tdb_to_utc([2470000.5], 10.0, 20.0)
        assert notice == ts.TABLES_NOTICE
    assert ts.first_on_terminal(ts.TABLES_NOTICE) and not ts.first_on_terminal(ts.TABLES_NOTICE)
    assert ts.first_on_terminal("some other notice") and ts.first_on_terminal("some other notice")


# --- the typed notice (core.types.Notice): kind and target travel with today's text

def test_notice_is_its_text_everywhere_and_keeps_kind_and_target():
    import copy
    import pickle

    from rhofollow.core.types import NOTICE_KINDS, Notice
    from rhofollow.io.jsonout import json_text

    n = Notice("no uncertainty for 'b'; assumed ±0.1", "assumed", "HTS-101")
    assert n == "no uncertainty for 'b'; assumed ±0.1" and str(n) == n.text and type(str(n)) is str
    assert json_text({"warnings": [n]}) == json_text({"warnings": [str(n)]})
    assert "; ".join([n, "x"]) == str(n) + "; x" and "assumed" in n
    for m in (pickle.loads(pickle.dumps(n)), copy.deepcopy(n)):
        assert (m, m.kind, m.target, type(m)) == (n, "assumed", "HTS-101", Notice)
    with pytest.raises(AttributeError):
        n.kind = "input"
    with pytest.raises(ValueError, match="unknown notice kind"):
        Notice("x", "gossip")
    assert ts.TABLES_NOTICE.kind == "offline_tables" and set(NOTICE_KINDS) >= {"assumed", "occultation"}


def test_stage_warnings_are_typed_notices_of_their_target():
    from rhofollow.core.types import Measurement, Notice, Target
    from rhofollow.stages.assess import assess_target
    from rhofollow.stages.occultations import predict_occultations

    vals = {"period_d": Measurement(3.5, 1e-5, 1e-5), "t0_bjd": Measurement(2461000.5),
            "a_rs": Measurement(9.0), "b": Measurement(0.3, 0.05, 0.05), "rp_rs": Measurement(0.1, 0.002, 0.002),
            "rho_star_cgs": Measurement(1.4, 0.1, 0.1), "teff_k": Measurement(5800, 80, 80),
            "ra_deg": Measurement(150.0), "dec_deg": Measurement(-20.0)}
    a = assess_target(Target("HTS-T1", 1, "cat.csv", vals), n_samples=2000)
    assert a.ok
    typed = [w for w in a.warnings if isinstance(w, Notice)]
    assert {w.target for w in typed} == {"HTS-T1"}
    assert {"t0_bjd", "a_rs"} <= {k for w in typed if w.kind == "assumed" for k in ("t0_bjd", "a_rs") if k in w}
    rec = predict_occultations([a], "2027-01-10", "2027-01-20")["targets"][0]
    occ = [w for w in rec["warnings"] if isinstance(w, Notice) and w.kind == "assumed" and "windows" in w]
    assert occ and occ[0].target == "HTS-T1"
