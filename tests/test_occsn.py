"""Occultation windows funded by expected S/N x catch probability (planning/occsn.py)."""
from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest

from rhofollow.io.instruments import Photometer
from rhofollow.planning.occsn import MIN_SN_CATCH, occultation_snr, screen_occultations

CAM = Photometer("CAM", overhead_min=10.0, precision_ref_ppm=900.0, vmag_ref=11.0, baseline_h=1.5)


def test_snr_scaling():
    # S/N of a depth d with T_in minutes in eclipse and 2 x baseline out: d / (s sqrt(1/T_in + 1/T_out))
    # (difference of two means; common practice, no source); s grows as 10^(0.2 dV) (photon noise)
    s = occultation_snr(1000.0, 11.0, 900.0, 11.0, 2.0, 1.5)
    assert s == pytest.approx(1000.0 / (900.0 * math.sqrt(1 / 120 + 1 / 180)))
    assert occultation_snr(1000.0, 16.0, 900.0, 11.0, 2.0, 1.5) == pytest.approx(s / 10.0)
    assert occultation_snr(4000.0, 11.0, 900.0, 11.0, 2.0, 1.5) == pytest.approx(4 * s)


def _entry(depth, mids=(100.0, 100.5)):
    # one event with two windows; the mid-time quantiles put 84 % of the mass in the first region
    ev = {"epoch": 3, "mid_bjd_tdb": {"q025": 99.9, "q16": 99.95, "q50": 100.0, "q84": 100.05, "q975": 100.6},
          "region_bjd_tdb": [[99.8, 100.05], [100.45, 100.6]],
          "window_bjd_tdb": [[99.7, 100.15], [100.35, 100.7]],
          "window_utc": [["2026-12-10T00:00:00Z", "2026-12-10T10:00:00Z"],
                         ["2026-12-10T12:00:00Z", "2026-12-10T20:00:00Z"]]}
    occ = {"p_occultation": 0.9, "depth_ppm": {"q50": depth}, "occ_duration_h": {"q50": 2.0}, "events": [ev]}
    return {"name": "T", "occultation": occ}


def _ass(vmag=11.0):
    return [SimpleNamespace(name="T", samples=SimpleNamespace(meta={"vmag": vmag}))]


def test_weak_window_left_out_strong_kept_with_reasons():
    e = _entry(1500.0)
    assert screen_occultations(_ass(), [e], CAM) == []
    snr = occultation_snr(1500.0, 11.0, 900.0, 11.0, 2.0, 1.5)
    (ev,) = e["occultation"]["events"]
    # first window: catch 0.9 x (0.84 - 0) -> passes; second: 0.9 x (0.975 - 0.84 ...) -> fails
    p1 = 0.9 * (np.interp(100.05, [99.9, 99.95, 100.0, 100.05, 100.6], [0.025, 0.16, 0.5, 0.84, 0.975]) - 0.0)
    assert snr * p1 >= MIN_SN_CATCH
    assert len(ev["window_utc"]) == 1 and ev["window_p_catch"] == [pytest.approx(p1, abs=1e-4)]
    assert ev["snr"] == pytest.approx(snr, abs=0.01)
    (left,) = e["occ_screen"]
    assert left["snr"] * left["p_catch"] < MIN_SN_CATCH and "catch probability" in left["reason"]
    assert e["occ_notes"] and "1 of 2" in e["occ_notes"][0]


def test_no_depth_or_faint_star_funds_nothing():
    e = _entry(float("nan"))
    screen_occultations(_ass(), [e], CAM)
    assert e["occultation"] is None and all("depth not computed" in x["reason"] for x in e["occ_screen"])
    e = _entry(1500.0)
    screen_occultations(_ass(vmag=19.0), [e], CAM)
    assert e["occultation"] is None and len(e["occ_screen"]) == 2


def test_photometer_without_precision_is_not_screened():
    e = _entry(1500.0)
    notes = screen_occultations(_ass(), [e], Photometer("X", overhead_min=1.0))
    assert notes and len(e["occultation"]["events"][0]["window_utc"]) == 2
