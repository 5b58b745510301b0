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

All arrays are in internal units: days, radians, g/cm^3.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from rhofollow.physics.priors import EccPrior
from rhofollow.physics.sampling import (adaptive_importance_sample, split_normal_ppf, split_normal_logpdf,
                       ImportanceResult, _kish)
from scipy.special import logsumexp, ndtr, ndtri

from rhofollow.physics.constants import RHO_SUN_CGS
from rhofollow.physics.transit import ars_from_rho, eccentric_durations, g_factor, inclination_from_b, rho_from_ars

_RHO_PER_ARS3 = float(rho_from_ars(1.0, 1.0))  # g/cm^3 per (a/R*)^3 at P = 1 d

__all__ = ["Obs", "TransitObservables", "StarPool", "HYPOTHESES", "MEASURED_STAR_HYPOTHESES", "run_hypothesis",
           "best_possible_loglike", "BLEND_CONTAM_MAX", "OTHER_HOST_FLUX_RANGE", "STAR_FREE_SIGMA_LN",
           "transit_ln_rho"]

HYPOTHESES = ("circular", "eccentric", "blend", "other_host", "star_density")
#: Explanations that take the star's measured density at its word (the others free it).
MEASURED_STAR_HYPOTHESES = ("circular", "eccentric", "blend", "other_host")
BLEND_CONTAM_MAX = 0.9
#: Broad prior of the ``star_density`` explanation: ln rho* normal about the measured value with this
#: spread, 0.5 dex in density (a dwarf read as a subgiant or the reverse; common practice, no source).
STAR_FREE_SIGMA_LN = 0.5 * 2.302585092994046
#: Members per group of the measured-orbit ("cut") sampler: each drawn (e, w) carries this many draws
#: of the star and geometry.
CUT_GROUP = 4
OTHER_HOST_FLUX_RANGE = (0.05, 0.5)


@dataclass(frozen=True)
class Obs:
    """A measured value with split-normal 1-sigma widths (lo, hi > 0)."""

    value: float
    lo: float
    hi: float

    def ppf(self, u):
        return split_normal_ppf(u, self.value, self.lo, self.hi)

    def logpdf(self, x):
        return split_normal_logpdf(x, self.value, self.lo, self.hi)

    def draw(self, rng, m):
        """m random draws (untruncated); symmetric errors take the fast normal path."""
        if self.lo <= 0 and self.hi <= 0:
            return np.full(m, self.value)
        if self.lo == self.hi:
            return self.value + self.lo * rng.standard_normal(m)
        return self.ppf(rng.random(m))


@dataclass(frozen=True)
class TransitObservables:
    """What the transit fit measured (days for times and durations).

    ``route`` is "durations" (needs t14) or "density" (needs ln_rho_circ: the split-normal description
    of log rho_circ in ln(g/cm^3)). With the durations route, ``ln_rho_circ`` (optional) only shapes
    the sampler's first proposal; the likelihood uses the durations. ``k`` is the observed (possibly diluted) radius ratio.
    ``dilution_known`` is D_known = 1/(1 - contam_frac) >= 1.
    """

    route: str
    period: Obs
    t0: Obs
    k: Obs
    t14: Obs | None = None
    t23: Obs | None = None
    b: Obs | None = None
    ln_rho_circ: Obs | None = None
    dilution_known: float = 1.0
    b_circ: Obs | None = None


@dataclass
class StarPool:
    """Joint draws of a star (rho g/cm^3, mstar Msun, rstar Rsun, teff K), sorted by density.

    A unit-cube coordinate u maps to the draw at quantile u of density, so the sampler can adapt to the
    part of the star's density distribution that the transit favours.
    """

    rho: np.ndarray
    mstar: np.ndarray
    rstar: np.ndarray
    teff: np.ndarray

    def __post_init__(self):
        order = np.argsort(self.rho)
        for name in ("rho", "mstar", "rstar", "teff"):
            setattr(self, name, np.asarray(getattr(self, name), dtype=float)[order])

    def take(self, u):
        idx = np.minimum((np.asarray(u) * len(self.rho)).astype(int), len(self.rho) - 1)
        return self.rho[idx], self.mstar[idx], self.rstar[idx], self.teff[idx]

    def _fit(self):
        if not hasattr(self, "_sn"):
            q16, q50, q84 = np.quantile(np.log(self.rho), [0.15865, 0.5, 0.84135])
            self._sn = (q50, max(q50 - q16, 1e-4), max(q84 - q50, 1e-4))
        return self._sn

    def log_density_ln(self, ln_rho):
        """Log density of ln(rho) under the star's measurement: a split normal fitted to the draws'
        16/50/84 % quantiles (smooth, with tails, so evidences of poor fits stay finite)."""
        mu, lo, hi = self._fit()
        return split_normal_logpdf(ln_rho, mu, lo, hi)

    def _bins(self):
        if not hasattr(self, "_b"):
            ln = np.log(self.rho)
            nb = 48
            lo, hi = ln[0], ln[-1] + 1e-9
            idx = np.minimum(((ln - lo) / (hi - lo) * nb).astype(int), nb - 1)
            cnt = np.maximum(np.bincount(idx, minlength=nb), 1)
            lnm = np.log(self.mstar)
            mean_m = np.bincount(idx, weights=lnm, minlength=nb) / cnt
            sd_m = np.sqrt(np.maximum(np.bincount(idx, weights=lnm**2, minlength=nb) / cnt - mean_m**2, 0))
            tf = np.nan_to_num(self.teff, nan=0.0)
            mean_t = np.bincount(idx, weights=tf, minlength=nb) / cnt
            empty = np.bincount(idx, minlength=nb) == 0
            for arr in (mean_m, sd_m, mean_t):  # empty bins borrow the nearest filled bin
                filled = np.flatnonzero(~empty)
                arr[empty] = arr[filled[np.abs(filled[:, None] - np.flatnonzero(empty)[None, :]).argmin(0)]] \
                    if empty.any() else arr[empty]
            self._b = (lo, (hi - lo) / nb, nb, mean_m, sd_m, mean_t, bool(np.isnan(self.teff).all()))
        return self._b

    def at_density(self, rho, rng=None):
        """Mass, radius and Teff for given densities (g/cm^3).

        The mass follows the star's joint draws: its log-mean and spread in the density bin of each
        sample (48 bins over the pool's range; O(1) per sample). The radius then makes the density
        exact: R = (M / (rho/rho_sun))^(1/3) in solar units.
        """
        lo, width, nb, mean_m, sd_m, mean_t, no_teff = self._bins()
        i = np.clip(((np.log(rho) - lo) / width).astype(int), 0, nb - 1)
        lnm = mean_m[i]
        if rng is not None:
            lnm = lnm + sd_m[i] * rng.standard_normal(len(i))
        mstar = np.exp(lnm)
        rstar = np.cbrt(mstar / (rho / RHO_SUN_CGS))
        teff = np.full(len(i), np.nan) if no_teff else mean_t[i]
        return mstar, rstar, teff


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


def best_possible_loglike(obs: TransitObservables) -> float:
    """Log-likelihood of a model that reproduces every transit observable exactly (chi^2 = 0)."""
    if obs.route == "durations":
        ll = float(obs.t14.logpdf(obs.t14.value))
        if obs.t23 is not None:
            ll += float(obs.t23.logpdf(obs.t23.value))
        elif obs.b is not None:
            ll += float(obs.b.logpdf(obs.b.value))
        return ll
    return float(obs.ln_rho_circ.logpdf(obs.ln_rho_circ.value))


def _log_like_transit(obs: TransitObservables, rho_host, period, k_true, b, e, w, dilution):
    """Log-likelihood of the transit observables for arrays of physical parameters."""
    if obs.route == "durations":
        a_rs = ars_from_rho(rho_host, period)
        t14, t23 = eccentric_durations(a_rs, b, k_true, period, e, w)
        ll = obs.t14.logpdf(t14)
        if obs.t23 is not None:
            ll = ll + obs.t23.logpdf(t23)
        elif obs.b is not None:
            ll = ll + obs.b.logpdf(b)
        # impossible geometry (planet inside the star, no inclination gives this b)
        fac = (1 - e * e) / (1 + e * np.sin(w))
        bad = (b >= a_rs * fac) | (a_rs * (1 - e) <= 1 + k_true)
        return np.where(bad, -np.inf, ll)
    g3 = g_factor(e, w) ** 3
    ln_model = np.log(rho_host * g3) - 0.75 * np.log(dilution)
    return obs.ln_rho_circ.logpdf(ln_model)


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


def _normal_logpdf(x, mu, sd):
    z = (x - mu) / sd
    return -0.5 * z * z - np.log(np.sqrt(2 * np.pi) * sd)


def transit_ln_rho(obs: TransitObservables, period, k_true, b, ln_g3, dilution):
    """The host density the transit implies for given orbit and geometry: (mean, sd) of ln rho (g/cm^3).

    Durations: the exact circular a/R* at the measured T14, this b and k (Seager & Mallen-Ornelas 2003),
    linearised in T14, moved by the photo-eccentric factor -3 ln g (Kipping 2010). Density route:
    ln rho_circ - 3 ln g + (3/4) ln D (Kipping 2014, MNRAS 440, 2164).
    """
    if obs.route == "durations":
        t14 = np.clip(np.full_like(period, obs.t14.value), 1e-6 * period, 0.499 * period)
        t14_sd = 0.5 * (obs.t14.lo + obs.t14.hi)
        x = np.pi * t14 / period
        sx = np.sin(x)
        chord2 = np.clip((1 + k_true) ** 2 - b * b, 1e-12, None)
        a2 = b * b + chord2 / (sx * sx)
        ln_rc = np.log(_RHO_PER_ARS3 * a2 ** 1.5 / period**2)
        dln_dt = 1.5 * (-2 * chord2 * np.cos(x) / sx**3 * np.pi / period) / a2
        sd = np.maximum(np.abs(dln_dt) * t14_sd, 1e-4)
        return ln_rc - ln_g3, sd
    rc = obs.ln_rho_circ
    return rc.value - ln_g3 + 0.75 * np.log(dilution), np.full_like(ln_g3, 0.5 * (rc.lo + rc.hi))


def _overlap_draw(rng_, m_t, s_t, star_sn, broad):
    """Draw ln rho from the overlap proposal; return (ln_rho, log q, log prior).

    The prior is the star's split normal (or, ``broad``, a normal about its mode with
    STAR_FREE_SIGMA_LN). The proposal mixes 70 % of the Gaussian product of prior and transit (widened
    1.3x), 15 % transit alone and 15 % prior alone (defensive mixture, Hesterberg 1995).
    """
    mu, lo, hi = star_sn
    m = m_t.shape[0]
    if broad:
        lo = hi = STAR_FREE_SIGMA_LN
    s_s = np.where(m_t < mu, lo, hi)
    prec = 1.0 / s_t**2 + 1.0 / s_s**2
    m_p = (m_t / s_t**2 + mu / s_s**2) / prec
    s_p = 1.3 / np.sqrt(prec)
    s_t2 = 1.2 * s_t
    pick = rng_.random(m)
    z = rng_.standard_normal(m)
    from_prior = split_normal_ppf(rng_.random(m), mu, lo, hi)
    ln_rho = np.where(pick < 0.7, m_p + s_p * z, np.where(pick < 0.85, m_t + s_t2 * z, from_prior))
    log_prior = split_normal_logpdf(ln_rho, mu, lo, hi)
    comps = np.stack([np.log(0.7) + _normal_logpdf(ln_rho, m_p, s_p),
                      np.log(0.15) + _normal_logpdf(ln_rho, m_t, s_t2),
                      np.log(0.15) + log_prior])
    mx = comps.max(axis=0)
    log_q = mx + np.log(np.exp(comps - mx).sum(axis=0))
    return ln_rho, log_q, log_prior


def _cut_batch(model, ng, group, rng):
    """One batch of ``ng`` groups for :func:`_cut_sample`: (u, log_w, cut log weights, aux)."""
    ug = np.empty((ng, 2))
    for j in range(2):
        ug[:, j] = (rng.permutation(ng) + rng.random(ng)) / ng
    u = np.repeat(ug, group, axis=0)
    log_w, aux = model(u, rng)
    finite = np.isfinite(log_w)
    extra = aux.pop("_extra", None)
    lw_t = log_w if extra is None else np.where(finite, log_w - extra, -np.inf)
    g = lw_t.reshape(ng, group)
    with np.errstate(invalid="ignore"):
        mx = np.max(g, axis=1, keepdims=True)
        norm = mx + np.log(np.sum(np.exp(g - np.where(np.isfinite(mx), mx, 0.0)), axis=1, keepdims=True))
    ok = np.isfinite(norm)
    cut = np.where(ok, g - np.where(ok, norm, 0.0), -np.inf).ravel()
    if extra is not None:
        cut = cut + extra
    cut = np.where(np.isfinite(cut), cut, -np.inf)
    return u, log_w, cut, aux


#: Most groups the measured-orbit sampler draws, in units of the first batch.
CUT_BUDGET = 12


def _cut_sample(model, n, rng, group=CUT_GROUP, ess_floor=0.0):
    """Measured-orbit sampler: groups of ``group`` draws share one (e, w) from the measurement (Latin
    hypercube over its two quantile axes); each group's weights are normalised to the same total, so
    the (e, w) marginal is the measurement's whatever the transit says (a cut, Plummer 2015). Further
    data (``aux['_extra']``, RVs or occultation timings) re-weight the groups. The evidence is the mean
    of the un-normalised weights (exact importance sampling: (e, w) are drawn from their prior).

    The Kish ESS of the final pooled set is checked: while it is below ``ess_floor``, another batch of
    groups (sized from the shortfall) is drawn and pooled, up to ``CUT_BUDGET`` x the first batch.
    Without further data each group contributes between 1 and ``group`` effective samples, so the
    floor is met once the finite groups number ``ess_floor``."""
    ng = max(1, -(-n // group))
    u, log_w, cut, aux = _cut_batch(model, ng, group, rng)
    ess, rounds, total = _kish(cut), 1, ng
    while ess < ess_floor and total < CUT_BUDGET * ng and np.any(np.isfinite(cut)):
        more = int(np.clip(np.ceil(total * (ess_floor / max(ess, 1.0) - 1.0) * 1.1), max(1, ng // 8), 4 * ng))
        more = min(more, CUT_BUDGET * ng - total)
        u2, lw2, cut2, aux2 = _cut_batch(model, more, group, rng)
        u = np.vstack([u, u2])
        log_w = np.concatenate([log_w, lw2])
        cut = np.concatenate([cut, cut2])
        aux = {k: np.concatenate([aux[k], aux2[k]]) for k in aux}
        ess, rounds, total = _kish(cut), rounds + 1, total + more
    finite = np.isfinite(log_w)
    log_z = float(logsumexp(log_w[finite]) - np.log(len(log_w))) if finite.any() else -np.inf
    return ImportanceResult(u, cut, aux, log_z, ess, rounds, False)


def run_hypothesis(hyp: str, obs: TransitObservables, star: StarPool, setup: HypothesisSetup,
                   n: int, rng: np.random.Generator, ess_floor: float = 2000.0, extra_loglike=None
                   ) -> ImportanceResult:
    """Importance-sample one hypothesis; returns weights, evidence and physical arrays in ``aux``.

    The adaptive grid covers the hypothesis' own parameters ((e, w) for ``eccentric``, the
    contaminating fraction for ``blend``, the flux fraction for ``other_host``). The host density is
    drawn from the overlap proposal (:func:`_overlap_draw`) about the density the transit implies at
    each sample's orbit, dilution and b (:func:`transit_ln_rho`), b about the circular fit's b. Their
    prior/proposal density ratios enter the weights, so the result is exact importance sampling of the
    full likelihood; the proposals only make it efficient. With a measured orbit the eccentric
    hypothesis uses :func:`_cut_sample`.

    ``aux`` holds e, omega, b, k (true radius ratio of the host), period, t0, rho_star, mstar, rstar,
    a_rs, inc, teff, dilution, loglike (transit), log_star (log prior density of the host density
    relative to its peak: the star's tension).

    ``extra_loglike(aux) -> array`` adds the log-likelihood of further data (measured RVs, occultation
    timings) to the weights, so the proposal adapts to the joint posterior instead of re-weighting
    samples drawn without it.
    """
    if hyp not in HYPOTHESES:
        raise ValueError(f"unknown hypothesis {hyp!r}")
    dur = obs.route == "durations"
    measured = setup.orbit_measured and setup.prior is not None
    if hyp == "eccentric":
        dims = ["e", "w"]
    elif hyp == "blend":
        dims = ["c"]
    elif hyp == "other_host" and setup.companion_flux is None:
        dims = ["f"]
    else:
        dims = ["z"]  # no free parameter of its own: a dummy axis
    d = len(dims)
    col = {name: i for i, name in enumerate(dims)}
    host = setup.companion if hyp == "other_host" else star
    star_sn = host._fit()
    broad = hyp == "star_density"
    peak = -np.log(0.5 * np.sqrt(2 * np.pi) * (star_sn[1] + star_sn[2]))  # split-normal mode density
    if dur and obs.b_circ is not None:
        b_mu = obs.b_circ.value
        b_sd = 1.5 * 0.5 * (obs.b_circ.lo + obs.b_circ.hi) + 0.03
    else:
        b_mu, b_sd = None, None

    def orbit(u, m, rng_):
        """(e, w, log prior factor) of this hypothesis."""
        if hyp == "eccentric":
            e = setup.prior.ppf(u[:, col["e"]])
            uw = u[:, col["w"]]
        elif measured and hyp != "circular":
            e = setup.prior.ppf(rng_.random(m))
            uw = rng_.random(m)
        else:
            return np.zeros(m), np.full(m, np.pi / 2), np.zeros(m)
        w = setup.omega_measured.ppf(uw) if setup.omega_measured is not None else 2 * np.pi * uw
        log_prior = np.zeros(m)
        if setup.transit_prob and not measured:
            log_prior = np.log((1 + e * np.sin(w)) / (1 - e * e) / setup.prior.mean_transit_boost)
        return e, w, log_prior

    def model(u, rng_):
        m = u.shape[0]
        period = obs.period.draw(rng_, m)
        t0 = obs.t0.draw(rng_, m)
        k_obs = np.abs(obs.k.draw(rng_, m))
        e, w, log_prior = orbit(u, m, rng_)
        dilution = np.full(m, obs.dilution_known)
        if hyp == "blend":
            dilution = dilution / (1 - BLEND_CONTAM_MAX * u[:, col["c"]])
        elif hyp == "other_host":
            if setup.companion_flux is not None:
                f = np.full(m, setup.companion_flux)
            else:
                lo, hi = OTHER_HOST_FLUX_RANGE
                f = lo + (hi - lo) * u[:, col["f"]]
            dilution = 1.0 / f
        k_true = k_obs * np.sqrt(dilution)
        # impact parameter: prior U(0, 1 + k); proposal about the circular fit's b when known
        bmax = 1 + k_true
        if dur and b_mu is not None:
            lo_c = ndtr((0 - b_mu) / b_sd)
            hi_c = ndtr((bmax - b_mu) / b_sd)
            mix = rng_.random(m) < 0.2
            b = np.where(mix, bmax * rng_.random(m),
                         b_mu + b_sd * ndtri(np.clip(lo_c + (hi_c - lo_c) * rng_.random(m), 1e-300, 1 - 1e-16)))
            b = np.clip(b, 0, np.nextafter(bmax, 0))
            z = (b - b_mu) / b_sd
            q_norm = np.exp(-0.5 * z * z) / (np.sqrt(2 * np.pi) * b_sd * np.maximum(hi_c - lo_c, 1e-300))
            log_pq_b = -np.log(bmax) - np.log(0.2 / bmax + 0.8 * q_norm)
        elif dur:
            b = bmax * rng_.random(m)
            log_pq_b = np.zeros(m)
        else:
            b = np.full(m, np.nan)
            log_pq_b = np.zeros(m)
        ln_g3 = 3 * np.log(g_factor(e, w))
        m_t, s_t = transit_ln_rho(obs, period, k_true, np.nan_to_num(b), ln_g3, dilution)
        ln_rho, log_q_rho, log_p_rho = _overlap_draw(rng_, m_t, s_t, star_sn, broad)
        if broad:
            log_p_rho = _normal_logpdf(ln_rho, star_sn[0], STAR_FREE_SIGMA_LN)
        rho = np.exp(ln_rho)
        mstar, rstar, teff = host.at_density(rho, rng_)
        ll = _log_like_transit(obs, rho, period, k_true, b, e, w, dilution)
        log_w = ll + log_prior + log_p_rho - log_q_rho + log_pq_b
        a_rs = ars_from_rho(rho, period)
        aux = dict(e=e, omega=np.mod(w, 2 * np.pi), b=b, k=k_true, period=period, t0=t0,
                   rho_star=rho, mstar=mstar, rstar=rstar, a_rs=a_rs, teff=teff, dilution=dilution,
                   loglike=np.where(np.isfinite(ll), ll, -np.inf),
                   log_star=split_normal_logpdf(ln_rho, *star_sn) - peak)
        if extra_loglike is not None:
            bb = b if dur else np.full(m, 0.5)
            with np.errstate(invalid="ignore"):
                inc = inclination_from_b(bb, a_rs, e, w)
            aux["inc"] = np.where(np.isfinite(inc), inc, np.pi / 2)
            extra = extra_loglike(aux)
            log_w = log_w + extra
            if measured and hyp == "eccentric":
                aux["_extra"] = np.where(np.isfinite(extra), extra, -np.inf)
        return np.where(np.isfinite(log_w), log_w, -np.inf), aux

    if hyp == "eccentric" and measured:
        res = _cut_sample(model, n, rng, ess_floor=ess_floor)
    else:
        proxy = _make_proxy(hyp, dims, obs, host, setup) if hyp == "eccentric" else None
        res = adaptive_importance_sample(model, d, n, rng, ess_floor=ess_floor, proxy=proxy,
                                         pool=(hyp == "eccentric"),
                                         max_rounds=4 if extra_loglike is None else 10)
    aux = res.aux
    if not dur:
        # b is not constrained by a density-only route: draw it from its measurement when given, else
        # from the geometric prior U(0, 1) for the downstream stages (occultation impact parameter).
        if obs.b is not None:
            aux["b"] = np.clip(np.abs(obs.b.ppf(rng.random(len(aux["e"])))), 0, None)
        else:
            aux["b"] = rng.random(len(aux["e"]))
    with np.errstate(invalid="ignore"):
        inc = inclination_from_b(aux["b"], aux["a_rs"], aux["e"], aux["omega"])
    aux["inc"] = np.where(np.isfinite(inc), inc, np.pi / 2)
    return res
