"""The exact derivatives of the unit RV curve (physics.rv.rv_shape_gradient) and the Fisher
non-centrality built on them, checked against central differences of rv_shape (an independent
computation: common practice, no source) whose error falls as the step squared."""
from __future__ import annotations

import numpy as np
from hypothesis import given, settings, strategies as st

from rhofollow.physics import rvconfirm as rc
from rhofollow.physics.rv import rv_shape, rv_shape_gradient


def _fd(ph, e, om, step):
    """Central differences of rv_shape in h = e cos w and q = e sin w."""
    h, q = e * np.cos(om), e * np.sin(om)

    def shape(hh, qq):
        return rv_shape(ph, np.hypot(hh, qq), np.arctan2(qq, hh))

    return ((shape(h + step, q) - shape(h - step, q)) / (2 * step),
            (shape(h, q + step) - shape(h, q - step)) / (2 * step))


@settings(max_examples=60, deadline=None)
@given(st.floats(0.0, 1.0), st.floats(0.0, 0.8), st.floats(-np.pi, np.pi))
def test_gradient_equals_central_differences(phase, e, om):
    # e <= 0.8 keeps the curve's second derivative moderate, so a 1e-6 step is accurate to ~1e-6
    ph, ee, oo = np.array([phase]), np.array([e]), np.array([om])
    s, gh, gq = rv_shape_gradient(ph, ee, oo)
    fh, fq = _fd(ph, ee, oo, 1e-6)
    assert abs(s[0] - rv_shape(ph, ee, oo)[0]) < 1e-13
    scale = 1.0 + abs(gh[0]) + abs(gq[0])
    assert abs(gh[0] - fh[0]) < 1e-5 * scale
    assert abs(gq[0] - fq[0]) < 1e-5 * scale


def test_difference_error_falls_as_step_squared():
    # central differences have error ~ step^2 f'''/6: shrinking the step tenfold cuts the gap to the
    # exact derivative about a hundredfold, down to rounding (common practice, no source)
    rng = np.random.default_rng(3)
    ph = rng.uniform(0, 1, 400)
    e, om = rng.uniform(0.85, 0.95, 400), rng.uniform(-np.pi, np.pi, 400)
    _, gh, _ = rv_shape_gradient(ph, e, om)
    gaps = [np.max(np.abs(_fd(ph, e, om, step)[0] - gh)) for step in (1e-4, 1e-5)]
    assert 50 < gaps[0] / gaps[1] < 200


def test_circular_orbit_is_regular():
    # e = 0: d s / d h and d s / d q are the limits from e -> 0 whatever omega (atan2(0, 0) = 0)
    ph = np.linspace(0, 1, 37)
    s0, gh0, gq0 = rv_shape_gradient(ph, np.zeros(37), np.zeros(37))
    assert np.all(np.isfinite(gh0)) and np.all(np.isfinite(gq0))
    np.testing.assert_allclose(s0, -np.sin(2 * np.pi * ph), atol=1e-15)  # the circular curve
    for om in (0.3, -2.0):
        _, gh, gq = rv_shape_gradient(ph, np.full(37, 1e-9), np.full(37, om))
        np.testing.assert_allclose(gh, gh0, atol=1e-7)
        np.testing.assert_allclose(gq, gq0, atol=1e-7)


def test_fisher_noncentrality_matches_difference_quotients():
    # the Fisher non-centrality from exact derivatives against the same matrix from central
    # differences with a small step (Schur complement of the (gamma, K) block, as documented)
    rng = np.random.default_rng(8)
    e, om, k = rng.uniform(0.0, 0.7, 50), rng.uniform(-np.pi, np.pi, 50), rng.uniform(2, 40, 50)
    ph = (np.arange(64) + 0.5) / 64
    lam = rc.fisher_lambda_at_phases(e, om, k, ph, 2.0)
    fh, fq = _fd(ph[None, :], e[:, None], om[:, None], 1e-6)
    s0 = rv_shape(ph[None, :], e[:, None], om[:, None])
    g = np.stack([np.ones_like(s0), s0, k[:, None] * fh, k[:, None] * fq], axis=1)
    f = np.einsum("sip,sjp->sij", g, g) / (ph.size * 4.0)
    a, b, c = f[:, 2:, 2:], f[:, 2:, :2], f[:, :2, :2]
    schur = a - b @ np.linalg.solve(c, np.swapaxes(b, 1, 2))
    th = np.stack([e * np.cos(om), e * np.sin(om)], axis=1)
    ref = np.einsum("si,sij,sj->s", th, schur, th)
    np.testing.assert_allclose(lam, ref, rtol=1e-6, atol=1e-9)
