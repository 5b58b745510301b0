"""The value model of the observing tasks: what one block is worth (pure numerics, no I/O).

Task values (dimensionless; "expected progress towards settling the eccentricity")
-----------------------------------------------------------------------------------
Let ``E = P(e > e_min | data)`` be the posterior evidence for an eccentric orbit (weighted
fraction of the eccentricity samples above ``e_min``, default 0.1) and
``A(X) = exp(-kappa (X_max - 1))`` the airmass penalty with ``X_max`` the highest airmass during the
block (``kappa`` = 0.5 by default: A = 1 at the zenith, 0.61 at airmass 2).

* Occultation window (fixed task): the block is the timing window widened by a baseline
  ``B`` on each side and preceded by the instrument setup ``L``, ``T_block = T_window + 2 B + L``.

      V_occ = P_occ * w_k * E * A(X_max) * min(1, T_occ / T_block)

  ``P_occ`` is the probability that the occultation occurs (``p_occultation``), ``w_k`` the share of
  the event's timing posterior inside this window when the record gives it (``window_mass``;
  otherwise split evenly between the event's windows), ``T_occ`` the expected occultation
  duration (``occ_duration_h``). The last factor is the evidence per unit of block duration,
  normalised by the eclipse's own length: a tightly predicted occultation is worth more than
  the same event buried in a long window.

  When the whole block does not fit in the night (or is not observable throughout), the longest
  observable stretch ``[r0, r1]`` of the window is offered instead, with ``T_block = r1 - r0``
  and one more factor, the chance of catching the complete occultation with baselines ``B'``:

      p_catch = F(r1 - B' - T_occ/2) - F(r0 + L + B' + T_occ/2)

  where ``F`` is the mid-time CDF interpolated linearly between the event's mid-time quantiles
  (q025 ... q975, BJD_TDB; :func:`rhofollow.planning.funding.mid_time_cdf`); offered only if
  ``p_catch >= 0.1``.

* RV visit (flexible task, start on a grid inside the target's visible slots):

      V_rv(t) = E * W(phi(t)) * A(X_max(t)) / N_rem

  ``N_rem = max(1, n_epochs_confirm_ecc - n_done)`` is how far the target is from a confirmed
  eccentricity (each visit brings it ``1/N_rem`` of the way), and ``W`` the phase weight at the
  orbital phase ``phi`` of the visit's middle (0 = transit, from BJD_TDB):
  ``W = w_0 + (1 - w_0) max_j exp(-d_j^2 / (2 sigma^2))`` with ``d_j`` the circular phase distance
  to the informative phase ``best_phases[j]`` (``w_0`` = 0.25, ``sigma`` = 0.08 by default; W = 1
  when no informative phase is given). The visit lasts ``hours_confirm_ecc / n_epochs_confirm_ecc``
  (overheads included upstream) unless the record gives ``visit_h``.

Targets whose quantiles are unreliable (the occultation or RV record says ``reliable: false``: an
effective sample size below :data:`rhofollow.core.samples.RELIABLE_ESS`) are not planned as if their
numbers were known: every value above is multiplied by ``unreliable_weight`` (0.5 by default,
a chosen down-weighting, common practice, no source), so such a target wins a slot only against a
reliable one worth less than half as much.

The blocks themselves are built in :mod:`rhofollow.planning.tasks`; which occultation windows are
funded at all is :mod:`rhofollow.planning.funding`.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["ValueModel", "airmass_factor", "phase_weight", "ecc_evidence", "record_number"]


@dataclass(frozen=True)
class ValueModel:
    """Tunable constants of the task values (see the module docstring).

    Attributes
    ----------
    kappa : float
        Airmass penalty rate (per unit airmass).
    e_min : float
        Eccentricity above which an orbit counts as eccentric.
    phase_sigma : float
        Width of the phase weight (orbital phase units, 0..1).
    phase_floor : float
        Phase weight far from every informative phase.
    baseline_h : float
        Out-of-occultation baseline added on each side of an occultation window (hours); 0 when
        the windows already include their baselines (as :mod:`rhofollow.stages.occultations` windows do).
    lead_h : float
        Instrument setup added before an occultation block (hours; the photometer's overhead).
    partial_baseline_h : float
        Baseline wanted on each side of the occultation itself when only part of a window can be
        observed (hours).
    min_catch : float
        Smallest chance of catching the whole occultation for which a partial block is offered.
    step_h : float
        Spacing of candidate RV start times (hours).
    unreliable_weight : float
        Factor on every task value of a target whose record says ``reliable: false`` (0..1).
    min_occ_snr : float
        Smallest expected S/N × catch probability for which an occultation window is funded:
        ``occ_snr`` (the record's S/N of one fully observed event) times the probability that the
        block catches the whole event (the event happens and its mid-time falls where the block
        covers it and its baselines). Windows below it, or without an S/N (no depth, magnitude or
        photometer precision model), are left out with the reason. Records without an ``occ_snr``
        key (built by hand, not by the occultation stage) are not checked.
    """

    kappa: float = 0.5
    e_min: float = 0.1
    phase_sigma: float = 0.08
    phase_floor: float = 0.25
    baseline_h: float = 1.0
    lead_h: float = 0.0
    partial_baseline_h: float = 1.0
    min_catch: float = 0.1
    step_h: float = 1.0 / 6.0
    unreliable_weight: float = 0.5
    min_occ_snr: float = 3.0

    def reliability_weight(self, record: dict) -> float:
        """Factor on the values of a target, from its record's reliability flag.

        Parameters
        ----------
        record : dict
            Occultation or RV record; only its ``reliable`` key is read.

        Returns
        -------
        float
            ``unreliable_weight`` (dimensionless) for a record marked ``reliable: false``, else 1.
        """
        return float(self.unreliable_weight) if record.get("reliable") is False else 1.0


def airmass_factor(x, kappa: float = 0.5) -> np.ndarray:
    """Airmass penalty ``exp(-kappa (X - 1))`` of the value model.

    Parameters
    ----------
    x : float or array
        Airmass X (dimensionless, sec z); values below 1 count as 1.
    kappa : float
        Penalty rate (per unit airmass).

    Returns
    -------
    ndarray
        Penalty factor in (0, 1] (dimensionless); 0 where X is not finite (below the horizon).
    """
    x = np.asarray(x, dtype=float)
    with np.errstate(over="ignore", invalid="ignore"):
        out = np.exp(-kappa * (np.maximum(x, 1.0) - 1.0))
    return np.where(np.isfinite(x), out, 0.0)


def phase_weight(phase, best_phases, sigma: float = 0.08, floor: float = 0.25) -> np.ndarray:
    """Weight of an RV epoch at an orbital phase, highest at the informative phases.

    ``floor + (1 - floor) * max_j exp(-d_j^2 / (2 sigma^2))`` with ``d_j`` the circular phase
    distance to ``best_phases[j]``.

    Parameters
    ----------
    phase : float or array
        Orbital phase of the epoch (0..1, 0 = transit).
    best_phases : sequence of float or None
        Informative phases (0..1); None and non-finite entries are ignored.
    sigma : float
        Width of each bump (orbital phase units).
    floor : float
        Weight far from every informative phase (dimensionless, 0..1).

    Returns
    -------
    ndarray
        Weight in [floor, 1] (dimensionless), shaped like ``phase``; 1 everywhere when no
        informative phase is given.
    """
    phase = np.asarray(phase, dtype=float)
    bp = np.asarray([p for p in (best_phases or []) if p is not None and np.isfinite(p)], dtype=float)
    if bp.size == 0:
        return np.ones_like(phase)
    d = np.abs(((phase[..., None] - bp) + 0.5) % 1.0 - 0.5)
    return floor + (1.0 - floor) * np.exp(-0.5 * (d / sigma) ** 2).max(axis=-1)


def ecc_evidence(e, weights=None, e_min: float = 0.1) -> float:
    """Posterior probability that the eccentricity exceeds ``e_min``, from weighted samples.

    Parameters
    ----------
    e : array
        Eccentricity samples (dimensionless).
    weights : array or None
        Sample weights (any positive scale); None for equal weights.
    e_min : float
        Eccentricity threshold (dimensionless).

    Returns
    -------
    float
        Weighted fraction of the samples above ``e_min`` (probability, 0..1); 0 without samples
        or weight.
    """
    e = np.asarray(e, dtype=float)
    if e.size == 0:
        return 0.0
    w = np.ones_like(e) if weights is None else np.asarray(weights, dtype=float)
    s = w.sum()
    return float(np.sum(w * (e > e_min)) / s) if s > 0 else 0.0


def record_number(x, default=math.nan) -> float:
    """A float from a record field that is a number or a quantile object.

    Parameters
    ----------
    x : float, dict or None
        A number, or a quantile object whose median ``q50`` is taken.
    default : float
        Returned when ``x`` is missing or not a number.

    Returns
    -------
    float
        The number (in the field's own unit) or ``default``.
    """
    if isinstance(x, dict):
        x = x.get("q50", default)
    try:
        return float(x) if x is not None else default
    except (TypeError, ValueError):
        return default
