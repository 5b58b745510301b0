"""Event times from weighted samples: ephemeris propagation, quantiles, credible intervals and
observing windows. Times in days (BJD_TDB for absolute times), plain numpy arrays.

Per sample i, the occultation of epoch n happens at t_i(n) = t_ref,i + n P_i, where t_ref,i is
the sample's first occultation after its reference transit (T0 + transit-to-occultation offset +
light-travel delay). T0, P and the (e, omega) offset are drawn jointly, so the epoch spread
combines all three (REFERENCE sec. 13; done per sample rather than by linearising, because the
offset is strongly non-Gaussian when e is poorly constrained).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "QUANTILE_PROBS",
    "EventSummary",
    "sorted_weighted_quantiles",
    "shortest_interval",
    "credible_region",
    "widen",
    "candidate_epochs",
    "summarise_events",
]

#: Probabilities of the JSON quantile object (q025, q16, q50, q84, q975).
QUANTILE_PROBS = np.array([0.025, 0.16, 0.5, 0.84, 0.975])


@dataclass
class EventSummary:
    """One predicted event: epoch number, quantiles of its time, credible region and window.

    ``quantiles`` follow :data:`QUANTILE_PROBS`; ``region`` is the union of intervals holding the
    requested probability; ``window`` is that region widened by ``pad`` on each side (merged
    where pieces overlap). All times are days (BJD_TDB).
    """

    epoch: int
    quantiles: np.ndarray
    region: list
    window: list


def _cdf(ws):
    """Cumulative weights normalised to 1, and the midpoint-rule CDF of sorted samples."""
    cw = np.cumsum(ws)
    cw /= cw[-1]
    return cw, cw - 0.5 * ws / np.sum(ws)


def _interp_sorted(q, cdf, xs):
    """Linear interpolation of xs at probabilities q on an increasing cdf (few queries)."""
    q = np.atleast_1d(np.asarray(q, dtype=float))
    j = np.clip(np.searchsorted(cdf, q, side="right"), 1, xs.size - 1)
    c0, c1 = cdf[j - 1], cdf[j]
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.where(c1 > c0, (q - c0) / (c1 - c0), 0.0)
    out = xs[j - 1] + np.clip(t, 0.0, 1.0) * (xs[j] - xs[j - 1])
    out = np.where(q <= cdf[0], xs[0], out)
    return np.where(q >= cdf[-1], xs[-1], out)


def sorted_weighted_quantiles(xs, ws, q):
    """Quantiles of samples already sorted ascending, with weights ``ws``.

    Same definition as :func:`rhofollow.core.samples.weighted_quantiles` (midpoint rule on the
    weighted empirical CDF, linear in between, clamped at the ends), without the sort.

    Parameters
    ----------
    xs : ndarray
        Sorted sample values (any unit).
    ws : ndarray
        Their weights (any positive scale).
    q : float or array
        Probabilities in [0, 1].

    Returns
    -------
    ndarray
        Quantiles, unit of ``xs``.
    """
    xs = np.asarray(xs, dtype=float)
    if xs.size == 1:
        return np.full(np.shape(q), xs[0])
    _, cdf = _cdf(np.asarray(ws, dtype=float))
    out = _interp_sorted(q, cdf, xs)
    return out if np.ndim(q) else float(out[0])


class _WeightState:
    """Everything about sorted weights that does not depend on the sample values.

    Between epochs the sample order usually does not change (only the period spread moves
    samples past each other), so cumulative weights, the CDF, the ESS and the candidate
    (left, right) index pairs of the shortest interval are computed once and reused.
    """

    def __init__(self, ws, prob):
        ws = np.asarray(ws, dtype=float)
        self.ws = ws
        self.cw, self.cdf = _cdf(ws)
        self.cw0 = np.concatenate(([0.0], self.cw))
        self.ess = 1.0 / np.sum((ws / np.sum(ws)) ** 2)
        before = self.cw - ws / np.sum(ws)
        n_left = int(np.searchsorted(before, 1.0 - prob, side="right"))
        i = np.arange(max(n_left, 1))
        j = np.searchsorted(self.cw, before[i] + prob * (1.0 - 1e-12), side="left")
        valid = j < ws.size
        self.i, self.j = i[valid], j[valid]
        # Interpolation positions of the fixed probability levels used on every epoch.
        self.q_idx, self.q_t = self._interp_pos(np.concatenate((QUANTILE_PROBS, [0.0005, 0.9995])))

    def _interp_pos(self, q):
        cdf = self.cdf
        n = cdf.size
        if n == 1:
            return np.zeros(q.size, dtype=int), np.zeros(q.size)
        j = np.clip(np.searchsorted(cdf, q, side="right"), 1, n - 1)
        c0, c1 = cdf[j - 1], cdf[j]
        with np.errstate(invalid="ignore", divide="ignore"):
            t = np.clip(np.where(c1 > c0, (q - c0) / (c1 - c0), 0.0), 0.0, 1.0)
        t = np.where(q <= cdf[0], 0.0, t)
        j = np.where(q <= cdf[0], 1, j)
        t = np.where(q >= cdf[-1], 1.0, t)
        j = np.where(q >= cdf[-1], n - 1, j)
        return j, t

    def levels(self, xs):
        """Values at QUANTILE_PROBS followed by the 0.05 % and 99.95 % quantiles.

        Parameters
        ----------
        xs : ndarray
            Sorted sample values (any unit).

        Returns
        -------
        ndarray
            Quantile values, unit of ``xs``.
        """
        if xs.size == 1:
            return np.full(self.q_idx.size, xs[0])
        j, t = self.q_idx, self.q_t
        return xs[j - 1] + t * (xs[j] - xs[j - 1])

    def shortest(self, xs):
        """Shortest interval of the sorted values holding the state's probability.

        Parameters
        ----------
        xs : ndarray
            Sorted sample values (any unit).

        Returns
        -------
        (float, float)
            The interval's ends, unit of ``xs``.
        """
        if self.i.size == 0:
            return float(xs[0]), float(xs[-1])
        k = np.argmin(xs[self.j] - xs[self.i])
        return float(xs[self.i[k]]), float(xs[self.j[k]])


def shortest_interval(xs, ws, prob):
    """Shortest interval [lo, hi] of sorted weighted samples holding at least ``prob`` mass.

    Exact over the sample set: every sample that can be a left edge (mass below it at most
    1 - prob) is tried; the matching right edge is found by binary search on the cumulative
    weights.

    Parameters
    ----------
    xs : ndarray
        Sorted sample values (any unit).
    ws : ndarray
        Their weights (any positive scale).
    prob : float
        Probability mass in (0, 1].

    Returns
    -------
    (float, float)
        Interval ends, unit of ``xs``.
    """
    return _WeightState(ws, prob).shortest(np.asarray(xs, dtype=float))


def credible_region(xs, ws, prob, n_bins=200, merge_gap=0.0, min_gain=0.1, _state=None):
    """Credible region of sorted weighted samples as a list of disjoint (lo, hi) intervals.

    The region is the highest-density set holding at least ``prob`` of the mass, from a
    histogram between the 0.05 % and 99.95 % quantiles with at most ``n_bins`` bins and about
    30 effective samples per bin (Kish ESS / 30, at least 8 bins), so that sampling noise does
    not split the region; pieces closer than ``merge_gap`` or two bin widths are joined. When
    that gives one piece, or the union is not at least ``min_gain`` (fraction) shorter than the
    shortest single interval, the exact shortest single interval is returned instead (one
    piece). Two-humped distributions thus get two windows.

    Parameters
    ----------
    xs : ndarray
        Sorted sample values (any unit, e.g. days).
    ws : ndarray
        Their weights (any positive scale).
    prob : float
        Probability mass in (0, 1].
    n_bins : int
        Most histogram bins.
    merge_gap : float
        Pieces closer than this are joined, unit of ``xs``.
    min_gain : float
        Least fractional shortening for keeping several pieces.
    _state : _WeightState, optional
        Reused weight state (internal).

    Returns
    -------
    list of (float, float)
        Disjoint intervals, unit of ``xs``.
    """
    xs = np.asarray(xs, dtype=float)
    st = _state if _state is not None else _WeightState(ws, prob)
    lo1, hi1 = st.shortest(xs)
    if hi1 <= lo1:
        return [(lo1, hi1)]
    a, b = st.levels(xs)[-2:]
    if not b > a:
        return [(lo1, hi1)]
    n_bins = int(np.clip(st.ess / 30.0, 8, n_bins))
    edges = np.linspace(a, b, n_bins + 1)
    merge_gap = max(merge_gap, 2.0 * (b - a) / n_bins)
    mass = np.diff(st.cw0[np.searchsorted(xs, edges, side="left")])
    order = np.argsort(-mass, kind="stable")
    cm = np.cumsum(mass[order])
    nsel = min(int(np.searchsorted(cm, prob, side="left")) + 1, n_bins)
    sel = np.zeros(n_bins + 2, dtype=bool)
    sel[1 + order[:nsel]] = True
    d = np.diff(sel.astype(np.int8))
    starts = np.flatnonzero(d == 1)
    stops = np.flatnonzero(d == -1)
    pieces = [[edges[s], edges[t]] for s, t in zip(starts, stops)]
    merged = [pieces[0]]
    for p in pieces[1:]:
        if p[0] - merged[-1][1] <= merge_gap:
            merged[-1][1] = p[1]
        else:
            merged.append(p)
    total = sum(p[1] - p[0] for p in merged)
    if len(merged) == 1 or total >= (1.0 - min_gain) * (hi1 - lo1):
        return [(lo1, hi1)]
    return [(float(p[0]), float(p[1])) for p in merged]


def widen(region, pad):
    """Widen each (lo, hi) interval by ``pad`` on both sides and merge the overlaps.

    Parameters
    ----------
    region : list of (float, float)
        Intervals (any unit).
    pad : float
        Padding, same unit.

    Returns
    -------
    list of (float, float)
        Disjoint intervals, same unit.
    """
    out = []
    for lo, hi in sorted(region):
        lo, hi = lo - pad, hi + pad
        if out and lo <= out[-1][1]:
            out[-1] = (out[-1][0], max(out[-1][1], hi))
        else:
            out.append((lo, hi))
    return out


def candidate_epochs(t_ref, period, start, end, pad=0.0):
    """Epoch numbers n whose sample times t_ref + n P can fall within [start - pad, end + pad].

    Exact bounds: for every n returned, some sample lies within the padded range or the event's
    full sample span overlaps it; all other epochs cannot touch the range.

    Parameters
    ----------
    t_ref : ndarray
        Reference event time per sample, days.
    period : ndarray
        Orbital period per sample, days.
    start, end : float
        Range, days.
    pad : float
        Padding, days.

    Returns
    -------
    ndarray of int
        Epoch numbers.
    """
    t_ref = np.asarray(t_ref, dtype=float)
    period = np.asarray(period, dtype=float)
    p_min, p_max = float(period.min()), float(period.max())
    lo_t, hi_t = start - pad, end + pad
    # For n >= 0: min_i(t_ref + nP) >= t_ref.min() + n p_min, max <= t_ref.max() + n p_max.
    # For n < 0 the roles of p_min and p_max swap. Bracket with the loosest bounds, then filter.
    n_lo = int(np.floor((lo_t - t_ref.max()) / (p_max if lo_t >= t_ref.max() else p_min))) - 1
    n_hi = int(np.ceil((hi_t - t_ref.min()) / (p_min if hi_t >= t_ref.min() else p_max))) + 1
    n = np.arange(n_lo, n_hi + 1)
    pmin_n = np.where(n >= 0, p_min, p_max)
    pmax_n = np.where(n >= 0, p_max, p_min)
    first = t_ref.min() + n * pmin_n
    last = t_ref.max() + n * pmax_n
    return n[(last >= lo_t) & (first <= hi_t)]


def summarise_events(t_ref, period, weights, start, end, prob=0.9, pad=0.0, merge_gap=0.0,
                     n_bins=200):
    """Summaries of every event whose observing window overlaps [start, end].

    Parameters
    ----------
    t_ref : ndarray (N,)
        Per-sample time of the epoch-0 event, days (BJD_TDB).
    period : ndarray (N,)
        Per-sample period, days.
    weights : ndarray (N,)
        Sample weights (need not be normalised; zero weights are dropped).
    start, end : float
        Date range, days (BJD_TDB).
    prob : float
        Probability held by the credible region (e.g. 0.9).
    pad : float
        Widening of the region on each side to make the observing window, days.
    merge_gap : float
        Region pieces closer than this are joined, days.

    Returns
    -------
    list of :class:`EventSummary`, in epoch order.

    Notes
    -----
    Vectorised over samples; epochs are visited in order and each re-sorts the previous epoch's
    order (a stable sort of nearly sorted data is close to linear time), so many epochs cost
    little more than one.
    """
    w = np.asarray(weights, dtype=float)
    keep = w > 0
    t_ref = np.asarray(t_ref, dtype=float)[keep]
    period = np.asarray(period, dtype=float)[keep]
    w = w[keep] / w[keep].sum()
    out = []
    if t_ref.size == 0:
        return out
    epochs = candidate_epochs(t_ref, period, start, end, pad)
    if epochs.size == 0:
        return out
    order = np.argsort(t_ref + epochs[0] * period, kind="stable")
    tr_s, p_s, w_s = t_ref[order], period[order], w[order]
    state = None
    for n in epochs:
        xs = tr_s + n * p_s
        if state is None or np.any(xs[1:] < xs[:-1]):
            o = np.argsort(xs, kind="stable")  # nearly sorted: close to linear time
            tr_s, p_s, w_s, xs = tr_s[o], p_s[o], w_s[o], xs[o]
            state = _WeightState(w_s, prob)
        if xs[-1] + pad < start or xs[0] - pad > end:
            continue
        region = credible_region(xs, w_s, prob, n_bins=n_bins, merge_gap=merge_gap,
                                 _state=state)
        window = widen(region, pad)
        if window[-1][1] < start or window[0][0] > end:
            continue
        q = state.levels(xs)[:QUANTILE_PROBS.size]
        out.append(EventSummary(epoch=int(n), quantiles=q, region=region, window=window))
    return out
