"""Catalogue row -> the inputs of the assessment: measurements with their errors, the circular-orbit
density routes, draws of the host star, the transit observables and the hypothesis set-up.

Part of :mod:`rhofollow.stages.assess` (the orchestration lives there). Problems with a row raise
:class:`RowProblem`, which the assessment turns into the row's error; defaults filled in for missing
uncertainties are appended to the row's warnings, in the order the row is read.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rhofollow.core.types import Measurement, Notice, Target
from rhofollow.io.catalogue import PHYSICAL_RANGES
from rhofollow.physics import stars as st
from rhofollow.physics.eccentricity import HypothesisSetup, Obs, StarPool, TransitObservables
from rhofollow.physics.priors import MEASURED_ECC_DEFAULT_ERR, EccPrior, measured_prior
from rhofollow.physics.sampling import draw_split_normal
from rhofollow.physics.transit import ars_from_t14_b, rho_from_ars, smo_invert

__all__ = ["RowProblem", "RowInputs", "read_row", "hypothesis_setup", "DEFAULT_RADIUS_RATIO",
           "DEFAULT_FRACTIONAL_ERRORS", "DEFAULT_ABSOLUTE_ERRORS", "HOURS"]

#: Radius ratio assumed when the row gives neither rp_rs nor depth_ppm (a density route needs none):
#: Rp/R* = 0.1 +- 0.05 (Jupiter around the Sun is 0.10; common practice, no source). It enters only
#: the occultation depth and durations and the mass-radius estimate of K, each flagged by a warning.
DEFAULT_RADIUS_RATIO = Obs(0.1, 0.05, 0.05)
HOURS = 1.0 / 24.0

#: Assumed 1-sigma errors (fraction of the value) when the catalogue gives none; each use is a warning.
DEFAULT_FRACTIONAL_ERRORS = {
    "t14_h": 0.02, "t23_h": 0.03, "a_rs": 0.05, "rho_circ_cgs": 0.15, "rp_rs": 0.02, "depth_ppm": 0.04,
    "rho_star_cgs": 0.10, "mstar_msun": 0.05, "rstar_rsun": 0.04, "logg_cgs": 0.1 / 4.4,
    "teff_k": 100 / 5800, "feh_dex": None, "b": None,
}
DEFAULT_ABSOLUTE_ERRORS = {"feh_dex": 0.1, "b": 0.1, "companion_rho_cgs": None}



class RowProblem(Exception):
    """A catalogue row the assessment cannot use (the message names the column or the route)."""


def _obs(t: Target, key: str, warnings: list, scale: float = 1.0, required=True) -> Obs | None:
    """Measurement -> Obs (scaled), filling a documented default error with a warning when missing."""
    m: Measurement | None = t.get(key)
    if m is None or not math.isfinite(m.value):
        if required:
            raise RowProblem(f"column '{key}' is needed for this route")
        return None
    lo, hi = m.err_lo, m.err_hi
    if lo <= 0 and hi <= 0:
        frac = DEFAULT_FRACTIONAL_ERRORS.get(key)
        if frac is not None:
            lo = hi = abs(m.value) * frac
            warnings.append(Notice(f"no uncertainty for '{key}'; assumed ±{100 * frac:.3g} %", "assumed",
                                   t.name))
        elif DEFAULT_ABSOLUTE_ERRORS.get(key) is not None:
            lo = hi = DEFAULT_ABSOLUTE_ERRORS[key]
            warnings.append(Notice(f"no uncertainty for '{key}'; assumed ±{lo:g}", "assumed", t.name))
    lo = lo if lo > 0 else hi
    hi = hi if hi > 0 else lo
    return Obs(m.value * scale, lo * scale, hi * scale)


def _draw(rng, n, o: Obs, lower=-np.inf, upper=np.inf):
    return draw_split_normal(rng, n, o.value, o.lo, o.hi, lower, upper)


def _ln_summary(x: np.ndarray) -> Obs:
    """Split-normal description of log(x) from draws (median, 16 and 84 % quantiles)."""
    q16, q50, q84 = np.quantile(np.log(x), [0.16, 0.5, 0.84])
    return Obs(float(q50), max(q50 - q16, 1e-6), max(q84 - q50, 1e-6))


def _split_summary(x: np.ndarray) -> Obs:
    q16, q50, q84 = np.quantile(x, [0.16, 0.5, 0.84])
    return Obs(float(q50), max(q50 - q16, 1e-6), max(q84 - q50, 1e-6))


def _radius_ratio(t: Target, warnings) -> Obs | None:
    """Rp/R* from rp_rs or depth_ppm; None when the row gives neither."""
    if t.has("rp_rs"):
        return _obs(t, "rp_rs", warnings)
    if t.has("depth_ppm"):
        d = _obs(t, "depth_ppm", warnings, scale=1e-6)
        k = math.sqrt(d.value)
        return Obs(k, d.lo / (2 * k), d.hi / (2 * k))
    return None


def _circular_density_routes(t: Target, period: Obs, k: Obs, rng, n, warnings) -> dict:
    """Circular-orbit density draws (g/cm^3) from every transit route the row offers."""
    routes = {}
    p = _draw(rng, n, period, lower=0)
    kk = _draw(rng, n, k if k is not None else DEFAULT_RADIUS_RATIO, lower=0, upper=1)
    if t.has("t14_h") and (t.has("t23_h") or t.has("b")) and k is None:
        warnings.append(Notice("t14_h is given without rp_rs or depth_ppm: the duration route needs the "
                               "radius ratio and is skipped", "input", t.name))
    elif t.has("t14_h") and not (t.has("t23_h") or t.has("b")):
        warnings.append(Notice("t14_h is given without t23_h or b: the duration route is skipped", "input",
                               t.name))
    if t.has("t14_h") and (t.has("t23_h") or t.has("b")) and k is not None:
        t14 = _draw(rng, n, _obs(t, "t14_h", warnings, HOURS), lower=0)
        if t.has("t23_h"):
            t23 = _draw(rng, n, _obs(t, "t23_h", warnings, HOURS), lower=0)
            b_smo, a_rs = smo_invert(t14, t23, kk, p)
            ok = np.isfinite(b_smo)
            if ok.mean() > 0.5:
                routes["_b"] = _split_summary(b_smo[ok])
            label = "durations (T14, T23, k; Seager & Mallen-Ornelas 2003)"
        else:
            b = np.abs(_draw(rng, n, _obs(t, "b", warnings)))
            routes["_b"] = _split_summary(b)
            a_rs = ars_from_t14_b(t14, b, kk, p)
            label = "durations (T14, b, k; Seager & Mallen-Ornelas 2003)"
        good = np.isfinite(a_rs) & (a_rs > 1)
        if good.mean() < 0.5:
            raise RowProblem("the durations are inconsistent with the radius ratio for most draws "
                              "(T23 too close to T14 or b^2 < 0)")
        routes["durations"] = (rho_from_ars(a_rs[good], p[good]), label)
    if t.has("a_rs"):
        a = _draw(rng, n, _obs(t, "a_rs", warnings), lower=1)
        routes["a_rs"] = (rho_from_ars(a, p), "a/R* and P (Kepler's third law)")
    if t.has("rho_circ_cgs"):
        routes["rho_circ"] = (_draw(rng, n, _obs(t, "rho_circ_cgs", warnings), lower=0), "given rho_circ")
    return routes


def _star_pool(t: Target, rng, n, warnings) -> tuple[StarPool, str, dict]:
    """Draws of the host star from the first independent route in order of directness."""
    # truncated at the catalogue's accepted lower limit (not higher: a valid row must not fail here)
    teff = (_draw(rng, n, _obs(t, "teff_k", [], required=False), lower=PHYSICAL_RANGES["teff_k"][0])
            if t.has("teff_k") else np.full(n, np.nan))
    candidates = {}
    if t.has("rho_star_cgs"):
        candidates["rho_star"] = _draw(rng, n, _obs(t, "rho_star_cgs", warnings), lower=0)
    if t.has("mstar_msun", "rstar_rsun"):
        m_ = _draw(rng, n, _obs(t, "mstar_msun", warnings), lower=0)
        r_ = _draw(rng, n, _obs(t, "rstar_rsun", warnings), lower=0)
        candidates["mass_radius"] = (st.rho_from_mass_radius(m_, r_), m_, r_)
    if t.has("logg_cgs", "rstar_rsun"):
        lg = _draw(rng, n, _obs(t, "logg_cgs", warnings))
        r_ = _draw(rng, n, _obs(t, "rstar_rsun", warnings), lower=0)
        candidates["logg_radius"] = (st.rho_from_logg_radius(lg, r_), st.mass_from_logg_radius(lg, r_), r_)
    if t.has("teff_k", "logg_cgs", "feh_dex"):
        lg = _draw(rng, n, _obs(t, "logg_cgs", warnings))
        fe = _draw(rng, n, _obs(t, "feh_dex", warnings))
        m_, r_ = st.torres_mass_radius(teff, lg, fe, rng=rng)
        candidates["torres2010"] = (st.rho_from_mass_radius(m_, r_), m_, r_)
    if not candidates:
        raise RowProblem("no independent stellar density route: give rho_star_cgs, mstar_msun + "
                          "rstar_rsun, logg_cgs + rstar_rsun, or teff_k + logg_cgs + feh_dex")
    labels = {"rho_star": "given rho* (e.g. asteroseismic)", "mass_radius": "M* and R*",
              "logg_radius": "log g and R*", "torres2010": "Teff, log g, [Fe/H] (Torres et al. 2010)"}
    route = next(iter(candidates))
    medians = {}
    for key, val in candidates.items():
        rho_k = val if key == "rho_star" else val[0]
        medians[key] = _ln_summary(rho_k)
    if route == "rho_star":
        rho = candidates["rho_star"]
        other = next((candidates[k] for k in ("mass_radius", "logg_radius", "torres2010") if k in candidates), None)
        if t.has("mstar_msun"):
            mstar = _draw(rng, n, _obs(t, "mstar_msun", warnings), lower=0)
        elif other is not None:
            # mass from the other route, radius consistent with the adopted density
            mstar = other[1]
        else:
            mstar = st.mass_from_density_ms(rho)
            warnings.append(Notice("no stellar mass route; mass estimated from the density with a "
                                   "main-sequence relation (rough, affects K)", "assumed", t.name))
        rstar = np.cbrt(mstar / (rho / st.RHO_SUN_CGS))
    else:
        rho, mstar, rstar = candidates[route]
    return StarPool(rho, mstar, rstar, teff), labels[route], medians


def _disagreement(medians: dict[str, Obs], what: str, warnings: list, name: str, threshold: float = 3.0):
    keys = list(medians)
    for i in range(len(keys)):
        for j in range(i + 1, len(keys)):
            a, b = medians[keys[i]], medians[keys[j]]
            s = math.hypot(0.5 * (a.lo + a.hi), 0.5 * (b.lo + b.hi))
            z = abs(a.value - b.value) / s if s > 0 else 0.0
            if z > threshold:
                warnings.append(Notice(f"{what} routes disagree: {keys[i]} gives {math.exp(a.value):.3g}, "
                                       f"{keys[j]} gives {math.exp(b.value):.3g} g/cm^3 ({z:.1f} sigma)",
                                       "input", name))




@dataclass
class RowInputs:
    """What one catalogue row gives the hypotheses.

    Attributes
    ----------
    obs : TransitObservables
        The transit measurements the likelihood uses (period and epoch in days, durations in days,
        ln of the circular-orbit density in ln g/cm^3).
    star : StarPool
        Draws of the host star (density g/cm^3, mass Msun, radius Rsun, Teff K).
    star_label : str
        The independent stellar route used.
    route : str
        ``"durations"`` (forward model of T14 and T23 or b) or ``"density"``.
    rho_circ_draws : ndarray
        Circular-orbit density draws of the adopted transit route, g/cm^3.
    rho_circ_label : str
        That route's description.
    k_assumed : bool
        True when the row gives no radius ratio and :data:`DEFAULT_RADIUS_RATIO` is used.
    """

    obs: TransitObservables
    star: StarPool
    star_label: str
    route: str
    rho_circ_draws: np.ndarray
    rho_circ_label: str
    k_assumed: bool


def _epoch(t: Target, warnings: list) -> tuple[Obs, Obs]:
    """Period and mid-transit epoch (days, BJD_TDB) with their errors; a missing error is zero."""
    period = _obs(t, "period_d", warnings)
    if period.lo <= 0:
        period = Obs(period.value, 0.0, 0.0)
    t0m = t.get("t0_bjd")
    if t0m is None or not t0m.has_error:
        warnings.append(Notice("no uncertainty for 't0_bjd'; the epoch is treated as exact", "assumed",
                               t.name))
        t0 = Obs(t.value("t0_bjd"), 0.0, 0.0)
    else:
        t0 = Obs(t0m.value, t0m.err_lo or t0m.err_hi, t0m.err_hi or t0m.err_lo)
    return period, t0


def read_row(t: Target, n: int, rng, warnings: list) -> RowInputs:
    """Read one validated row into the inputs of the hypotheses, drawing its measurements.

    Parameters
    ----------
    t : Target
        The validated catalogue row (units already converted by the reader).
    n : int
        Number of posterior samples asked for (the host star gets ``n`` draws, the density routes
        ``max(4000, n // 4)``).
    rng : numpy.random.Generator
        The target's generator (:func:`rhofollow.core.seeds.target_seed`); draws are taken in a
        fixed order, so the same seed gives the same inputs.
    warnings : list of str
        The row's warnings, appended to in reading order.

    Returns
    -------
    RowInputs
        The observables, the host-star draws and the adopted transit route.

    Raises
    ------
    RowProblem
        A column a route needs is missing, the durations are inconsistent, or no route is given.
    """
    period, t0 = _epoch(t, warnings)
    k = _radius_ratio(t, warnings)
    k_assumed = k is None
    routes = _circular_density_routes(t, period, k, rng, max(4000, n // 4), warnings)
    b_circ = routes.pop("_b", None)
    if not routes:
        raise RowProblem("no transit-geometry route: give a_rs; or t14_h with t23_h or b; or rho_circ_cgs")
    _disagreement({r: _ln_summary(v[0]) for r, v in routes.items()}, "circular-density", warnings, t.name)
    star, star_label, star_medians = _star_pool(t, rng, n, warnings)
    _disagreement(star_medians, "stellar-density", warnings, t.name)

    contam = t.value("contam_frac", 0.0)
    contam = 0.0 if not math.isfinite(contam) else contam
    if k_assumed:
        k = DEFAULT_RADIUS_RATIO
        warnings.append(Notice(f"no radius ratio (rp_rs or depth_ppm): Rp/R* = {k.value:g} +- {k.lo:g} "
                               "assumed; the density route does not need it, but the occultation depth and "
                               "durations and the planet radius behind K are rough", "assumed", t.name))
    route, obs = _transit_observables(t, routes, period, t0, k, 1 / (1 - contam), b_circ, warnings)
    rho_circ_draws, rho_circ_label = routes.get("durations") or routes.get("a_rs") or routes.get("rho_circ")
    return RowInputs(obs, star, star_label, route, rho_circ_draws, rho_circ_label, k_assumed)


def _transit_observables(t: Target, routes: dict, period: Obs, t0: Obs, k: Obs, dilution: float, b_circ,
                         warnings: list) -> tuple[str, TransitObservables]:
    """The likelihood's route and observables: the durations when a duration route exists, else the
    best-measured circular-orbit density."""
    if "durations" in routes:
        t23 = _obs(t, "t23_h", warnings, HOURS, required=False)
        bobs = _obs(t, "b", warnings, required=False) if t23 is None else None
        proxy = _ln_summary(routes["durations"][0])
        return "durations", TransitObservables("durations", period, t0, k, t14=_obs(t, "t14_h", warnings, HOURS),
                                               t23=t23, b=bobs, ln_rho_circ=proxy, dilution_known=dilution,
                                               b_circ=b_circ)
    best = min((r for r in routes), key=lambda r: _ln_summary(routes[r][0]).hi)
    bobs = _obs(t, "b", warnings, required=False)
    return "density", TransitObservables("density", period, t0, k, b=bobs,
                                         ln_rho_circ=_ln_summary(routes[best][0]), dilution_known=dilution)


def hypothesis_setup(t: Target, prior: EccPrior, transit_prob: bool, rng, n: int,
                     warnings: list) -> HypothesisSetup:
    """The hypotheses' set-up: the eccentricity prior (or the row's measured orbit) and the companion.

    Parameters
    ----------
    t : Target
        The validated row; ``ecc`` (with ``omega_deg``, degrees) replaces the prior by the measured
        orbit, ``companion_rho_cgs`` (g/cm^3) adds the other-host star (``n // 4`` draws).
    prior : EccPrior
        The eccentricity prior of the run.
    transit_prob : bool
        Weight (e, omega) by the transit probability (off for a measured orbit).
    rng : numpy.random.Generator
        The target's generator (the companion's draws).
    n : int
        Number of posterior samples asked for.
    warnings : list of str
        The row's warnings, appended to.

    Returns
    -------
    HypothesisSetup
        ``orbit_measured`` tells whether the row's orbit was measured.

    Raises
    ------
    RowProblem
        The measured eccentricity cannot make a prior (for example e outside [0, 1)).
    """
    setup = HypothesisSetup(prior=prior, transit_prob=transit_prob)
    if t.has("ecc"):
        em = t.get("ecc")
        try:
            setup.prior = measured_prior(em.value, em.err_lo or MEASURED_ECC_DEFAULT_ERR,
                                         em.err_hi or MEASURED_ECC_DEFAULT_ERR)
        except ValueError as exc:
            raise RowProblem(str(exc)) from None
        setup.transit_prob = False
        setup.orbit_measured = True
        if t.has("omega_deg"):
            om = t.get("omega_deg")
            setup.omega_measured = Obs(math.radians(om.value), math.radians(om.err_lo or 5.0),
                                       math.radians(om.err_hi or 5.0))
    if t.has("companion_rho_cgs"):
        crho = _draw(rng, n // 4, _obs(t, "companion_rho_cgs", warnings), lower=0)
        cm = st.mass_from_density_ms(crho)
        setup.companion = StarPool(crho, cm, np.cbrt(cm / (crho / st.RHO_SUN_CGS)), np.full(crho.size, np.nan))
        if t.has("companion_flux_frac"):
            setup.companion_flux = t.value("companion_flux_frac")
    return setup
