"""RV follow-up per target: K, planet mass, per-epoch precision, epochs and hours to detect K and to
confirm e > 0, the most informative orbital phases, and (with measured RVs) the updated posterior.

Library only (no printing). :func:`plan_rv` turns assessments (objects with ``name``, ``ok``,
``errors``, ``warnings``, ``samples``) into the JSON records of the ``rv`` command:

``name, ok, errors, warnings, instrument, k_ms (quantiles), mp_mearth (quantiles), mass_relation,
jitter_ms, jitter_source, exposure_s, sigma_rv_ms, visit_h, n_epochs_detect_k, hours_detect_k,
n_epochs_confirm_ecc, hours_confirm_ecc, power_at_n, lrt_threshold, n_epochs_confirm_ecc_fisher,
best_phases (orbital phases from transit, 0..1), best_phases_spread_ms`` and, with RV data,
``n_rv, ecc_updated, omega_updated_deg, k_updated_ms (quantiles), ess_updated, p_e_below_0p05,
lrt_delta_chi2, lrt_p_value, ecc_confirmed``.

Observatory safety limits and site operations rules override any plan made from these numbers.
"""
from __future__ import annotations

import numpy as np

from rhofollow.io.instruments import Spectrograph
from rhofollow.io.rvdata import RVData
from rhofollow.physics import rvconfirm, rvnoise, rvreach, rvupdate
from rhofollow.physics.constants import G_SI, M_SUN_KG, R_EARTH_M, R_SUN_M
from rhofollow.physics.massradius import draw_planet_mass
from rhofollow.physics.rv import semi_amplitude
from rhofollow.core.samples import SampleSet, quantile_dict, reliability, weighted_quantiles
from rhofollow.core.defaults import DEFAULT_SEED
from rhofollow.core.seeds import target_rng as _rng  # per-target, per-stage generator

__all__ = ["CAUTION", "K_MODES", "rv_record", "plan_rv", "planet_mass_and_k"]

from rhofollow.stages.records import CAUTION  # noqa: E402  (one caution text for every output)
K_MODES = ("marginal", "mass")


def planet_mass_and_k(s: SampleSet, rng: np.random.Generator, relation: str = "auto"):
    """Planet mass (M_earth) and K (m/s) per sample, plus the relation used per sample.

    Planet radius from Rp/R* and R*; a known ``mp_mearth`` (with ``mp_mearth_err``) in ``s.meta``
    replaces the mass-radius relation. K uses each sample's e, inclination, M* and P.

    Parameters
    ----------
    s : SampleSet, posterior samples of one target (Rp/R*, R* in R_sun, M* in M_sun, P in days,
        e, inclination in radians)
    rng : numpy.random.Generator, source of the mass draws
    relation : str, mass-radius relation (:data:`rhofollow.physics.massradius.RELATIONS`)

    Returns
    -------
    tuple ``(mp, k, used)``: ndarray (S,) planet mass in Earth masses, ndarray (S,) K in m/s,
    ndarray (S,) of str relation name per sample (``"known"`` for a measured mass)

    Raises
    ------
    ValueError
        Unknown ``relation``.
    """
    rp = s.k * s.rstar * (R_SUN_M / R_EARTH_M)
    known = s.meta.get("mp_mearth")
    mp, used = draw_planet_mass(rp, rng, relation, known_mp_mearth=known,
                                known_err=float(s.meta.get("mp_mearth_err", 0.0) or 0.0))
    k = semi_amplitude(mp, s.mstar, s.period, s.e, s.inc)
    return mp, k, used


def _star_numbers(s: SampleSet):
    """(teff, logg) of the host for the jitter default: catalogue values, else sample medians."""
    teff = s.meta.get("teff_k")
    if teff is None or not np.isfinite(teff):
        tt = s.teff[np.isfinite(s.teff)]
        teff = float(np.median(tt)) if tt.size else np.nan
    logg = s.meta.get("logg_cgs")
    if logg is None or not np.isfinite(logg):
        g = G_SI * s.mstar * M_SUN_KG / (s.rstar * R_SUN_M) ** 2 * 100.0  # cm/s^2
        logg = float(weighted_quantiles(np.log10(g), s.weights, 0.5))
    return teff, logg


def rv_record(s: SampleSet, instrument: Spectrograph, rv_data: RVData | None = None, *, fap=0.01,
              power=0.8, seed=DEFAULT_SEED, relation="auto", k_mode="marginal", n_alt=400, n_null=2000,
              grid: rvconfirm.EccGrid | None = None) -> dict:
    """The RV record of one target at uniformly spread phases (keys in the module docstring).

    Parameters
    ----------
    s : SampleSet
        The target's posterior (``meta``: ``vmag``, optional ``jitter_ms`` in m/s).
    instrument : Spectrograph
        The spectrograph (precision model, exposure limits in s, overhead in s).
    rv_data : RVData or None
        Measured RVs (BJD_TDB, m/s) to test e > 0 on and re-weight with.
    fap, power : float
        False-alarm probability and power of the eccentric-vs-circular test, in (0, 1).
    seed : int
        Run seed (each step draws from :func:`_rng` of the target).
    relation : str
        Mass-radius relation name, or "auto".
    k_mode : str
        One of :data:`K_MODES`.
    n_alt, n_null : int
        Simulated data sets under the posterior and under the circular null.
    grid : EccGrid or None
        The (e, omega) grid of the test.

    Returns
    -------
    dict
        K (m/s) and mass (Earth masses) quantiles, jitter (m/s), exposure (s), precision (m/s), visit
        length (h), epochs and hours to detect K and to confirm e > 0, the informative phases.

    Raises
    ------
    ValueError
        No weighted sample, no V magnitude, an unknown ``k_mode`` or mass-radius relation.
    """
    if k_mode not in K_MODES:
        raise ValueError(f"unknown K mode {k_mode!r}; choose one of {', '.join(K_MODES)}")
    rec: dict = {"name": s.name, "ok": True, "errors": [], "warnings": [], "instrument": instrument.name}
    if not s.n or not s.weights.sum() > 0:
        raise ValueError("no posterior sample carries weight: nothing to plan RVs from")
    rec["ess"] = s.ess
    rec["reliable"], why = reliability(rec["ess"])
    if not rec["reliable"]:
        rec["reliability_note"] = why
    k = _mass_and_k(rec, s, seed, relation)
    vmag = s.meta.get("vmag")
    if vmag is None or not np.isfinite(vmag):
        raise ValueError("no V magnitude (catalogue column 'vmag'): the RV precision cannot be computed")
    _jitter(rec, s)
    texp, sigma = _exposure(rec, s, k, vmag, instrument, fap, power, seed)
    _confirmation(rec, s, k, sigma, texp, instrument, fap, power, seed, n_alt, n_null, grid)
    if rv_data is not None:
        rec.update(_update(s, k, rv_data, rec["jitter_ms"], fap, seed, k_mode, grid, n_null))
    return rec


def _mass_and_k(rec: dict, s: SampleSet, seed, relation) -> np.ndarray:
    """Planet mass and K draws into ``rec`` (quantiles, relation shares); returns K (m/s) per sample."""
    w = s.weights
    mp, k, used = planet_mass_and_k(s, _rng(seed, s.name, "mass"), relation)
    rec["k_ms"] = quantile_dict(k, w)
    rec["mp_mearth"] = quantile_dict(mp, w)
    names, inv = np.unique(used, return_inverse=True)
    share = {str(n): float(np.sum(w[inv == i])) for i, n in enumerate(names)}
    rec["mass_relation"] = {n: round(v, 4) for n, v in share.items()}
    if "giant" in share and share["giant"] > 0.5:
        rec["warnings"].append("planet radius is in the giant regime where radius barely constrains "
                               "mass: K comes from a broad 0.1-13 Jupiter-mass prior")
    return k


def _jitter(rec: dict, s: SampleSet) -> None:
    """Stellar jitter (m/s) into ``rec``: the catalogue's, or the default for the star's Teff and log g."""
    jit = s.meta.get("jitter_ms")
    if jit is not None and np.isfinite(jit):
        rec["jitter_ms"], rec["jitter_source"] = float(jit), "catalogue"
    else:
        teff, logg = _star_numbers(s)
        rec["jitter_ms"] = float(rvnoise.stellar_jitter(teff, logg))
        rec["jitter_source"] = f"default for Teff {teff:.0f} K, log g {logg:.2f}"


def _exposure(rec: dict, s: SampleSet, k, vmag, inst: Spectrograph, fap, power, seed) -> tuple[float, float]:
    """Exposure per visit (s) and per-epoch precision (m/s) into ``rec``; returns both.

    The fewest hours to the power on the Fisher estimate, within the instrument's exposure limits
    (physics/rvexposure.py): a large K gets a short exposure.
    """
    pick = rvreach.choose_exposure_uniform(s.e, s.omega, k, s.weights, vmag, rec["jitter_ms"], inst, fap=fap,
                                           power=power, seed=_rng(seed, s.name, "exposure"))
    texp = pick["exposure_s"]
    sigma = float(rvnoise.epoch_precision(vmag, texp, inst.precision_ref_ms, inst.vmag_ref,
                                          inst.exposure_ref_s, inst.floor_ms, rec["jitter_ms"]))
    rec["exposure_reason"] = pick["reason"].replace("reachable epochs", "uniform phases")
    rec["exposure_s"] = round(texp, 1)
    rec["sigma_rv_ms"] = sigma
    rec["visit_h"] = float(rvnoise.hours_needed(1, texp, inst.overhead_s))
    return texp, sigma


def _confirmation(rec: dict, s: SampleSet, k, sigma, texp, inst: Spectrograph, fap, power, seed, n_alt,
                  n_null, grid) -> None:
    """Epochs and hours to detect K and to confirm e > 0 (uniform phases), and the informative phases."""
    w = s.weights
    n_k = rvconfirm.epochs_to_detect_k(k, sigma, w, fap, power)
    rec["n_epochs_detect_k"] = n_k
    rec["hours_detect_k"] = None if n_k is None else float(rvnoise.hours_needed(n_k, texp, inst.overhead_s))
    n_f = rvconfirm.fisher_epochs_to_confirm(s.e, s.omega, k, sigma, w, fap, power,
                                             seed=_rng(seed, s.name, "fisher"))
    sim = rvconfirm.epochs_to_confirm(s.e, s.omega, k, sigma, fap=fap, power=power, start=n_f,
                                      weights=w, seed=_rng(seed, s.name, "lrt"), n_alt=n_alt,
                                      n_null=n_null, grid=grid)
    rec["n_epochs_confirm_ecc"] = sim["n"]
    rec["hours_confirm_ecc"] = (None if sim["n"] is None
                                else float(rvnoise.hours_needed(sim["n"], texp, inst.overhead_s)))
    rec["power_at_n"] = sim["power"]
    rec["lrt_threshold"] = sim["threshold"]
    rec["n_epochs_confirm_ecc_fisher"] = n_f
    if sim["n"] is None:
        rec["warnings"].append(f"eccentricity cannot be confirmed with {rvconfirm.N_LADDER[-1]} epochs or "
                               f"fewer at {power:.0%} power (power there {sim['power']:.2f}); the "
                               "posterior allows near-circular orbits or K is too small")
    _, _, best = rvconfirm.informative_phases(s.e, s.omega, k, w, seed=_rng(seed, s.name, "phases"))
    rec["best_phases"] = [b["phase"] for b in best]
    rec["best_phases_spread_ms"] = [b["spread_ms"] for b in best]


def _update(s: SampleSet, k, data: RVData, jitter, fap, seed, k_mode, grid, n_null) -> dict:
    g = data.groups()
    args = (data.bjd_tdb, data.rv_ms, data.rv_err_ms, g, s.period, s.t0, s.e, s.omega)
    ll = rvupdate.rv_log_likelihood(*args, k_ms=k if k_mode == "mass" else None, jitter_ms=jitter)
    post = s.reweighted(ll)
    out: dict = {"n_rv": int(data.n), "rv_instruments": data.instruments, "k_mode": k_mode}
    if not np.isfinite(post.weights).all() or post.weights.sum() <= 0:
        out["ecc_updated"] = None
        out["ecc_confirmed"] = False
        return out
    if k_mode == "marginal":
        k_post = rvupdate.conditional_k(*args, jitter_ms=jitter, rng=_rng(seed, s.name, "kcond"))
    else:
        k_post = k
    pw = post.weights
    out["ecc_updated"] = post.quantiles("e")
    out["omega_updated_deg"] = post.quantiles("omega", scale=180.0 / np.pi)
    out["k_updated_ms"] = quantile_dict(k_post, pw)
    out["ess_updated"] = post.ess
    out["p_e_below_0p05"] = float(np.sum(pw[post.e < 0.05]))
    per = float(weighted_quantiles(s.period, pw, 0.5))
    t0 = float(weighted_quantiles(s.t0, pw, 0.5))
    lrt = rvupdate.lrt_on_data(data.bjd_tdb, data.rv_ms, data.rv_err_ms, g, per, t0, jitter,
                               grid=grid, n_null=n_null, seed=_rng(seed, s.name, "lrt-data"))
    out["lrt_delta_chi2"] = lrt["delta_chi2"]
    out["lrt_p_value"] = lrt["p_value"]
    out["ecc_confirmed"] = bool(lrt["p_value"] < fap)
    if post.ess < 50:
        out.setdefault("warnings_update", []).append(
            f"only {post.ess:.0f} effective samples after the RV update; rerun with more --samples")
    return out


def plan_rv(assessments, instrument: Spectrograph, rv_data: dict[str, RVData] | None = None, *,
            fap=0.01, power=0.8, seed=DEFAULT_SEED, relation="auto", k_mode="marginal", n_alt=400, n_null=2000,
            progress=None) -> list[dict]:
    """RV records for every assessment (failed assessments become ``ok: false`` records).

    Parameters
    ----------
    assessments : objects with ``name``, ``ok``, ``errors``, ``warnings``, ``samples`` (SampleSet)
    instrument : the spectrograph to plan with
    rv_data : target name -> measured RVs (optional)
    fap, power : false-alarm probability and power of the eccentricity test
    seed : run seed; each target's draws depend on (seed, name) only
    relation : mass-radius relation (see :mod:`rhofollow.physics.massradius`)
    k_mode : how the RV update treats K (see :mod:`rhofollow.physics.rvupdate`)
    n_alt, n_null : int, simulated data sets (posterior / circular null) per epoch count
    progress : optional callable, invoked once per finished target

    Returns
    -------
    list of dict, one record per assessment in input order (units as in :func:`rv_record`)

    Raises
    ------
    ValueError
        ``fap`` or ``power`` outside (0, 1).
    """
    if not 0 < fap < 1 or not 0 < power < 1:
        raise ValueError(f"fap and power must lie in (0, 1), got fap={fap}, power={power}")
    rv_data = rv_data or {}
    grid = rvconfirm.ecc_grid()
    out = []
    for a in assessments:
        if not a.ok or a.samples is None:
            out.append({"name": a.name, "ok": False, "errors": list(a.errors), "warnings": list(a.warnings)})
        else:
            try:
                rec = rv_record(a.samples, instrument, rv_data.get(a.name), fap=fap, power=power, seed=seed,
                                relation=relation, k_mode=k_mode, n_alt=n_alt, n_null=n_null, grid=grid)
                rec["warnings"] = list(a.warnings) + rec["warnings"] + rec.pop("warnings_update", [])
            except ValueError as exc:
                rec = {"name": a.name, "ok": False, "errors": [str(exc)], "warnings": list(a.warnings)}
            except Exception as exc:  # noqa: BLE001 - contain one target's failure to that target
                from rhofollow.stages.occultations import describe_failure

                rec = {"name": a.name, "ok": False, "warnings": list(a.warnings),
                       "errors": [f"RV planning failed for this target: {describe_failure(exc)}"]}
            out.append(rec)
        if progress is not None:
            progress()
    return out
