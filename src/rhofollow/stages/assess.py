"""The density-mismatch assessment: catalogue rows -> posterior samples and explanations.

This module is the boundary between the catalogue (units already converted by the reader) and the
numerical core in :mod:`rhofollow.physics`. It picks the routes a row offers, draws the measurements,
runs the hypotheses and builds the JSON record of the ``assess`` command. No printing here.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from rhofollow.core.types import Measurement, Target
from rhofollow.io.catalogue import PHYSICAL_RANGES
from rhofollow.physics import stars as st
from rhofollow.physics.eccentricity import (HYPOTHESES, MEASURED_STAR_HYPOTHESES, best_possible_loglike, HypothesisSetup, Obs,
                                   StarPool, TransitObservables, run_hypothesis)
from rhofollow.physics.priors import (DEFAULT_PRIOR, MEASURED_ECC_DEFAULT_ERR, EccPrior, measured_prior, parse_prior,
                                      reweight_to_prior)
from rhofollow.physics.transit import g_factor
from rhofollow.physics.sampling import draw_split_normal
from rhofollow.physics.transit import ars_from_t14_b, ecc_min_from_ratio, rho_from_ars, smo_invert
from rhofollow.core.samples import SampleSet, quantile_dict, reliability
from rhofollow.core.defaults import DEFAULT_SAMPLES, DEFAULT_SEED
from rhofollow.core.seeds import target_seed  # the per-target generator (re-exported here)

__all__ = ["Assessment", "assess_target", "assess_catalogue", "target_seed", "READINGS", "LABELS",
           "evidence_strength", "DEFAULT_N_SAMPLES", "ESS_FLOOR", "CHI2_REJECT", "DEFAULT_RADIUS_RATIO",
           "PRIOR_DRIVEN_DELTA", "REMAINING_LN_B", "ORBIT_TENSION_SIGMA", "data_weight", "record_data_weight",
           "refresh_data_keys"]

DEFAULT_N_SAMPLES = DEFAULT_SAMPLES
#: An explanation whose best sample misses the transit measurements and the star's density by more than
#: this chi^2 does not fit (about 5 sigma for one or two measurements). A row that no explanation with
#: the measured star fits is kept and reported as a finding ("no explanation fits"), ranked low.
CHI2_REJECT = 30.0
#: Radius ratio assumed when the row gives neither rp_rs nor depth_ppm (a density route needs none):
#: Rp/R* = 0.1 +- 0.05 (Jupiter around the Sun is 0.10; common practice, no source). It enters only
#: the occultation depth and durations and the mass-radius estimate of K, each flagged by a warning.
DEFAULT_RADIUS_RATIO = Obs(0.1, 0.05, 0.05)
#: A bound of the 95 % e interval is called prior-driven when the same samples re-weighted to a
#: uniform e prior move it by more than this (in e; common practice, no source).
PRIOR_DRIVEN_DELTA = 0.05
#: An explanation still "remains" when its evidence is within this many nats of the best one
#: (2 ln B < 10, below "very strong" on the Kass & Raftery 1995 scale).
REMAINING_LN_B = 5.0
#: A measured orbit disagrees with the transit and star when the density ratio misses the measured
#: orbit's g^3 by more than this many sigma of ln rho.
ORBIT_TENSION_SIGMA = 3.0
ESS_FLOOR = 2000.0
HOURS = 1.0 / 24.0

#: Assumed 1-sigma errors (fraction of the value) when the catalogue gives none; each use is a warning.
DEFAULT_FRACTIONAL_ERRORS = {
    "t14_h": 0.02, "t23_h": 0.03, "a_rs": 0.05, "rho_circ_cgs": 0.15, "rp_rs": 0.02, "depth_ppm": 0.04,
    "rho_star_cgs": 0.10, "mstar_msun": 0.05, "rstar_rsun": 0.04, "logg_cgs": 0.1 / 4.4,
    "teff_k": 100 / 5800, "feh_dex": None, "b": None,
}
DEFAULT_ABSOLUTE_ERRORS = {"feh_dex": 0.1, "b": 0.1, "companion_rho_cgs": None}

#: Plain-language reading of each explanation.
READINGS = {
    "circular": "the densities agree: a circular orbit around the target star explains the transit",
    "eccentric": "the transit duration does not fit the star on a circular orbit: an eccentric orbit "
                 "explains it",
    "blend": "a circular orbit diluted by unresolved light from another star (a blend) explains it",
    "other_host": "a circular orbit around the companion star explains it (the planet may orbit the "
                  "other star)",
    "star_density": "the star's density is misestimated: with the star's density free, the transit "
                    "fits; check log g, the radius, the isochrone or asteroseismic solution",
}
#: Short names of the explanations for tables and warnings.
LABELS = {"circular": "circular orbit", "eccentric": "eccentric orbit", "blend": "diluted transit (blend)",
          "other_host": "another host star", "star_density": "misestimated stellar density"}


def evidence_strength(ln_bayes: float) -> str:
    """Verbal strength of a Bayes factor, Kass & Raftery 1995 (JASA 90, 773) scale on 2 ln B."""
    two = 2 * ln_bayes
    if two < 2:
        return "barely worth mentioning"
    if two < 6:
        return "positive"
    if two < 10:
        return "strong"
    return "very strong"


@dataclass
class Assessment:
    """Result for one target: the JSON record, the eccentric-hypothesis samples, and all evidences."""

    name: str
    target: Target | None
    ok: bool
    errors: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    samples: SampleSet | None = None
    record: dict = field(default_factory=dict)


class _RowProblem(Exception):
    pass


def _obs(t: Target, key: str, warnings: list, scale: float = 1.0, required=True) -> Obs | None:
    """Measurement -> Obs (scaled), filling a documented default error with a warning when missing."""
    m: Measurement | None = t.get(key)
    if m is None or not math.isfinite(m.value):
        if required:
            raise _RowProblem(f"column '{key}' is needed for this route")
        return None
    lo, hi = m.err_lo, m.err_hi
    if lo <= 0 and hi <= 0:
        frac = DEFAULT_FRACTIONAL_ERRORS.get(key)
        if frac is not None:
            lo = hi = abs(m.value) * frac
            warnings.append(f"no uncertainty for '{key}'; assumed ±{100 * frac:.3g} %")
        elif DEFAULT_ABSOLUTE_ERRORS.get(key) is not None:
            lo = hi = DEFAULT_ABSOLUTE_ERRORS[key]
            warnings.append(f"no uncertainty for '{key}'; assumed ±{lo:g}")
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
        warnings.append("t14_h is given without rp_rs or depth_ppm: the duration route needs the radius "
                        "ratio and is skipped")
    elif t.has("t14_h") and not (t.has("t23_h") or t.has("b")):
        warnings.append("t14_h is given without t23_h or b: the duration route is skipped")
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
            raise _RowProblem("the durations are inconsistent with the radius ratio for most draws "
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
        raise _RowProblem("no independent stellar density route: give rho_star_cgs, mstar_msun + "
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
            warnings.append("no stellar mass route; mass estimated from the density with a main-sequence "
                            "relation (rough, affects K)")
        rstar = np.cbrt(mstar / (rho / st.RHO_SUN_CGS))
    else:
        rho, mstar, rstar = candidates[route]
    return StarPool(rho, mstar, rstar, teff), labels[route], medians


def _disagreement(medians: dict[str, Obs], what: str, warnings: list, threshold: float = 3.0):
    keys = list(medians)
    for i in range(len(keys)):
        for j in range(i + 1, len(keys)):
            a, b = medians[keys[i]], medians[keys[j]]
            s = math.hypot(0.5 * (a.lo + a.hi), 0.5 * (b.lo + b.hi))
            z = abs(a.value - b.value) / s if s > 0 else 0.0
            if z > threshold:
                warnings.append(f"{what} routes disagree: {keys[i]} gives {math.exp(a.value):.3g}, "
                                f"{keys[j]} gives {math.exp(b.value):.3g} g/cm^3 ({z:.1f} sigma)")


def _omega_quantiles(omega: np.ndarray, w: np.ndarray) -> dict:
    """Quantiles of omega (deg), unwrapped about the weighted circular mean (may leave [0, 360))."""
    mean = math.atan2(float(np.sum(w * np.sin(omega))), float(np.sum(w * np.cos(omega))))
    unwrapped = mean + np.mod(omega - mean + np.pi, 2 * np.pi) - np.pi
    q = quantile_dict(np.degrees(unwrapped), w)
    shift = 360.0 * math.floor(q["q50"] / 360.0)
    return {k: v - shift for k, v in q.items()}


def _explanation_probabilities(logz: dict) -> dict:
    """Posterior probability of each explanation from its log-evidence, with equal prior odds."""
    if not logz:
        return {}
    m = max(logz.values())
    w = {h: math.exp(v - m) for h, v in logz.items()}
    tot = sum(w.values())
    return {h: v / tot for h, v in w.items()}


def assess_target(t: Target, n_samples: int = DEFAULT_N_SAMPLES, prior: str | EccPrior = DEFAULT_PRIOR,
                  seed: int = DEFAULT_SEED, transit_prob: bool = True, ess_floor: float = ESS_FLOOR,
                  hypotheses=HYPOTHESES, extra_loglike=None) -> Assessment:
    """Assess one validated target. Never raises for a bad row: problems land in ``errors``.

    ``extra_loglike(aux) -> array`` (optional) folds further measurements of the target (RVs,
    occultation timings; see :mod:`rhofollow.stages.update`) into every hypothesis' likelihood.
    """
    rng = target_seed(seed, t.name)
    warnings = list(t.warnings)
    try:
        prior_obj = prior if isinstance(prior, EccPrior) else parse_prior(prior)
        return _assess(t, n_samples, prior_obj, rng, transit_prob, ess_floor, warnings, hypotheses,
                       extra_loglike)
    except _RowProblem as exc:
        msg = f"{t.source}, row {t.row} ({t.name}): {exc}"
        return Assessment(t.name, t, False, [msg], warnings,
                          record={"name": t.name, "ok": False, "errors": [msg], "warnings": warnings})


def _assess(t, n, prior, rng, transit_prob, ess_floor, warnings, hypotheses, extra_loglike=None) -> Assessment:
    period = _obs(t, "period_d", warnings)
    if period.lo <= 0:
        period = Obs(period.value, 0.0, 0.0)
    t0m = t.get("t0_bjd")
    if t0m is None or not t0m.has_error:
        warnings.append("no uncertainty for 't0_bjd'; the epoch is treated as exact")
        t0 = Obs(t.value("t0_bjd"), 0.0, 0.0)
    else:
        t0 = Obs(t0m.value, t0m.err_lo or t0m.err_hi, t0m.err_hi or t0m.err_lo)
    k = _radius_ratio(t, warnings)
    k_assumed = k is None
    n_mc = max(4000, n // 4)
    routes = _circular_density_routes(t, period, k, rng, n_mc, warnings)
    b_circ = routes.pop("_b", None)
    if not routes:
        raise _RowProblem("no transit-geometry route: give a_rs; or t14_h with t23_h or b; or rho_circ_cgs")
    _disagreement({r: _ln_summary(v[0]) for r, v in routes.items()}, "circular-density", warnings)
    star, star_label, star_medians = _star_pool(t, rng, n, warnings)
    _disagreement(star_medians, "stellar-density", warnings)

    contam = t.value("contam_frac", 0.0)
    contam = 0.0 if not math.isfinite(contam) else contam
    if k_assumed:
        k = DEFAULT_RADIUS_RATIO
        warnings.append(f"no radius ratio (rp_rs or depth_ppm): Rp/R* = {k.value:g} +- {k.lo:g} assumed; "
                        "the density route does not need it, but the occultation depth and durations and "
                        "the planet radius behind K are rough")
    if "durations" in routes:
        route = "durations"
        t23 = _obs(t, "t23_h", warnings, HOURS, required=False)
        bobs = _obs(t, "b", warnings, required=False) if t23 is None else None
        proxy = _ln_summary(routes["durations"][0]) if "durations" in routes else None
        obs = TransitObservables("durations", period, t0, k, t14=_obs(t, "t14_h", warnings, HOURS),
                                 t23=t23, b=bobs, ln_rho_circ=proxy, dilution_known=1 / (1 - contam),
                                 b_circ=b_circ)
    else:
        route = "density"
        best = min((r for r in routes), key=lambda r: _ln_summary(routes[r][0]).hi)
        bobs = _obs(t, "b", warnings, required=False)
        obs = TransitObservables("density", period, t0, k, b=bobs,
                                 ln_rho_circ=_ln_summary(routes[best][0]), dilution_known=1 / (1 - contam))
    rho_circ_draws, rho_circ_label = routes.get("durations") or routes.get("a_rs") or routes.get("rho_circ")

    setup = HypothesisSetup(prior=prior, transit_prob=transit_prob)
    measured = t.has("ecc")
    if measured:
        em = t.get("ecc")
        try:
            setup.prior = measured_prior(em.value, em.err_lo or MEASURED_ECC_DEFAULT_ERR,
                                         em.err_hi or MEASURED_ECC_DEFAULT_ERR)
        except ValueError as exc:
            raise _RowProblem(str(exc)) from None
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

    results = {}
    for hyp in hypotheses:
        if hyp == "other_host" and setup.companion is None:
            continue
        if hyp == "eccentric":
            m = n
        elif hyp == "star_density":
            m = max(1000, n // 8)
        else:
            m = max(2000, n // 4)
        floor = ess_floor if hyp == "eccentric" else min(ess_floor, m / 10)
        results[hyp] = run_hypothesis(hyp, obs, star, setup, m, rng, ess_floor=floor,
                                      extra_loglike=extra_loglike)

    ecc_res = results["eccentric"]
    lw = ecc_res.log_w
    if not np.any(np.isfinite(lw)) or not any(np.any(np.isfinite(r.log_w)) for r in results.values()):
        raise _RowProblem("no orbit, blend or host star gives this transit geometry with this star (every "
                          "sample is physically impossible); check the durations, radius ratio and period")
    # how far each explanation's best sample is from the transit measurements and the star's density
    ll_best = best_possible_loglike(obs)
    chi2 = {}
    for h, r in results.items():
        fit = r.aux["loglike"] if h == "star_density" else r.aux["loglike"] + r.aux["log_star"]
        fit = fit[np.isfinite(fit)]
        chi2[h] = float(2 * (ll_best - np.max(fit))) if fit.size else math.inf
    w = np.exp(lw - np.max(lw))
    w = w / w.sum()
    aux = ecc_res.aux
    meta = {"route_transit": route, "route_star": star_label, "prior": prior.name,
            "transit_prob": bool(transit_prob),
            "row": t.row, "source": t.source, "k_assumed": bool(k_assumed), "orbit_measured": bool(measured)}
    for key in ("ra_deg", "dec_deg", "vmag", "logg_cgs", "feh_dex", "jitter_ms", "mp_mearth",
                "teff_k", "contam_frac"):
        if t.has(key):
            meta[key] = t.value(key)
    for key in ("mp_mearth",):
        if t.has(key):
            mm = t.get(key)
            meta[key + "_err"] = mm.err
    samples = SampleSet(name=t.name, e=aux["e"], omega=aux["omega"], b=aux["b"], k=aux["k"],
                        period=aux["period"], t0=aux["t0"], rho_star=aux["rho_star"], mstar=aux["mstar"],
                        rstar=aux["rstar"], a_rs=aux["a_rs"], inc=aux["inc"], teff=aux["teff"],
                        weights=w, meta=meta)
    ess = samples.ess
    if ess < ess_floor:
        warnings.append(f"effective sample size {ess:.0f} is below the floor {ess_floor:.0f} even after "
                        "adapting the proposal; quantiles are noisier than usual")

    # summaries
    rho_star_q = quantile_dict(star.rho)
    nr = min(len(rho_circ_draws), len(star.rho))
    ratio = rho_circ_draws[:nr] / rng.permutation(star.rho)[:nr]
    ln_ratio = np.log(ratio)
    sd = float(np.std(ln_ratio))
    ratio_sigma = float(abs(np.median(ln_ratio)) / sd) if sd > 0 else 0.0
    orbit_tension = None
    if measured:
        # the density ratio the measured orbit predicts, g^3 (Kipping 2010), against the observed one
        e_m = setup.prior.ppf(rng.random(nr))
        w_m = (setup.omega_measured.ppf(rng.random(nr)) if setup.omega_measured is not None
               else 2 * np.pi * rng.random(nr))
        resid = ln_ratio - 3 * np.log(g_factor(e_m, w_m))
        sdr = float(np.std(resid))
        orbit_tension = float(abs(np.median(resid)) / sdr) if sdr > 0 else 0.0

    logz = {h: float(r.log_evidence) for h, r in results.items()}
    finite = {h: v for h, v in logz.items() if math.isfinite(v)}
    fits = {h for h in finite if chi2[h] < CHI2_REJECT}
    core_fit = [h for h in finite if h in MEASURED_STAR_HYPOTHESES and h in fits]
    if measured and orbit_tension is not None and orbit_tension > ORBIT_TENSION_SIGMA:
        # the measured orbit stands; the explanations that keep it and the measured star are out
        core_fit = [h for h in core_fit if h not in ("eccentric", "circular")]
    if core_fit:
        finding = "fits"
        pool = core_fit
    elif "star_density" in fits:
        finding = "star density in question"
        pool = [h for h in finite if h in fits]
    else:
        finding = "no explanation fits"
        pool = list(finite)
    if measured and orbit_tension is not None and orbit_tension > ORBIT_TENSION_SIGMA and finding == "fits":
        finding = "measured orbit disagrees"
    order = sorted(pool, key=finite.get, reverse=True)
    favoured = order[0] if order else "eccentric"
    ln_b = finite[order[0]] - finite[order[1]] if len(order) > 1 else float("inf")
    remaining = [h for h in order if finite[h] > finite[order[0]] - REMAINING_LN_B] if order else []
    p_expl = _explanation_probabilities({h: finite[h] for h in pool})
    star_ln_b = None
    if "star_density" in finite:
        ref = [finite[h] for h in finite if h in MEASURED_STAR_HYPOTHESES]
        if ref:
            star_ln_b = finite["star_density"] - max(ref)
    consistency = _consistency(finding, ratio_sigma, orbit_tension, chi2, remaining, favoured, star_ln_b,
                               measured, t)
    if finding != "fits":
        warnings.append(consistency["check"])

    p_gt = min(1.0, float(np.sum(w[samples.e > 0.1])))   # a probability: no rounding above 1
    p_gt_prior = float(prior.prob_above(0.1, transit_prob=transit_prob))
    data_odds = _odds_ratio(p_gt, p_gt_prior, ess)
    ecc_q = samples.quantiles("e")
    uni = _uniform_prior_interval(samples.e, w, prior, measured, ecc_q)

    record = {
        "name": t.name, "ok": True, "errors": [], "warnings": warnings,
        "route_transit": rho_circ_label if route == "density" else "durations (forward model, b marginalised)",
        "route_star": star_label,
        "rho_circ_cgs": quantile_dict(rho_circ_draws),
        "rho_star_cgs": rho_star_q,
        "density_ratio": quantile_dict(ratio),
        "density_ratio_sigma": ratio_sigma,
        "ecc": ecc_q,
        "omega_deg": _omega_quantiles(samples.omega, w),
        "ecc_min": float(ecc_min_from_ratio(np.median(ratio))),
        "p_ecc_gt_0p1": p_gt,
        "p_ecc_gt_0p1_prior": p_gt_prior,
        "ecc_odds_ratio": data_odds,
        "ecc_data_weight": data_weight(p_gt, p_gt_prior, ess),
        **uni,
        "ess": float(ess),
        "reliable": reliability(ess)[0],
        **({"reliability_note": reliability(ess)[1]} if not reliability(ess)[0] else {}),
        "n_samples": int(samples.n),
        "prior": prior.name,
        "orbit_measured": bool(measured),
        "radius_ratio_assumed": bool(k_assumed),
        "log_evidence": {h: (v if math.isfinite(v) else None) for h, v in logz.items()},
        "chi2_best": {h: (v if math.isfinite(v) else None) for h, v in chi2.items()},
        "p_explanation": p_expl,
        "p_explanation_prior": {h: 1.0 / len(p_expl) for h in p_expl} if p_expl else {},
        "favoured": favoured,
        "ln_bayes_factor": ln_b if math.isfinite(ln_b) else None,
        "evidence_strength": evidence_strength(ln_b) if math.isfinite(ln_b) else "only one explanation fits",
        "star_density_ln_bayes_factor": star_ln_b,
        "fits": finding == "fits",
        "finding": finding,
        "consistency": consistency,
        "reading": READINGS[favoured],
    }
    return Assessment(t.name, t, True, [], warnings, samples, record)


def data_weight(p: float, p0: float, ess: float) -> float:
    """W = B/(1 + B), B the posterior-to-prior odds of e above the threshold (:func:`_odds_ratio`):
    what the data add to the prior, 0.5 when they say nothing, towards 1 when they favour e above
    it, towards 0 when they disfavour it. The one definition used by the record
    (``ecc_data_weight``), the ranking (:func:`rhofollow.report.tables.rank_targets`) and the night
    and campaign block values (:func:`rhofollow.planning.night.science_from_records`)."""
    b = _odds_ratio(p, p0, ess)
    return b / (1 + b) if math.isfinite(b) else 1.0


def record_data_weight(record: dict) -> float:
    """W of an assessment record from its ``p_ecc_gt_0p1``, ``p_ecc_gt_0p1_prior`` and ``ess``
    (:func:`data_weight`), so a record whose posterior was updated (ledger RVs, occultation timings)
    gives the updated W. A record without the prior's value falls back to its ``ecc_data_weight``,
    then (a record written before either key) to its ``p_ecc_gt_0p1``, and one without a posterior
    to 0.0."""
    p, p0 = record.get("p_ecc_gt_0p1"), record.get("p_ecc_gt_0p1_prior")
    if p is not None and p0 is not None:
        return data_weight(float(p), float(p0), float(record.get("ess") or 1.0))
    for key in ("ecc_data_weight", "p_ecc_gt_0p1"):
        w = record.get(key)
        if w is not None and math.isfinite(float(w)):
            return float(w)
    return 0.0


def refresh_data_keys(record: dict) -> None:
    """Recompute ``ecc_odds_ratio`` and ``ecc_data_weight`` after ``p_ecc_gt_0p1`` or ``ess`` changed."""
    p, p0 = record.get("p_ecc_gt_0p1"), record.get("p_ecc_gt_0p1_prior")
    if p is None or p0 is None:
        return
    ess = float(record.get("ess") or 1.0)
    record["ecc_odds_ratio"] = _odds_ratio(float(p), float(p0), ess)
    record["ecc_data_weight"] = data_weight(float(p), float(p0), ess)


def _odds_ratio(p: float, p0: float, ess: float) -> float:
    """Posterior-to-prior odds of e > 0.1 (the Bayes factor of e > 0.1 against e <= 0.1), with the
    posterior probability kept at least half a sample from 0 and 1."""
    eps = 0.5 / max(ess, 1.0)
    p = min(max(p, eps), 1 - eps)
    p0 = min(max(p0, 1e-12), 1 - 1e-12)
    return float((p / (1 - p)) / (p0 / (1 - p0)))


_UNIFORM = None


def _uniform_prior_interval(e, w, prior: EccPrior, measured: bool, ecc_q: dict) -> dict:
    """The e interval under a uniform prior beside the default one (same samples re-weighted by the
    prior ratio), and which bounds of the 95 % interval the prior sets."""
    global _UNIFORM
    if measured:
        return {"ecc_uniform_prior": None, "ess_uniform_prior": None,
                "ecc_bounds": {"lower": "measured orbit", "upper": "measured orbit"}}
    if _UNIFORM is None:
        _UNIFORM = parse_prior("uniform")
    wu = reweight_to_prior(e, w, prior, _UNIFORM)
    if wu is None:
        return {"ecc_uniform_prior": None, "ess_uniform_prior": 0.0,
                "ecc_bounds": {"lower": "unknown", "upper": "unknown"}}
    qu = quantile_dict(e, wu)
    ess_u = float(1.0 / np.sum(wu * wu))
    bounds = {side: ("prior" if abs(ecc_q[key] - qu[key]) > PRIOR_DRIVEN_DELTA else "data")
              for side, key in (("lower", "q025"), ("upper", "q975"))}
    return {"ecc_uniform_prior": qu, "ess_uniform_prior": ess_u, "ecc_bounds": bounds}


def _consistency(finding, ratio_sigma, orbit_tension, chi2, remaining, favoured, star_ln_b, measured, t) -> dict:
    """The consistency finding of a row: its size, the explanations that remain and what to check."""
    size = orbit_tension if measured and orbit_tension is not None else ratio_sigma
    rem = ", ".join(LABELS[h] for h in remaining) or "none"
    if finding == "fits":
        text = "the transit, the star and the explanations agree"
    elif finding == "measured orbit disagrees":
        text = (f"the measured orbit (e, omega) predicts a different transit density than observed "
                f"({size:.1f} sigma in ln rho); the orbit is kept as measured. Remaining explanations: {rem}. "
                "Check the stellar density (log g, radius), contaminating light or a companion star, and "
                "the transit fit (a/R*, durations, b)")
    elif finding == "star density in question":
        text = (f"no explanation with the measured star fits ({size:.1f} sigma in ln rho"
                + (" against the measured orbit" if measured else "") + "); only a misestimated stellar "
                f"density does. Remaining explanations: {rem}. Check the star's log g, radius and "
                "density route, a companion star, and the transit fit")
    else:
        text = (f"no explanation fits ({size:.1f} sigma in ln rho; best chi^2 "
                f"{min(chi2.values()):.0f}). Check the durations, radius ratio, period and stellar "
                "parameters")
    return {"finding": finding, "tension_sigma_ln_rho": float(size),
            "orbit_tension_sigma": orbit_tension, "remaining": remaining, "favoured": favoured,
            "star_density_ln_bayes_factor": star_ln_b, "check": text}


def assess_catalogue(targets, n_samples: int = DEFAULT_N_SAMPLES, prior: str | EccPrior = DEFAULT_PRIOR,
                     seed: int = DEFAULT_SEED, transit_prob: bool = True, ess_floor: float = ESS_FLOOR,
                     progress=None) -> list[Assessment]:
    """Assess every target (serially; see :mod:`rhofollow.core.executor` for pools and clusters).

    ``progress`` is an optional callable invoked once per finished target.
    """
    prior_obj = prior if isinstance(prior, EccPrior) else parse_prior(prior)
    out = []
    for t in targets:
        out.append(assess_target(t, n_samples, prior_obj, seed, transit_prob, ess_floor))
        if progress is not None:
            progress()
    return out
