"""RV precision model, jitter defaults, exposure and hours."""
import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from rhofollow.physics.rvnoise import (default_exposure, epoch_precision, exposure_for_precision, hours_needed,
                                       photon_precision, stellar_jitter)

REF = dict(sigma_ref_ms=2.0, vmag_ref=9.0, exposure_ref_s=900.0)


def test_magnitude_scaling():
    # Photon noise: +2.5 mag at fixed exposure multiplies sigma by sqrt(10) = 3.162
    # (REFERENCE.md §7.1, from N_e ∝ t 10^(-0.4 m); Bouchy, Pepe & Queloz 2001).
    assert photon_precision(11.5, 900.0, **REF) / photon_precision(9.0, 900.0, **REF) == pytest.approx(10**0.5)


def test_exposure_scaling():
    # ... and ten times the exposure recovers it (REFERENCE.md §7.1).
    assert photon_precision(11.5, 9000.0, **REF) == pytest.approx(2.0)


def test_quadrature_budget():
    # sigma_tot^2 = sigma_phot^2 + sigma_floor^2 + sigma_jit^2 (REFERENCE.md §7.1, common practice).
    assert epoch_precision(9.0, 900.0, **REF, floor_ms=1.0, jitter_ms=2.0) == pytest.approx(3.0)


def test_exposure_inverse_and_clip():
    t = exposure_for_precision(1.3, 10.2, **REF)
    assert photon_precision(10.2, t, **REF) == pytest.approx(1.3)
    assert exposure_for_precision(0.01, 14.0, **REF, exposure_max_s=3600) == 3600
    assert exposure_for_precision(100.0, 5.0, **REF, exposure_min_s=60) == 60


def test_default_exposure_balances_noise():
    # Photon noise equals floor and jitter combined at the default exposure (common practice).
    t = default_exposure(10.0, 2.0, **REF, floor_ms=1.5)
    assert photon_precision(10.0, t, **REF) == pytest.approx(2.5)


def test_jitter_defaults():
    # Isaacson & Fischer 2010: K dwarfs quietest, F dwarfs higher; Wright 2005: subgiants higher.
    # Values are values from memory (REFERENCE.md §7.2 ranges).
    j = stellar_jitter([4800, 5700, 6400, 5700, np.nan], [4.6, 4.4, 4.3, 3.6, 4.4])
    np.testing.assert_allclose(j, [1.8, 2.5, 4.5, 5.0, 3.0])
    assert 1.5 <= j[0] <= 2.0 and 2.0 <= j[1] <= 3.0 and 3.0 <= j[2] <= 6.0 and 4.0 <= j[3] <= 5.0


def test_hours():
    # hours = N x (exposure + overhead) (REFERENCE.md §7.4, common practice).
    assert hours_needed(12, 1200.0, 300.0) == pytest.approx(5.0)


@settings(max_examples=40, deadline=None)
@given(v=st.floats(4, 16), t=st.floats(30, 7200), f=st.floats(0, 3), j=st.floats(0, 10))
def test_precision_monotone(v, t, f, j):
    s = epoch_precision(v, t, **REF, floor_ms=f, jitter_ms=j)
    assert s >= max(f, j) - 1e-12
    assert epoch_precision(v + 0.5, t, **REF, floor_ms=f, jitter_ms=j) >= s
    assert epoch_precision(v, 2 * t, **REF, floor_ms=f, jitter_ms=j) <= s
