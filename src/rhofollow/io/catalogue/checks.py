"""The checks of one catalogue row: definitions (positive, fractions), physical ranges, routes."""
from __future__ import annotations

import math

from rhofollow.io.catalogue.columns import COLUMNS, COORDS, PHYSICAL_RANGES, REQUIRED, TORRES_TEFF_RANGE, _EXTREME, _LOGG_UNIT, _T0_RANGE


# ---------------------------------------------------------------------------------------------
# Row validation
# ---------------------------------------------------------------------------------------------

_POSITIVE = {
    "period_d": "the period", "t14_h": "a duration", "t23_h": "a duration",
    "rho_circ_cgs": "a density", "rho_star_cgs": "a density", "companion_rho_cgs": "a density",
    "mstar_msun": "a mass", "rstar_rsun": "a radius", "mp_mearth": "a mass",
    "teff_k": "a temperature",
}
_UNIT_INTERVAL_HALF_OPEN = {"ecc": "the eccentricity", "contam_frac": "a light fraction",
                            "companion_flux_frac": "a light fraction"}
_INF = math.inf

#: The definition checks, in the order they are reported: (column, low, high, low inclusive,
#: high inclusive, reason template with {x} the value). They run before :data:`PHYSICAL_RANGES`.
_DEFINITION_RANGES: list[tuple[str, float, float, bool, bool, str]] = (
    [(c, 0.0, _INF, False, True, f"must be positive ({what}), got {{x:g}}") for c, what in _POSITIVE.items()]
    + [(c, 0.0, 1.0, True, False, f"must be in [0, 1) ({what}), got {{x:g}}")
       for c, what in _UNIT_INTERVAL_HALF_OPEN.items()]
    + [("rp_rs", 0.0, 1.0, False, False, "must be in (0, 1), got {x:g}"),
       ("depth_ppm", 0.0, 1e6, False, False, "must be in (0, 1e6) ppm, got {x:g}"),
       ("b", 0.0, _INF, True, True, "must not be negative, got {x:g}"),
       ("ra_deg", 0.0, 360.0, True, False, "must be in [0, 360) degrees, got {x:g}"),
       ("dec_deg", -90.0, 90.0, True, True, "must be in [-90, 90] degrees, got {x:g}"),
       ("jitter_ms", 0.0, _INF, True, True, "must not be negative, got {x:g}"),
       ("t0_bjd", _T0_RANGE[0], _T0_RANGE[1], True, True,
        "{x:.12g} is not a full BJD_TDB (expected about 2.4e6 to 2.5e6); add back any offset such as "
        "2450000 or 2457000")])


def _physical_reason(canon: str, lo: float, hi: float, lo_in: bool, hi_in: bool) -> str:
    """Reason template ({x} the value) for a value outside ``PHYSICAL_RANGES[canon]``."""
    unit = COLUMNS[canon].unit
    shown = "" if unit is None or unit is _LOGG_UNIT else f" {unit}"
    return (f"{{x:g}} is outside the physical range {'[' if lo_in else '('}{lo:g}, "
            f"{hi:g}{']' if hi_in else ')'}{shown}")


def _drop_outside(v: dict[str, float], bad, canon: str, lo: float, hi: float, lo_in: bool, hi_in: bool,
                  reason: str) -> None:
    """Report ``reason`` (formatted with x = the value) on ``canon`` and drop its value when it lies
    outside the interval, so no later cross-check uses it. Nothing happens when the value is absent."""
    if canon not in v:
        return
    x = v[canon]
    if not ((x >= lo if lo_in else x > lo) and (x <= hi if hi_in else x < hi)):
        bad(canon, reason.format(x=x))
        del v[canon]


def _check_row(v: dict[str, float], given: set[str], label, require_coords: bool,
               uncertainties: dict[str, tuple[float, float]] | None = None):
    """Return (errors, warnings) as lists of (column label, reason). ``v`` holds parsed values,
    ``uncertainties`` their (lower, upper) 1-sigma errors where given."""
    errs: list[tuple[str, str]] = []
    warns: list[tuple[str, str]] = []

    def bad(canon, reason):
        errs.append((label(canon), reason))

    def warn(canon, reason):
        warns.append((label(canon), reason))

    for canon in REQUIRED + (COORDS if require_coords else ()):
        if canon not in given:
            bad(canon, "is required but missing")

    # definitions first, then the physical ranges; a value that fails is dropped from every later check
    for canon, lo, hi, lo_in, hi_in, reason in _DEFINITION_RANGES:
        _drop_outside(v, bad, canon, lo, hi, lo_in, hi_in, reason)
    for canon, (lo, hi, lo_in, hi_in, _why) in PHYSICAL_RANGES.items():
        _drop_outside(v, bad, canon, lo, hi, lo_in, hi_in, _physical_reason(canon, lo, hi, lo_in, hi_in))

    # Geometry cross-checks, only between values that passed their own checks.
    k = v.get("rp_rs")
    if k is None and "depth_ppm" in v:
        k = math.sqrt(v["depth_ppm"] * 1e-6)
    _check_depth_ratio(v, warn)
    _check_impact(v, k, bad, warn)
    _check_durations(v, k, bad)
    _check_orbit(v, given, uncertainties, bad, warn)

    if not _has_geometry_route(given):
        errs.append(("a_rs | t14_h | rho_circ_cgs",
                     "no transit-geometry route: give a_rs; or t14_h with t23_h or b, and "
                     "depth_ppm or rp_rs; or rho_circ_cgs"))
    if not _has_star_route(given):
        errs.append(("rho_star_cgs | mstar_msun | logg_cgs | teff_k",
                     "no independent stellar-density route: give rho_star_cgs; or mstar_msun "
                     "and rstar_rsun; or logg_cgs and rstar_rsun; or teff_k, logg_cgs and "
                     "feh_dex"))

    # Warnings: the row is kept.
    _warn_extremes(v, warn)
    return errs, warns


def _check_depth_ratio(v: dict[str, float], warn) -> None:
    """Warn when depth_ppm and rp_rs^2 disagree by more than a factor of 2."""
    if "rp_rs" in v and "depth_ppm" in v and v["rp_rs"] ** 2 > 0:  # (a tiny rp_rs can underflow)
        ratio = v["depth_ppm"] * 1e-6 / v["rp_rs"] ** 2
        if not (0.5 <= ratio <= 2.0):
            warn("depth_ppm", f"depth_ppm is {ratio:.2g} x rp_rs^2; the two "
                              "disagree by more than a factor of 2")


def _check_impact(v: dict[str, float], k: float | None, bad, warn) -> None:
    """The a_rs / b route: b must allow a transit (grazing is a warning) and a_rs must put the planet
    outside the star; ``k`` is the radius ratio (from rp_rs or depth_ppm) or None."""
    if "b" in v:
        limit = 1.0 + (k if k is not None else 1.0)
        if v["b"] > limit:
            what = "1 + rp_rs" if k is not None else "2"
            bad("b", f"b = {v.pop('b'):g} exceeds {what} = {limit:g}: no transit")
        elif k is not None and v["b"] > 1.0 - k:
            warn("b", f"grazing geometry (b = {v['b']:g} > 1 - rp_rs); "
                      "durations constrain the density poorly")
    if "a_rs" in v:
        limit = 1.0 + (k if k is not None else 0.0)
        if v["a_rs"] <= limit:
            what = "1 + rp_rs" if k is not None else "1"
            bad("a_rs", f"a_rs = {v.pop('a_rs'):g} must exceed {what} = {limit:g}: the planet "
                        "would orbit inside the star")


def _check_durations(v: dict[str, float], k: float | None, bad) -> None:
    """The duration route: t23_h < t14_h < the period, and (with ``k``, the radius ratio) the two
    durations must invert to a real geometry."""
    if "t14_h" in v and "t23_h" in v and v["t23_h"] >= v["t14_h"]:
        bad("t23_h", f"full duration t23_h = {v['t23_h']:g} h must be shorter than total "
                     f"duration t14_h = {v['t14_h']:g} h")
        del v["t23_h"]
    if "t14_h" in v and "period_d" in v and v["t14_h"] >= 24.0 * v["period_d"]:
        bad("t14_h", f"t14_h = {v.pop('t14_h'):g} h is not shorter than the period "
                     f"({24.0 * v['period_d']:g} h)")
    if "t23_h" in v and "period_d" in v and v["t23_h"] >= 24.0 * v["period_d"]:
        bad("t23_h", f"t23_h = {v.pop('t23_h'):g} h is not shorter than the period")

    # Seager & Mallen-Ornelas (2003) exact circular inversion of the two durations.
    if all(c in v for c in ("t14_h", "t23_h", "period_d")) and k is not None:
        p_h = 24.0 * v["period_d"]
        s14 = math.sin(math.pi * v["t14_h"] / p_h) ** 2
        s23 = math.sin(math.pi * v["t23_h"] / p_h) ** 2
        r = s23 / s14 if s14 > 0 else math.inf
        if r < 1.0:
            b2 = ((1 - k) ** 2 - r * (1 + k) ** 2) / (1 - r)
            ar2 = ((1 + k) ** 2 - b2 * (1 - s14)) / s14
            if b2 < 0:
                bad("t23_h", f"the durations (t14_h, t23_h) and radius ratio {k:.4g} imply "
                             f"b^2 = {b2:.3g} < 0 (T23 too close to T14 for this depth)")
            elif ar2 < 1.0:
                bad("t14_h", f"the durations imply a/R* = {math.sqrt(max(ar2, 0)):.3g} < 1")


def _check_orbit(v: dict[str, float], given: set[str],
                 uncertainties: dict[str, tuple[float, float]] | None, bad, warn) -> None:
    """A known orbit: omega_deg needs ecc, ecc without omega_deg is a warning, and ecc must pass the
    assessment's measured-orbit test."""
    if "omega_deg" in given and "ecc" not in given:
        bad("omega_deg", "omega_deg is given without ecc")
    elif "ecc" in v and "omega_deg" not in given and v["ecc"] > 0:
        warn("ecc", "ecc is given without omega_deg; omega is treated as unknown")
    if "ecc" in v:
        # the same test (and default error) the assessment applies to a measured orbit
        from rhofollow.physics.priors import MEASURED_ECC_DEFAULT_ERR, measured_ecc_problem

        lo, hi = (uncertainties or {}).get("ecc", (0.0, 0.0))
        why = measured_ecc_problem(v["ecc"], lo or MEASURED_ECC_DEFAULT_ERR, hi or MEASURED_ECC_DEFAULT_ERR)
        if why:
            bad("ecc", why)


def _has_geometry_route(given: set[str]) -> bool:
    """True when the given columns make at least one transit-geometry route."""
    return ("a_rs" in given or "rho_circ_cgs" in given or
            ("t14_h" in given and ("t23_h" in given or "b" in given)
             and ("depth_ppm" in given or "rp_rs" in given)))


def _has_star_route(given: set[str]) -> bool:
    """True when the given columns make at least one independent stellar-density route."""
    return ("rho_star_cgs" in given
            or ("rstar_rsun" in given and ("mstar_msun" in given or "logg_cgs" in given))
            or {"teff_k", "logg_cgs", "feh_dex"} <= given)


def _warn_extremes(v: dict[str, float], warn) -> None:
    """Warnings that keep the row: teff_k outside the Torres et al. (2010) range when that route is
    used, and values outside the usual range of their column."""
    if all(c in v for c in ("teff_k", "logg_cgs", "feh_dex")):
        lo, hi = TORRES_TEFF_RANGE
        if not (lo <= v["teff_k"] <= hi):
            warn("teff_k", f"teff_k = {v['teff_k']:g} K is outside "
                           f"{lo:g}-{hi:g} K, where the Torres et al. (2010) "
                           "mass-radius relations are reliable")
    for canon, (lo, hi) in _EXTREME.items():
        if canon in v and not (lo <= v[canon] <= hi):
            if canon == "rp_rs":
                warn(canon, f"rp_rs = {v[canon]:g} > {hi:g}: more like a "
                            "stellar eclipse than a planet")
            else:
                warn(canon, f"extreme value {v[canon]:g} (outside {lo:g} to "
                            f"{hi:g}); please check")
