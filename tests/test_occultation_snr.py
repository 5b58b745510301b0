"""Expected S/N of an occultation and the planners' funding rule (issue: occultation time that pays off)."""
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rhofollow.io.instruments import InstrumentError, read_instrument
from rhofollow.physics.occultation_snr import event_snr, information_minutes, scatter_per_minute_ppm
from rhofollow.planning.funding import funding_refusal
from rhofollow.planning.tasks import ValueModel, occultation_tasks


def _trapezoid(t_min, t14_min, t23_min):
    """Unit-depth trapezoid profile on a time grid centred on mid-eclipse (minutes)."""
    tau = 0.5 * (t14_min - t23_min)
    x = np.abs(t_min)
    s = np.clip((0.5 * t14_min - x) / tau, 0.0, 1.0) if tau > 0 else (x <= 0.5 * t14_min).astype(float)
    return s


def _exact_depth_sigma(t14_h, t23_h, baseline_h, sigma):
    """Depth error of the linear least-squares fit [baseline level, depth * profile] on a 1-minute
    grid: sqrt of the depth entry of sigma^2 (X^T X)^-1 (scipy-free linear algebra, numpy)."""
    half = 60 * (0.5 * t14_h + baseline_h)
    t = np.arange(-half, half + 1e-9, 1.0)
    s = _trapezoid(t, 60 * t14_h, 60 * t23_h)
    # the baseline part of the stretch: outside the event
    x = np.column_stack([np.ones_like(t), -s])
    cov = sigma ** 2 * np.linalg.inv(x.T @ x)
    return math.sqrt(cov[1, 1]), t.size


def test_box_eclipse_matches_the_exact_least_squares_error():
    # A box (T14 = T23): the depth is the difference of two means, var = s^2 (1/n_in + 1/n_out)
    # exactly (linear least squares; common practice, no source). Check against numpy's solution.
    sigma, depth = 800.0, 400.0
    exact, _ = _exact_depth_sigma(2.0, 2.0, 1.5, sigma)
    snr = event_snr(depth, 2.0, 2.0, 1.5, sigma)
    assert float(snr) == pytest.approx(depth / exact, rel=0.01)


@given(t14=st.floats(0.5, 6.0), frac=st.floats(0.0, 0.95), base=st.floats(0.5, 3.0))
@settings(max_examples=40, deadline=None)
def test_trapezoid_close_to_the_exact_least_squares_error(t14, frac, base):
    # The continuous formula var = s^2 / (I - A^2/N) against the exact fit of a known trapezoid with
    # a free baseline on a 1-minute grid (numpy linear algebra): within 3 % (grid discreteness)
    # over the whole range of shapes, grazing (triangle) to box.
    t23 = frac * t14
    exact, _ = _exact_depth_sigma(t14, t23, base, 1000.0)
    approx = 1000.0 / float(event_snr(1000.0, t14, t23, base, 1000.0))
    assert approx == pytest.approx(exact, rel=0.03)


def test_monte_carlo_depth_scatter_agrees():
    # Simulated white-noise light curves fitted by least squares (numpy): the scatter of the fitted
    # depths equals depth / S/N within the Monte-Carlo error (1000 sets: ~2.2 % on a std).
    rng = np.random.default_rng(7)
    t14, t23, base, sigma, depth = 2.5, 1.9, 1.0, 1200.0, 500.0
    half = 60 * (0.5 * t14 + base)
    t = np.arange(-half, half + 1e-9, 1.0)
    s = _trapezoid(t, 60 * t14, 60 * t23)
    x = np.column_stack([np.ones_like(t), -s])
    flux = 1e6 - depth * s + rng.normal(0.0, sigma, size=(1000, t.size))
    fit = np.linalg.lstsq(x, flux.T, rcond=None)[0][1]
    expected = depth / float(event_snr(depth, t14, t23, base, sigma))
    assert np.std(fit, ddof=1) == pytest.approx(expected, rel=0.08)
    assert np.mean(fit) == pytest.approx(depth, abs=4 * expected / math.sqrt(1000))


def test_photon_noise_scaling_with_magnitude():
    # Pogson's scale: 5 magnitudes = a flux factor 100, so the relative photon noise grows 10x
    # (IAU magnitude definition m = -2.5 log10 F + const; noise ~ sqrt(F)).
    assert scatter_per_minute_ppm(16.0, 900.0, 11.0) == pytest.approx(9000.0)
    assert scatter_per_minute_ppm(11.0, 900.0, 11.0) == pytest.approx(900.0)
    assert scatter_per_minute_ppm(8.5, 900.0, 11.0) == pytest.approx(900.0 / 10 ** 0.5)


def test_information_time_limits():
    # Box: the whole duration counts; triangle (grazing, no flat part): a third of it.
    assert information_minutes(2.0, 2.0) == pytest.approx(120.0)
    assert information_minutes(3.0, math.nan) == pytest.approx(60.0)
    assert float(event_snr(math.nan, 2.0, 1.0, 1.0, 500.0)) != float(event_snr(100.0, 2.0, 1.0, 1.0, 500.0))
    assert math.isnan(float(event_snr(math.nan, 2.0, 1.0, 1.0, 500.0)))
    assert float(event_snr(-5.0, 2.0, 1.0, 1.0, 500.0)) == 0.0


def test_funding_rule_names_the_numbers():
    model = ValueModel(min_occ_snr=3.0)
    assert funding_refusal({"occ_snr": 10.0}, 0.5, model) == ""
    why = funding_refusal({"occ_snr": 4.0}, 0.5, model)
    assert why.startswith("not funded") and "4.0" in why and "0.50" in why and "2.0" in why
    why = funding_refusal({"occ_snr": None, "occ_snr_note": "occultation depth not computed: S/N not computed"},
                        0.9, model)
    assert "depth not computed" in why
    assert funding_refusal({}, 0.01, model) == ""  # hand-built record: not checked


class _Vis:
    """A minimal visibility grid: always observable, airmass 1 (for the funding rule only)."""

    def __init__(self, t0, n=97):
        self.t_jd = t0 + np.arange(n) / 96.0
        self.observable = np.ones((1, n), dtype=bool)

    def row(self, name):
        return 0

    def hours(self, jd):
        return (np.asarray(jd) - self.t_jd[0]) * 24.0

    def fraction_observable(self, name, j0, j1):
        return 1.0

    def airmass_max(self, name, j0, j1, n=9):
        return 1.0


def _record(snr):
    from rhofollow.planning.tasks import jd_to_iso

    t0 = 2461400.5
    mid = t0 + 0.5
    rec = {"name": "HTS-900", "p_occultation": 1.0, "occ_duration_h": 2.0, "window_pad_h": 2.5,
           "occ_snr": snr,
           "events": [{"epoch": 3,
                       "mid_bjd_tdb": {"q025": mid - 0.02, "q16": mid - 0.01, "q50": mid,
                                       "q84": mid + 0.01, "q975": mid + 0.02},
                       "window_bjd_tdb": [[mid - 0.02 - 2.5 / 24, mid + 0.02 + 2.5 / 24]],
                       "window_utc": [[jd_to_iso(mid - 0.02 - 2.5 / 24), jd_to_iso(mid + 0.02 + 2.5 / 24)]]}]}
    return rec, _Vis(t0)


def test_bright_event_is_funded_and_faint_one_is_left_with_its_reason():
    rec, vis = _record(12.0)
    tasks, skipped = occultation_tasks(rec, 0.8, vis, ValueModel(baseline_h=0.0))
    assert len(tasks) == 1 and not skipped
    assert tasks[0].meta["p_catch"] == pytest.approx(0.95, abs=0.01)
    rec, vis = _record(2.0)
    tasks, skipped = occultation_tasks(rec, 0.8, vis, ValueModel(baseline_h=0.0))
    assert not tasks and len(skipped) == 1 and skipped[0].reason.startswith("not funded: expected S/N 2.0")


def _write(tmp_path, body):
    p = tmp_path / "cam.toml"
    p.write_text('kind = "photometer"\nname = "CAM-X"\noverhead_min = 10\n' + body)
    return p


def test_photometer_band_and_precision_keys(tmp_path):
    cam = read_instrument(_write(tmp_path, "band_center_um = 0.9\nband_width_um = 0.15\n"
                                           "precision_ref_ppm = 500\nvmag_ref = 10\n"))
    assert (cam.band_center_um, cam.band_width_um, cam.has_precision) == (0.9, 0.15, True)
    assert not read_instrument(_write(tmp_path, "")).has_precision
    with pytest.raises(InstrumentError, match=r"cam\.toml: keys 'band_center_um' and 'band_width_um'"):
        read_instrument(_write(tmp_path, "band_center_um = 0.1\nband_width_um = 0.05\n"))
    with pytest.raises(InstrumentError, match=r"cam\.toml: keys 'precision_ref_ppm' and 'vmag_ref' go together"):
        read_instrument(_write(tmp_path, "precision_ref_ppm = 500\n"))
    with pytest.raises(InstrumentError, match=r"key 'band_width_um' must be > 0"):
        read_instrument(_write(tmp_path, "band_width_um = 0\n"))
