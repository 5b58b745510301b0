"""The explanations of a density mismatch: sampling each one, and comparing them.

Part of :mod:`rhofollow.stages.assess`. :func:`run_hypotheses` draws the importance-weighted samples of
every explanation (:mod:`rhofollow.physics.eccentricity`); :func:`density_ratio` measures the mismatch
itself (and, for a measured orbit, its tension with the orbit's g^3); :func:`compare` turns the
evidences and best-fit chi^2 into the row's finding, the favoured explanation and what to check.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rhofollow.physics.eccentricity import MEASURED_STAR_HYPOTHESES, best_possible_loglike, run_hypothesis
from rhofollow.physics.transit import g_factor

__all__ = ["CHI2_REJECT", "REMAINING_LN_B", "ORBIT_TENSION_SIGMA", "READINGS", "LABELS", "evidence_strength",
           "run_hypotheses", "chi2_best", "DensityRatio", "density_ratio", "Comparison", "compare"]

#: An explanation whose best sample misses the transit measurements and the star's density by more than
#: this chi^2 does not fit (about 5 sigma for one or two measurements). A row that no explanation with
#: the measured star fits is kept and reported as a finding ("no explanation fits"), ranked low.
CHI2_REJECT = 30.0
#: An explanation still "remains" when its evidence is within this many nats of the best one
#: (2 ln B < 10, below "very strong" on the Kass & Raftery 1995 scale).
REMAINING_LN_B = 5.0
#: A measured orbit disagrees with the transit and star when the density ratio misses the measured
#: orbit's g^3 by more than this many sigma of ln rho.
ORBIT_TENSION_SIGMA = 3.0

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
    """Verbal strength of a Bayes factor, Kass & Raftery 1995 (JASA 90, 773) scale on 2 ln B.

    Parameters
    ----------
    ln_bayes : float
        Natural log of the Bayes factor (nats).

    Returns
    -------
    str
        "barely worth mentioning", "positive", "strong" or "very strong".
    """
    two = 2 * ln_bayes
    if two < 2:
        return "barely worth mentioning"
    if two < 6:
        return "positive"
    if two < 10:
        return "strong"
    return "very strong"



def _sample_size(hyp: str, n: int) -> int:
    """Samples drawn for one explanation: all ``n`` for the eccentric one (its samples are the
    posterior), fewer for the others (only their evidence and best fit are used)."""
    if hyp == "eccentric":
        return n
    if hyp == "star_density":
        return max(1000, n // 8)
    return max(2000, n // 4)


def run_hypotheses(hypotheses, obs, star, setup, n: int, rng, ess_floor: float, extra_loglike=None) -> dict:
    """Importance-sample every explanation in ``hypotheses`` (``other_host`` only with a companion).

    Parameters
    ----------
    hypotheses : iterable of str
        Names from :data:`rhofollow.physics.eccentricity.HYPOTHESES`, run in this order.
    obs : TransitObservables
        The transit measurements (days, ln g/cm^3).
    star : StarPool
        Draws of the host star (g/cm^3, Msun, Rsun, K).
    setup : HypothesisSetup
        Prior, measured orbit and companion (:func:`rhofollow.stages.assess_inputs.hypothesis_setup`).
    n : int
        Posterior samples asked for (the eccentric explanation's size).
    rng : numpy.random.Generator
        The target's generator.
    ess_floor : float
        Effective sample size the eccentric explanation adapts towards (samples); the others use at
        most a tenth of their size.
    extra_loglike : callable or None
        ``extra_loglike(aux) -> array`` of further log-likelihood terms (RVs, occultation timings).

    Returns
    -------
    dict
        Explanation name -> :class:`~rhofollow.physics.sampling.ImportanceResult`.

    Raises
    ------
    RowProblem
        No sample of any explanation is physically possible.
    """
    from rhofollow.stages.assess_inputs import RowProblem

    results = {}
    for hyp in hypotheses:
        if hyp == "other_host" and setup.companion is None:
            continue
        m = _sample_size(hyp, n)
        floor = ess_floor if hyp == "eccentric" else min(ess_floor, m / 10)
        results[hyp] = run_hypothesis(hyp, obs, star, setup, m, rng, ess_floor=floor,
                                      extra_loglike=extra_loglike)
    lw = results["eccentric"].log_w
    if not np.any(np.isfinite(lw)) or not any(np.any(np.isfinite(r.log_w)) for r in results.values()):
        raise RowProblem("no orbit, blend or host star gives this transit geometry with this star (every "
                         "sample is physically impossible); check the durations, radius ratio and period")
    return results


def chi2_best(results: dict, obs) -> dict:
    """How far each explanation's best sample is from the transit measurements and the star's density.

    Parameters
    ----------
    results : dict
        Explanation name -> importance result (:func:`run_hypotheses`).
    obs : TransitObservables
        The transit measurements.

    Returns
    -------
    dict
        Explanation name -> chi^2 = 2 (ln L_exact - max ln L) (dimensionless; inf when no sample is
        finite). The misestimated-density explanation is measured without the star's density term.
    """
    ll_best = best_possible_loglike(obs)
    chi2 = {}
    for h, r in results.items():
        fit = r.aux["loglike"] if h == "star_density" else r.aux["loglike"] + r.aux["log_star"]
        fit = fit[np.isfinite(fit)]
        chi2[h] = float(2 * (ll_best - np.max(fit))) if fit.size else math.inf
    return chi2


@dataclass
class DensityRatio:
    """The observed density mismatch.

    Attributes
    ----------
    ratio : ndarray
        Draws of rho_circ / rho_star (dimensionless).
    sigma : float
        |median ln ratio| over the spread of ln ratio (sigma of ln rho from 1).
    orbit_tension : float or None
        With a measured orbit: sigma of ln rho between the observed ratio and the orbit's g^3
        (Kipping 2010); None otherwise.
    """

    ratio: np.ndarray
    sigma: float
    orbit_tension: float | None


def density_ratio(rho_circ_draws: np.ndarray, star, setup, rng) -> DensityRatio:
    """The circular-orbit over the independent density, and its tension with a measured orbit.

    Parameters
    ----------
    rho_circ_draws : ndarray
        Circular-orbit density draws, g/cm^3.
    star : StarPool
        Host-star draws (``rho`` in g/cm^3), paired with ``rho_circ_draws`` in a random order.
    setup : HypothesisSetup
        ``orbit_measured``, ``prior`` and ``omega_measured`` (radians) give the measured orbit.
    rng : numpy.random.Generator
        The target's generator (the pairing and the measured orbit's draws).

    Returns
    -------
    DensityRatio
        Ratio draws (dimensionless) and the sigma of ln rho of the mismatch.
    """
    nr = min(len(rho_circ_draws), len(star.rho))
    ratio = rho_circ_draws[:nr] / rng.permutation(star.rho)[:nr]
    ln_ratio = np.log(ratio)
    sd = float(np.std(ln_ratio))
    ratio_sigma = float(abs(np.median(ln_ratio)) / sd) if sd > 0 else 0.0
    orbit_tension = None
    if setup.orbit_measured:
        # the density ratio the measured orbit predicts, g^3 (Kipping 2010), against the observed one
        e_m = setup.prior.ppf(rng.random(nr))
        w_m = (setup.omega_measured.ppf(rng.random(nr)) if setup.omega_measured is not None
               else 2 * np.pi * rng.random(nr))
        resid = ln_ratio - 3 * np.log(g_factor(e_m, w_m))
        sdr = float(np.std(resid))
        orbit_tension = float(abs(np.median(resid)) / sdr) if sdr > 0 else 0.0
    return DensityRatio(ratio, ratio_sigma, orbit_tension)


@dataclass
class Comparison:
    """The row's finding from the evidences (nats) and best-fit chi^2 of its explanations.

    Attributes
    ----------
    logz : dict
        Explanation -> log-evidence (nats; may be -inf).
    chi2 : dict
        Explanation -> best-fit chi^2 (:func:`chi2_best`).
    finding : str
        "fits", "measured orbit disagrees", "star density in question" or "no explanation fits".
    favoured : str
        The explanation with the highest evidence among those the finding keeps.
    ln_b : float
        Log Bayes factor (nats) of the favoured over the next one (inf when only one is kept).
    remaining : list of str
        The kept explanations within :data:`REMAINING_LN_B` nats of the favoured one.
    p_expl : dict
        Posterior probability of each kept explanation (equal prior odds).
    star_ln_b : float or None
        Log Bayes factor (nats) of a misestimated star against the best measured-star explanation.
    consistency : dict
        The finding, its size (sigma of ln rho), the remaining explanations and what to check.
    """

    logz: dict
    chi2: dict
    finding: str
    favoured: str
    ln_b: float
    remaining: list
    p_expl: dict
    star_ln_b: float | None
    consistency: dict


def _finding(finite: dict, fits: set, tension: bool) -> tuple[str, list]:
    """The finding and the explanations it keeps (the pool the favoured one is chosen from)."""
    core_fit = [h for h in finite if h in MEASURED_STAR_HYPOTHESES and h in fits]
    if tension:
        # the measured orbit stands; the explanations that keep it and the measured star are out
        core_fit = [h for h in core_fit if h not in ("eccentric", "circular")]
    if core_fit:
        return ("measured orbit disagrees" if tension else "fits"), core_fit
    if "star_density" in fits:
        return "star density in question", [h for h in finite if h in fits]
    return "no explanation fits", list(finite)


def compare(results: dict, chi2: dict, dr: DensityRatio, measured: bool) -> Comparison:
    """Compare the explanations of one row.

    Parameters
    ----------
    results : dict
        Explanation name -> importance result (:func:`run_hypotheses`).
    chi2 : dict
        Explanation name -> best-fit chi^2 (:func:`chi2_best`).
    dr : DensityRatio
        The observed mismatch (:func:`density_ratio`).
    measured : bool
        The row's orbit was measured (``ecc`` given).

    Returns
    -------
    Comparison
        Finding, favoured explanation, Bayes factors (nats) and probabilities.
    """
    logz = {h: float(r.log_evidence) for h, r in results.items()}
    finite = {h: v for h, v in logz.items() if math.isfinite(v)}
    fits = {h for h in finite if chi2[h] < CHI2_REJECT}
    tension = measured and dr.orbit_tension is not None and dr.orbit_tension > ORBIT_TENSION_SIGMA
    finding, pool = _finding(finite, fits, tension)
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
    consistency = _consistency(finding, dr.sigma, dr.orbit_tension, chi2, remaining, favoured, star_ln_b,
                               measured)
    return Comparison(logz, chi2, finding, favoured, ln_b, remaining, p_expl, star_ln_b, consistency)


def _explanation_probabilities(logz: dict) -> dict:
    """Posterior probability of each explanation from its log-evidence, with equal prior odds."""
    if not logz:
        return {}
    m = max(logz.values())
    w = {h: math.exp(v - m) for h, v in logz.items()}
    tot = sum(w.values())
    return {h: v / tot for h, v in w.items()}


def _consistency(finding, ratio_sigma, orbit_tension, chi2, remaining, favoured, star_ln_b, measured) -> dict:
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
