"""Which targets get how many RV visits: an exact knapsack over the per-target power curves.

Each target ``i`` offers options ``j``: request ``n_ij`` visits at a cost of ``c_ij`` hours on its
spectrograph, worth ``v_ij = P_i x power_i(n_ij)`` expected confirmed eccentric orbits, with
``P_i`` the posterior probability of the eccentric explanation and ``power_i`` the simulated
power of the eccentricity test at reachable epochs (:mod:`rhofollow.planning.rvreach`). Not
requesting the target is the option ``n = 0`` (cost 0, value 0).

With budgets ``H_s`` (hours per spectrograph ``s``) :func:`solve_budget` maximises the expected
number of confirmations ``sum_i v_i,j(i)`` subject to ``sum_{i on s} c_i,j(i) <= H_s``. Targets of
different spectrographs do not compete, so each spectrograph is one multiple-choice knapsack,
solved exactly by dynamic programming over the capacity in whole seconds (costs are whole seconds:
exposures are whole seconds and overheads whole minutes; a cost that is not is rounded up, so a
chosen set never exceeds the budget). Monotone by construction: a larger budget only enlarges the
feasible set, so the optimum never drops.

Without a budget, :func:`threshold_requests` requests each target at the visits that reach the
wanted power (or, when the power is out of reach in the range, at the reachable visits of most
value) when its expected gain per hour ``P_i power_i(N) / hours_i(N)`` is at least
:data:`MIN_GAIN_PER_HOUR`, and reports what the others would cost.
"""
from __future__ import annotations

import math

import numpy as np

__all__ = ["MIN_GAIN_PER_HOUR", "Option", "target_options", "solve_budget", "brute_force_budget",
           "threshold_requests", "MAX_UNITS"]

#: Expected confirmed eccentric orbits per telescope hour below which a target is not requested
#: without ``--hours`` (0.01 / h: at most 100 h per expected confirmation; a chosen convention,
#: common practice, no source).
MIN_GAIN_PER_HOUR = 0.01

#: Largest DP table per spectrograph (capacity units); above it the unit grows beyond one second.
MAX_UNITS = 2_000_000


class Option(tuple):
    """(n_visits, hours, value) of one choice for one target."""

    __slots__ = ()

    def __new__(cls, n, hours, value):
        return super().__new__(cls, (int(n), float(hours), float(value)))

    n = property(lambda self: self[0])
    hours = property(lambda self: self[1])
    value = property(lambda self: self[2])


def target_options(curve: list[dict], visit_h: float, p_eccentric: float) -> list[Option]:
    """Options of one target from its power curve and visit cost.

    Only options whose value rises with n are kept (more visits at no gain are never chosen).

    Parameters
    ----------
    curve : list of dict ``{"n", "power"}``, visits and simulated power (0-1), in increasing n
    visit_h : float, telescope time of one visit (exposure + overhead), hours
    p_eccentric : float, posterior probability of the eccentric explanation (0-1)

    Returns
    -------
    list of Option ``(n, hours, value)``: visits, cost in hours (n x visit_h), expected confirmations
    """
    out, best = [], 0.0
    for pt in curve:
        v = float(p_eccentric) * float(pt["power"])
        if v > best + 1e-12:
            out.append(Option(pt["n"], pt["n"] * visit_h, v))
            best = v
    return out


def _units(budget_h, costs_h):
    """Capacity unit (s) and integer costs: one second unless the table would be too large."""
    unit = 1.0
    cap_s = budget_h * 3600.0
    if cap_s / unit > MAX_UNITS:
        unit = math.ceil(cap_s / MAX_UNITS)
    cap = int(math.floor(cap_s / unit + 1e-9))
    return unit, cap, [[int(math.ceil(c * 3600.0 / unit - 1e-6)) for c in cs] for cs in costs_h]


def _knapsack(options: list[list[Option]], budget_h: float) -> tuple[list[int], float]:
    """Exact multiple-choice knapsack: index of the chosen option per target (-1 = none), value."""
    if not options:
        return [], 0.0
    unit, cap, costs = _units(budget_h, [[o.hours for o in opts] for opts in options])
    best = np.zeros(cap + 1)
    choice = np.full((len(options), cap + 1), -1, dtype=np.int16)
    for i, opts in enumerate(options):
        new = best.copy()
        for j, (o, c) in enumerate(zip(opts, costs[i])):
            if c > cap:
                continue
            cand = np.full(cap + 1, -np.inf)
            cand[c:] = best[:cap + 1 - c] + o.value
            better = cand > new + 1e-12
            new = np.where(better, cand, new)
            choice[i] = np.where(better, j, choice[i])
        best = new
    # walk back from the best capacity (the smallest capacity reaching the optimum: fewest hours)
    top = float(best.max())
    c = int(np.argmax(best >= top - 1e-12))
    picks = [-1] * len(options)
    for i in range(len(options) - 1, -1, -1):
        j = int(choice[i, c])
        picks[i] = j
        if j >= 0:
            c -= costs[i][j]
    return picks, top


def solve_budget(items: list[dict], budgets: dict[str, float]) -> dict[str, dict]:
    """The visits per target that maximise the expected confirmations within the budgets.

    Parameters
    ----------
    items : dicts ``{"name", "instrument", "options": [Option, ...]}``
    budgets : spectrograph name -> hours (targets on a spectrograph without a budget get nothing)

    Returns
    -------
    name -> ``{"visits", "hours", "value"}`` for every item (visits 0 when not funded).
    """
    out = {it["name"]: {"visits": 0, "hours": 0.0, "value": 0.0} for it in items}
    by_inst: dict[str, list[dict]] = {}
    for it in items:
        by_inst.setdefault(it["instrument"], []).append(it)
    for inst, group in by_inst.items():
        h = float(budgets.get(inst, 0.0))
        if h <= 0:
            continue
        picks, _ = _knapsack([g["options"] for g in group], h)
        for g, j in zip(group, picks):
            if j >= 0:
                o = g["options"][j]
                out[g["name"]] = {"visits": o.n, "hours": o.hours, "value": o.value}
    return out


def brute_force_budget(items: list[dict], budget_h: float) -> float:
    """Best expected confirmations by enumerating every combination (one spectrograph; tests only).

    Parameters
    ----------
    items : list of dict ``{"options": [Option, ...], ...}`` as for :func:`solve_budget`
    budget_h : float, telescope-time budget of the spectrograph, hours

    Returns
    -------
    float, the largest total value (expected confirmed eccentric orbits) within ``budget_h``
    """
    import itertools

    best = 0.0
    for combo in itertools.product(*[[None] + list(it["options"]) for it in items]):
        cost = sum(o.hours for o in combo if o is not None)
        if cost <= budget_h + 1e-9:
            best = max(best, sum(o.value for o in combo if o is not None))
    return best


def threshold_requests(items: list[dict], power: float, min_gain_per_hour: float = MIN_GAIN_PER_HOUR):
    """Requests without a budget: each target at the visits reaching ``power``, when worth it.

    Parameters
    ----------
    items : list of dict, as for :func:`solve_budget` plus ``"visits_to_power"`` (int or None),
        ``"visit_h"`` (hours per visit) and optionally ``"value_at_power"`` (expected confirmations)
    power : float, wanted power of the eccentricity test (0-1)
    min_gain_per_hour : float, expected confirmations per telescope hour below which a target is
        not requested

    Returns
    -------
    dict, name -> ``{"visits", "hours", "value", "gain_per_hour", "requested", "reason"}`` (hours
    in hours, gain in expected confirmations per hour; visits, hours and value 0 when not requested)
    """
    out = {}
    for it in items:
        n = it.get("visits_to_power")
        opts = {o.n: o for o in it["options"]}
        if n is None and not it["options"]:
            out[it["name"]] = {"visits": 0, "hours": 0.0, "value": 0.0, "gain_per_hour": 0.0,
                               "requested": False, "reason": "not confirmable in this range (too few reachable "
                                                             "visits, or no power gained)"}
            continue
        if n is None:   # the wanted power is out of reach: the option of most value (all reachable visits)
            o = it["options"][-1]
            pre = f"not confirmable at {power:.0%} power in this range; "
        else:
            o = opts.get(n) or Option(n, n * it["visit_h"], it.get("value_at_power", 0.0))
            pre = ""
        g = o.value / o.hours if o.hours > 0 else 0.0
        ok = g >= min_gain_per_hour
        out[it["name"]] = {"visits": o.n if ok else 0, "hours": o.hours if ok else 0.0,
                           "value": o.value if ok else 0.0, "gain_per_hour": g, "requested": ok,
                           "reason": (pre + f"{o.n} visits, {o.hours:.1f} h: {g:.3f} expected confirmations per hour"
                                      + ("" if ok else f" < {min_gain_per_hour:g}: would cost {o.hours:.1f} h "
                                         f"for {o.value:.2f} expected confirmations"))}
    return out
