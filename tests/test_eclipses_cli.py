"""Tests of the occultation library (rhofollow.stages.occultations), the iCalendar export and the
`rhofollow eclipses` command."""
import json
import warnings
from pathlib import Path

import numpy as np
import pytest

from rhofollow.cli import main
from rhofollow.stages.occultations import (CAUTION, EclipseInputError, EclipseOptions, bjd_tdb_to_utc,
                                predict_occultations)
from rhofollow.io.calendar import windows_to_ics
from rhofollow.physics.constants import DAY_S, G_SI
from rhofollow.core.samples import SampleSet

EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "hts_candidates.csv"


def _samples(n=3000, seed=1, e=None, omega=None, t0_err=5e-4, p_err=2e-5, name="HTS-101",
             **meta):
    """Invented HTS-like target (demo scenario); e/omega fixed for a known orbit."""
    rng = np.random.default_rng(seed)
    ee = np.minimum(np.abs(rng.normal(0, 0.3, n)), 0.9) if e is None else np.full(n, e)
    om = rng.uniform(0, 2 * np.pi, n) if omega is None else np.full(n, omega)
    period = 4.2 + p_err * rng.standard_normal(n)
    t0 = 2461000.3 + t0_err * rng.standard_normal(n)
    rho = 1.4 * (1 + 0.05 * rng.standard_normal(n))
    a_rs = (G_SI * rho * 1e3 * (period * DAY_S) ** 2 / (3 * np.pi)) ** (1 / 3)
    inc = np.arccos(0.3 * (1 + ee * np.sin(om)) / (a_rs * (1 - ee**2)))
    meta = {"ra_deg": 150.0, "dec_deg": -20.0, **meta}
    return SampleSet(name=name, e=ee, omega=om, b=np.full(n, 0.3), k=np.full(n, 0.1),
                     period=period, t0=t0, rho_star=rho, mstar=np.ones(n), rstar=np.ones(n),
                     a_rs=a_rs, inc=inc, teff=np.full(n, 5600.0), weights=np.ones(n), meta=meta)


REQUIRED = {"name", "ok", "errors", "warnings", "occ_phase", "p_occultation", "occ_duration_h",
            "depth_ppm", "events"}
QKEYS = {"q025", "q16", "q50", "q84", "q975"}


# --- library ------------------------------------------------------------------------------------

def test_record_contract_and_circular_orbit():
    # Known circular orbit: phase 0.5 (Winn 2010 sec. 2; common practice) up to the light-travel
    # delay 2a/c (REFERENCE.md sec. 13), occultation certain, equal durations.
    s = _samples(e=0.0, omega=0.0)
    res = predict_occultations([s], "2026-05-01", "2026-05-15")
    rec = res["targets"][0]
    assert REQUIRED <= set(rec)
    for key in ("occ_phase", "occ_duration_h", "depth_ppm"):
        assert set(rec[key]) == QKEYS
    lt_phase = rec["light_travel_s"] / DAY_S / 4.2
    assert rec["occ_phase"]["q50"] == pytest.approx(0.5 + lt_phase, abs=1e-6)
    assert rec["p_occultation"] == pytest.approx(1.0, abs=1e-12)
    assert res["caution"] == CAUTION
    # Mid-times 2461162.00 + 4.2 n fall in 2461161.5-2461175.5 (2026-05-01 to 05-15) for n = 0-3.
    assert [ev["epoch"] for ev in rec["events"]] == [38, 39, 40, 41]
    for ev in rec["events"]:
        assert set(ev) >= {"epoch", "mid_bjd_tdb", "window_utc", "window_bjd_tdb", "mid_utc"}
        assert set(ev["mid_bjd_tdb"]) == QKEYS
        (a, b), = ev["window_bjd_tdb"]
        assert a < ev["mid_bjd_tdb"]["q50"] < b
        # Window = 90 % region widened by half the duration + a baseline of max(T14, 1 h).
        assert b - a >= 2 * (0.5 + 1.0) * rec["occ_duration_h"]["q50"] / 24 - 1e-9


def test_utc_conversion_round_trip():
    # BJD_TDB -> UTC at the geocentre inverts astropy's barycentric correction (reference
    # library: astropy Time.light_travel_time); |BJD - UTC| stays within 8.4 min + 70 s.
    import astropy.units as u
    from astropy.coordinates import EarthLocation, SkyCoord
    from astropy.time import Time

    bjd = np.array([2461100.25, 2461300.75])
    iso, notice = bjd_tdb_to_utc(bjd, 150.0, -20.0)
    geo = EarthLocation.from_geocentric(0, 0, 0, unit=u.m)
    t = Time([s.rstrip("Z") for s in iso], scale="utc", location=geo)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        back = (t.tdb + t.light_travel_time(SkyCoord(150, -20, unit="deg"))).jd
    np.testing.assert_allclose(back, bjd, atol=1.5 / DAY_S)  # ISO strings keep whole seconds
    assert np.all(np.abs(Time([s.rstrip("Z") for s in iso], scale="utc").jd - bjd) < 580 / DAY_S)
    # A site location changes the time by at most ~R_earth/c = 21 ms; the fast inversion
    # matches astropy's own light_travel_time with the site to 0.1 ms (float JD resolution 40 us).
    site = EarthLocation.from_geodetic(-70.0 * u.deg, -30.0 * u.deg, 2000 * u.m)
    jd_obs, _ = bjd_tdb_to_utc(bjd, 150.0, -20.0, location=site, as_iso=False)
    t_obs = Time(jd_obs, format="jd", scale="tdb", location=site)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ltt = t_obs.light_travel_time(SkyCoord(150, -20, unit="deg"), kind="barycentric")
    np.testing.assert_allclose((t_obs.jd - bjd) * DAY_S + ltt.to_value(u.s), 0.0, atol=1e-4)
    iso2, _ = bjd_tdb_to_utc(bjd, 150.0, -20.0, location=site)
    assert all(abs((Time(a.rstrip("Z")) - Time(b.rstrip("Z"))).sec) <= 1.0
               for a, b in zip(iso, iso2))


def test_far_future_gives_one_notice_not_warnings():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        _, notice = bjd_tdb_to_utc([2470000.5, 2470001.5], 10.0, 20.0)
    assert "tables" in notice


def test_eccentric_occultation_missed_and_two_humps():
    # e = 0.6, omega = 90 deg with b_tra = 0.3 gives b_occ = 1.2 -> never occults (Winn 2010
    # eq. 8, value from memory).
    rec = predict_occultations([_samples(e=0.6, omega=np.pi / 2)], "2026-05-01",
                               "2026-05-10")["targets"][0]
    assert rec["p_occultation"] == 0.0 and rec["events"] == []
    assert any("no posterior sample" in w for w in rec["warnings"])


def test_missing_epoch_errors_warn():
    s = _samples(t0_err=0.0, p_err=0.0)
    rec = predict_occultations([s], "2026-05-01", "2026-05-10")["targets"][0]
    assert sum("no uncertainty" in w for w in rec["warnings"]) == 2
    assert rec["ok"] and rec["events"]


def test_failed_assessment_passes_through():
    class Failed:
        name, ok, errors, warnings, samples, target = "HTS-199", False, ["bad row"], [], None, None

    rec = predict_occultations([Failed()], "2026-05-01", "2026-05-10")["targets"][0]
    assert rec["ok"] is False and rec["errors"] == ["bad row"] and rec["events"] == []


@pytest.mark.parametrize("start, end, match", [
    ("2026-05-10", "2026-05-01", "not after"),
    ("2026-01-01", "2047-01-02", "20 years"),
    ("yesterday", "2026-05-01", "not a date"),
])
def test_bad_dates(start, end, match):
    with pytest.raises(EclipseInputError, match=match):
        predict_occultations([], start, end)


@pytest.mark.parametrize("band", [(0.25, 0.05), (29.8, 1.0), (4.5, 0.0)])
def test_bad_band(band):
    with pytest.raises(EclipseInputError, match="micron"):
        predict_occultations([], "2026-05-01", "2026-05-02", EclipseOptions(band=band))


def test_ics_roundtrip():
    from icalendar import Calendar

    res = predict_occultations([_samples()], "2026-05-01", "2026-05-10")
    cal = Calendar.from_ical(windows_to_ics(res))
    events = [c for c in cal.walk("VEVENT")]
    n_windows = sum(len(ev["window_utc"]) for ev in res["targets"][0]["events"])
    assert len(events) == n_windows > 0
    desc = str(events[0]["DESCRIPTION"])
    assert "HTS-101" in desc and "safety limits" in desc and "BJD_TDB" in desc


# --- command ------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def small_catalogue(tmp_path_factory):
    lines = EXAMPLE.read_text().splitlines()
    d = tmp_path_factory.mktemp("cat")
    path = d / "three.csv"
    path.write_text("\n".join(lines[:4]) + "\n")
    # Same rows without the epoch error column.
    header = lines[0].split(",")
    j = header.index("t0_bjd_err")
    rows = [",".join(c for i, c in enumerate(line.split(",")) if i != j) for line in lines[:2]]
    (d / "noerr.csv").write_text("\n".join(rows) + "\n")
    return d


def test_cli_json_and_ics(small_catalogue, tmp_path, capsys):
    out, ics = tmp_path / "e.json", tmp_path / "e.ics"
    code = main(["eclipses", str(small_catalogue / "three.csv"), "--start", "2027-01-01",
                 "--end", "2027-01-20", "--samples", "1000", "--json", str(out), "--ics", str(ics),
                 "--band", "4.5:1.0"])
    assert code == 0
    data = json.loads(out.read_text())
    assert [r["name"] for r in data["targets"]] == ["HTS-101", "HTS-102", "HTS-103"]
    for r in data["targets"]:
        assert REQUIRED <= set(r)
    assert data["band"] == {"center_um": 4.5, "width_um": 1.0}
    assert ics.read_bytes().startswith(b"BEGIN:VCALENDAR")
    printed = capsys.readouterr().out
    assert "HTS-101" in printed and "safety limits" in printed


def test_cli_missing_epoch_error_warns(small_catalogue, tmp_path, capsys):
    out = tmp_path / "e.json"
    code = main(["eclipses", str(small_catalogue / "noerr.csv"), "--start", "2027-01-01",
                 "--end", "2027-01-05", "--samples", "1000", "--json", str(out)])
    assert code == 0
    rec = json.loads(out.read_text())["targets"][0]
    assert any("t0_bjd has no uncertainty" in w for w in rec["warnings"])
    assert "t0_bjd has no uncertainty" in " ".join(capsys.readouterr().err.split())


@pytest.mark.parametrize("extra, match", [
    (["--start", "2027-02-01", "--end", "2027-01-01"], "not after"),
    (["--start", "2027-01-01", "--end", "2050-01-01"], "20 years"),
    (["--start", "2027-01-01", "--end", "2027-01-02", "--band", "0.2:0.05"], "micron"),
    (["--start", "2027-01-01", "--end", "2027-01-02", "--band", "K"], "CENTRE:WIDTH"),
    (["--start", "2027-01-01", "--end", "2027-01-02", "--coverage", "1.5"], "coverage"),
])
def test_cli_bad_options_exit_2(small_catalogue, extra, match, capsys):
    code = main(["eclipses", str(small_catalogue / "three.csv"), *extra])
    assert code == 2
    err = " ".join(capsys.readouterr().err.split())
    assert match in err and "Traceback" not in err


def test_cli_bad_filter_file_names_line(small_catalogue, tmp_path, capsys):
    f = tmp_path / "filt.txt"
    f.write_text("# wavelength response\n4.0 0.1\n4.5 oops\n5.0 0.1\n")
    code = main(["eclipses", str(small_catalogue / "three.csv"), "--start", "2027-01-01",
                 "--end", "2027-01-02", "--filter", str(f)])
    assert code == 2
    err = " ".join(capsys.readouterr().err.split())
    assert "filt.txt, line 3" in err
    f.write_text("0.1 1\n0.2 1\n")
    assert main(["eclipses", str(small_catalogue / "three.csv"), "--start", "2027-01-01",
                 "--end", "2027-01-02", "--filter", str(f)]) == 2
    assert "micron" in capsys.readouterr().err
