"""Eccentricity posterior and competing explanations from the density mismatch.

Method (Dawson & Johnson 2012, ApJ 756, 122, importance-sampling form): draw (e, w) from a prior, the host
star from its independent measurement, and weight each draw by the likelihood of the transit data.

Two likelihood routes:

* ``durations`` (when T14 is measured): the forward model predicts T14 and T23 (Winn 2010 eqs. 14-16) from
  (rho*, P, e, w, b, k); b is drawn uniformly on [0, 1 + k) (the geometric prior of a transiting
  planet) and marginalised, which handles the b-e degeneracy. Measured T23 or b, when given, enter the
  likelihood too.
* ``density`` (a/R* or rho_circ only): log rho_circ,obs ~ split normal about
  log(rho_host g^3 D^(-3/4)), with g = (1 + e sin w)/sqrt(1 - e^2) (photo-eccentric effect) and D the
  dilution (photo-blend effect, Kipping 2014, MNRAS 440, 2164; D^(-3/4) from the small-planet SMO
  relations).

Hypotheses, each with a log-evidence from the same sampler (mean importance weight):

* ``circular``: e = 0, the transit on the target star, only known dilution.
* ``eccentric``: (e, w) from the prior x transit-probability factor (1 + e sin w)/(1 - e^2)
  (Barnes 2007; Kipping 2014b), normalised by the prior mean of 1/(1 - e^2).
* ``blend``: circular, with unknown extra diluting light: contaminating fraction c ~ U(0, 0.9)
  (common practice, no source), D = D_known / (1 - c).
* ``other_host``: circular orbit around a companion star of density ``companion_rho``; its flux fraction
  f is given or ~ U(0.05, 0.5) (common practice, no source), D = 1/f.
* ``star_density``: the star's density is misestimated: ln rho* free with a broad prior (normal about the
  measured value, 0.5 dex), circular orbit (or the measured one). Its Bayes factor against the measured
  star's explanations says whether the data call the stellar parameters into question.

With a measured orbit (``ecc``, ``omega_deg`` with errors) every explanation but ``circular`` uses that
orbit. The eccentric one samples (e, w) from the measurement and lets the transit inform only the star
and the geometry: a "cut" of the transit's feedback on the orbit (Plummer 2015, Stat. Comput. 25, 37),
so the RV orbit stands whatever the density says; disagreement shows in the evidences instead.

The host density is proposed where the star's prior and the transit overlap (the product of their
log-normal descriptions, mixed with each alone), so the evidence of an explanation far from the data is
computed in its overlap region instead of in the tails of either.

The pieces live in their own modules: the measurements and the star's draws in
:mod:`~rhofollow.physics.observables`, the transit's likelihood and the host-density proposal in
:mod:`~rhofollow.physics.transit_likelihood`, the measured-orbit sampler in
:mod:`~rhofollow.physics.cut_sampler`; this module holds the explanations and runs them (their names
are re-exported here).

All arrays are in internal units: days, radians, g/cm^3.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.special import ndtr, ndtri

from rhofollow.physics.cut_sampler import CUT_GROUP, cut_sample
from rhofollow.physics.observables import Obs, StarPool, TransitObservables
from rhofollow.physics.priors import EccPrior
from rhofollow.physics.sampling import ImportanceResult, adaptive_importance_sample, split_normal_logpdf
from rhofollow.physics.transit import ars_from_rho, g_factor, inclination_from_b
from rhofollow.physics.transit_likelihood import (STAR_FREE_SIGMA_LN, best_possible_loglike, log_like_transit,
                                                  normal_logpdf, overlap_draw, transit_ln_rho)

__all__ = ["Obs", "TransitObservables", "StarPool", "HypothesisSetup", "HYPOTHESES", "MEASURED_STAR_HYPOTHESES",
           "run_hypothesis", "best_possible_loglike", "BLEND_CONTAM_MAX", "OTHER_HOST_FLUX_RANGE",
           "STAR_FREE_SIGMA_LN", "CUT_GROUP", "transit_ln_rho"]

HYPOTHESES = ("circular", "eccentric", "blend", "other_host", "star_density")
#: Explanations that take the star's measured density at its word (the others free it).
MEASURED_STAR_HYPOTHESES = ("circular", "eccentric", "blend", "other_host")
BLEND_CONTAM_MAX = 0.9
OTHER_HOST_FLUX_RANGE = (0.05, 0.5)


@dataclass
class HypothesisSetup:
    """Everything a hypothesis model needs beyond the observables."""

    prior: EccPrior | None = None
    transit_prob: bool = True
    omega_measured: Obs | None = None   # known orbit: omega measurement (radians)
    orbit_measured: bool = False        # ``prior`` is a published e measurement (MeasuredEcc)
    companion: StarPool | None = None
    companion_flux: float | None = None
    extra: dict = field(default_factory=dict)


def _make_proxy(hyp, dims, obs, host, setup):
    """Cheap stand-in for the likelihood that shapes the sampler's first proposal.

    Compares log(rho_host g^3 D^(-3/4)) with the summary of the observed circular density, widened by
    1.5x + 0.05 (natural-log units) for safety, and b with the circular fit's b when known.
    """
    col = {name: i for i, name in enumerate(dims)}
    spread0 = 0.5 * (obs.ln_rho_circ.lo + obs.ln_rho_circ.hi)

    def proxy(u):
        m = u.shape[0]
        e = np.zeros(m)
        w = np.full(m, np.pi / 2)
        log_prior = np.zeros(m)
        if "e" in col:
            e = setup.prior.ppf(u[:, col["e"]])
            uw = u[:, col["w"]]
            w = setup.omega_measured.ppf(uw) if setup.omega_measured is not None else 2 * np.pi * uw
            if setup.transit_prob:
                log_prior = np.log((1 + e * np.sin(w)) / (1 - e * e))
        spread = spread0
        if "rho" in col:
            ln_rho = np.log(host.take(u[:, col["rho"]])[0])
        else:
            ln_rho = np.log(np.median(host.rho))
            spread = np.hypot(spread, np.std(np.log(host.rho)))
        spread = 1.5 * spread + 0.05
        dil = np.full(m, obs.dilution_known)
        if "c" in col:
            dil = dil / (1 - BLEND_CONTAM_MAX * u[:, col["c"]])
        if hyp == "other_host":
            if "f" in col:
                lo, hi = OTHER_HOST_FLUX_RANGE
                dil = 1.0 / (lo + (hi - lo) * u[:, col["f"]])
            else:
                dil = np.full(m, 1.0 / setup.companion_flux)
        ln_model = ln_rho + 3 * np.log(g_factor(e, w)) - 0.75 * np.log(dil)
        out = -0.5 * ((ln_model - obs.ln_rho_circ.value) / spread) ** 2 + log_prior
        if "b" in col and obs.b_circ is not None:
            # the light-curve shape fixes b whatever the orbit (Winn 2010), so a circular fit's b
            # is a fair first guess of the true one
            kq = obs.k.value
            bb = (1 + kq) * u[:, col["b"]]
            sb = 1.5 * 0.5 * (obs.b_circ.lo + obs.b_circ.hi) + 0.03
            out = out - 0.5 * ((bb - obs.b_circ.value) / sb) ** 2
        return out

    return proxy


def _adapted_dims(hyp: str, setup: HypothesisSetup) -> list[str]:
    """The unit-cube axes the adaptive grid covers: (e, w) for ``eccentric``, the contaminating
    fraction for ``blend``, the flux fraction for ``other_host``, else a dummy axis."""
    if hyp == "eccentric":
        return ["e", "w"]
    if hyp == "blend":
        return ["c"]
    if hyp == "other_host" and setup.companion_flux is None:
        return ["f"]
    return ["z"]  # no free parameter of its own: a dummy axis


class _HypothesisModel:
    """One hypothesis as a vectorised model: unit-cube points -> (log weight, physical arrays).

    Each call draws, in this order, the period, epoch and radius ratio, the orbit, the impact
    parameter, the host density (overlap proposal) and the host's mass and radius.
    """

    def __init__(self, hyp, obs: TransitObservables, star: StarPool, setup: HypothesisSetup, extra_loglike):
        self.hyp, self.obs, self.setup, self.extra_loglike = hyp, obs, setup, extra_loglike
        self.dims = _adapted_dims(hyp, setup)
        self.col = {name: i for i, name in enumerate(self.dims)}
        self.dur = obs.route == "durations"
        self.measured = setup.orbit_measured and setup.prior is not None
        self.host = setup.companion if hyp == "other_host" else star
        self.star_sn = self.host._fit()
        self.broad = hyp == "star_density"
        self.peak = -np.log(0.5 * np.sqrt(2 * np.pi) * (self.star_sn[1] + self.star_sn[2]))  # split-normal mode
        if self.dur and obs.b_circ is not None:
            self.b_mu = obs.b_circ.value
            self.b_sd = 1.5 * 0.5 * (obs.b_circ.lo + obs.b_circ.hi) + 0.03
        else:
            self.b_mu, self.b_sd = None, None

    def orbit(self, u, m, rng_):
        """(e, w, log prior factor) of this hypothesis.

        Parameters
        ----------
        u : ndarray (m, d)
            Unit-cube points of the adapted axes.
        m : int
            Number of samples.
        rng_ : numpy.random.Generator
            Source of the measured orbit's draws.

        Returns
        -------
        (ndarray, ndarray, ndarray)
            e (dimensionless), w (radians) and the log prior factor.
        """
        setup = self.setup
        if self.hyp == "eccentric":
            e = setup.prior.ppf(u[:, self.col["e"]])
            uw = u[:, self.col["w"]]
        elif self.measured and self.hyp != "circular":
            e = setup.prior.ppf(rng_.random(m))
            uw = rng_.random(m)
        else:
            return np.zeros(m), np.full(m, np.pi / 2), np.zeros(m)
        w = setup.omega_measured.ppf(uw) if setup.omega_measured is not None else 2 * np.pi * uw
        log_prior = np.zeros(m)
        if setup.transit_prob and not self.measured:
            log_prior = np.log((1 + e * np.sin(w)) / (1 - e * e) / setup.prior.mean_transit_boost)
        return e, w, log_prior

    def dilution(self, u, m):
        """Dilution D >= 1 of the transit depth: known third light, a blend, or the other host's flux.

        Parameters
        ----------
        u : ndarray (m, d)
            Unit-cube points of the adapted axes.
        m : int
            Number of samples.

        Returns
        -------
        ndarray
            Dilution D (dimensionless).
        """
        dilution = np.full(m, self.obs.dilution_known)
        if self.hyp == "blend":
            dilution = dilution / (1 - BLEND_CONTAM_MAX * u[:, self.col["c"]])
        elif self.hyp == "other_host":
            if self.setup.companion_flux is not None:
                f = np.full(m, self.setup.companion_flux)
            else:
                lo, hi = OTHER_HOST_FLUX_RANGE
                f = lo + (hi - lo) * u[:, self.col["f"]]
            dilution = 1.0 / f
        return dilution

    def impact(self, bmax, m, rng_):
        """(b, log prior/proposal ratio): prior U(0, 1 + k); proposal about the circular fit's b when
        known (80 %, truncated normal) mixed with the prior (20 %).

        Parameters
        ----------
        bmax : ndarray
            1 + k, the largest impact parameter of a transit (stellar radii).
        m : int
            Number of samples.
        rng_ : numpy.random.Generator
            Source of the draws.

        Returns
        -------
        (ndarray, ndarray)
            b (stellar radii; NaN for the density route) and the log prior/proposal ratio.
        """
        if self.dur and self.b_mu is not None:
            b_mu, b_sd = self.b_mu, self.b_sd
            lo_c = ndtr((0 - b_mu) / b_sd)
            hi_c = ndtr((bmax - b_mu) / b_sd)
            mix = rng_.random(m) < 0.2
            b = np.where(mix, bmax * rng_.random(m),
                         b_mu + b_sd * ndtri(np.clip(lo_c + (hi_c - lo_c) * rng_.random(m), 1e-300, 1 - 1e-16)))
            np.clip(b, 0, np.nextafter(bmax, 0), out=b)
            # log prior/proposal = -ln bmax - ln(0.2 / bmax + 0.8 q), q the truncated normal (in place)
            q = b - b_mu
            q /= b_sd
            q_den = np.maximum(hi_c - lo_c, 1e-300)
            q_den *= np.sqrt(2 * np.pi) * b_sd
            np.multiply(q, -0.5 * q, out=q)
            np.exp(q, out=q)
            q /= q_den
            q *= 0.8
            mixed = 0.2 / bmax
            mixed += q
            log_pq = np.log(bmax)
            np.negative(log_pq, out=log_pq)
            log_pq -= np.log(mixed, out=mixed)
            return b, log_pq
        if self.dur:
            return bmax * rng_.random(m), np.zeros(m)
        return np.full(m, np.nan), np.zeros(m)

    def __call__(self, u, rng_):
        obs, m = self.obs, u.shape[0]
        period = obs.period.draw(rng_, m)
        t0 = obs.t0.draw(rng_, m)
        k_obs = np.abs(obs.k.draw(rng_, m))
        e, w, log_prior = self.orbit(u, m, rng_)
        dilution = self.dilution(u, m)
        k_true = k_obs * np.sqrt(dilution)
        b, log_pq_b = self.impact(1 + k_true, m, rng_)
        sin_w = np.sin(w)
        ln_g3 = 3 * np.log((1.0 + e * sin_w) / np.sqrt(1.0 - e * e))   # 3 ln g_factor(e, w)
        m_t, s_t = transit_ln_rho(obs, period, k_true, np.nan_to_num(b), ln_g3, dilution)
        ln_rho, log_q_rho, log_p_rho = overlap_draw(rng_, m_t, s_t, self.star_sn, self.broad)
        if self.broad:
            log_p_rho = normal_logpdf(ln_rho, self.star_sn[0], STAR_FREE_SIGMA_LN)
        rho = np.exp(ln_rho)
        mstar, rstar, teff = self.host.at_density(rho, rng_)
        a_rs = ars_from_rho(rho, period)
        ll = log_like_transit(obs, rho, period, k_true, b, e, w, dilution, sin_w=sin_w, a_rs=a_rs)
        log_w = ll + log_prior
        log_w += log_p_rho
        log_w -= log_q_rho
        log_w += log_pq_b
        aux = dict(e=e, omega=np.mod(w, 2 * np.pi), b=b, k=k_true, period=period, t0=t0,
                   rho_star=rho, mstar=mstar, rstar=rstar, a_rs=a_rs, teff=teff, dilution=dilution,
                   loglike=np.where(np.isfinite(ll), ll, -np.inf),
                   log_star=split_normal_logpdf(ln_rho, *self.star_sn) - self.peak)
        if self.extra_loglike is not None:
            log_w += self._further_data(aux, w, m)
        log_w[~np.isfinite(log_w)] = -np.inf
        return log_w, aux

    def _further_data(self, aux, w, m):
        """Log-likelihood of further data (RVs, occultation timings); sets aux['inc'] (and the cut
        sampler's aux['_extra'])."""
        bb = aux["b"] if self.dur else np.full(m, 0.5)
        with np.errstate(invalid="ignore"):
            inc = inclination_from_b(bb, aux["a_rs"], aux["e"], w)
        aux["inc"] = np.where(np.isfinite(inc), inc, np.pi / 2)
        extra = self.extra_loglike(aux)
        if self.measured and self.hyp == "eccentric":
            aux["_extra"] = np.where(np.isfinite(extra), extra, -np.inf)
        return extra


def _complete_geometry(aux: dict, obs: TransitObservables, rng: np.random.Generator) -> None:
    """Fill b (density route) and the inclination of the returned samples in place.

    b is not constrained by a density-only route: it is drawn from its measurement when given, else
    from the geometric prior U(0, 1), for the downstream stages (occultation impact parameter).
    """
    if obs.route != "durations":
        if obs.b is not None:
            aux["b"] = np.clip(np.abs(obs.b.ppf(rng.random(len(aux["e"])))), 0, None)
        else:
            aux["b"] = rng.random(len(aux["e"]))
    with np.errstate(invalid="ignore"):
        inc = inclination_from_b(aux["b"], aux["a_rs"], aux["e"], aux["omega"])
    aux["inc"] = np.where(np.isfinite(inc), inc, np.pi / 2)


def run_hypothesis(hyp: str, obs: TransitObservables, star: StarPool, setup: HypothesisSetup,
                   n: int, rng: np.random.Generator, ess_floor: float = 2000.0, extra_loglike=None
                   ) -> ImportanceResult:
    """Importance-sample one hypothesis; returns weights, evidence and physical arrays in ``aux``.

    The adaptive grid covers the hypothesis' own parameters ((e, w) for ``eccentric``, the
    contaminating fraction for ``blend``, the flux fraction for ``other_host``). The host density is
    drawn from the overlap proposal (:func:`~rhofollow.physics.transit_likelihood.overlap_draw`)
    about the density the transit implies at each sample's orbit, dilution and b
    (:func:`~rhofollow.physics.transit_likelihood.transit_ln_rho`), b about the circular fit's b. Their
    prior/proposal density ratios enter the weights, so the result is exact importance sampling of the
    full likelihood; the proposals only make it efficient. With a measured orbit the eccentric
    hypothesis uses :func:`~rhofollow.physics.cut_sampler.cut_sample`.

    ``aux`` holds e, omega, b, k (true radius ratio of the host), period, t0, rho_star, mstar, rstar,
    a_rs, inc, teff, dilution, loglike (transit), log_star (log prior density of the host density
    relative to its peak: the star's tension).

    ``extra_loglike(aux) -> array`` adds the log-likelihood of further data (measured RVs, occultation
    timings) to the weights, so the proposal adapts to the joint posterior instead of re-weighting
    samples drawn without it.

    Parameters
    ----------
    hyp : str
        One of :data:`HYPOTHESES`.
    obs : TransitObservables
        The transit's measurements (days).
    star : StarPool
        Draws of the host star (g/cm^3, Msun, Rsun, K).
    setup : HypothesisSetup
        Prior, measured orbit and companion star.
    n : int
        Samples per batch.
    rng : numpy.random.Generator
        The target's generator.
    ess_floor : float
        Target Kish effective sample size.
    extra_loglike : callable(aux) -> ndarray, optional
        Log-likelihood of further data.

    Returns
    -------
    ImportanceResult
        Log weights, log-evidence (natural log), ESS and ``aux`` (days, radians, g/cm^3, Msun, Rsun, K).
    """
    if hyp not in HYPOTHESES:
        raise ValueError(f"unknown hypothesis {hyp!r}")
    model = _HypothesisModel(hyp, obs, star, setup, extra_loglike)
    if hyp == "eccentric" and model.measured:
        res = cut_sample(model, n, rng, ess_floor=ess_floor)
    else:
        proxy = _make_proxy(hyp, model.dims, obs, model.host, setup) if hyp == "eccentric" else None
        res = adaptive_importance_sample(model, len(model.dims), n, rng, ess_floor=ess_floor, proxy=proxy,
                                         pool=(hyp == "eccentric"),
                                         max_rounds=4 if extra_loglike is None else 10)
    _complete_geometry(res.aux, obs, rng)
    return res
