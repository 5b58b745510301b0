"""Report figures (matplotlib, Agg backend): each ``*_figure`` function returns a Figure.

Per target: the density comparison, the (e, omega) posterior, the occultation timing and the RV
curves. For the run: the catalogue overview, the campaign calendar strip and (through
:mod:`rhofollow.report.schedule_chart`) the night's schedule chart. Write them with
:func:`rhofollow.report.files.save_figure` (atomic PNG).

omega is the RV-convention argument of periastron of the star: the transit happens at true anomaly
90 deg - omega, so omega = 90 deg puts the transit at periastron.
"""
from __future__ import annotations

import datetime as _dt

import numpy as np

from rhofollow.core.defaults import DEFAULT_SEED
from rhofollow.core.seeds import target_rng

__all__ = ["COLOURS", "ecc_cmap", "evidence_cmap", "density_figure", "ecc_omega_figure",
           "occultation_figure", "rv_figure", "overview_figure", "campaign_figure", "rv_model_draws",
           "record_k_draws", "k_summary", "highest_altitude_deg", "rises_at_site",
           "occultation_times"]

#: Our palette: circular-orbit quantities warm, the independent star cool, plans green.
COLOURS = {"circ": "#c0603a", "star": "#2f6f8f", "ecc": "#2f6f8f", "plan": "#4f7d2c",
           "occ": "#b5532f", "rv": "#2a7f86", "ink": "#222222", "grid": "#d9d9d9"}

_PROB_STOPS = ["#f6f1e4", "#d9e8c9", "#8cc5b0", "#3f8f9f", "#2d4f7c", "#24153f"]


def highest_altitude_deg(dec_deg, latitude_deg):
    """Geometric altitude (deg) of a target at upper culmination: 90 - |latitude - declination|.

    Common practice, no source (spherical astronomy of the meridian transit). NaN in, NaN out.
    """
    return 90.0 - np.abs(np.asarray(latitude_deg, float) - np.asarray(dec_deg, float))


def rises_at_site(dec_deg, site) -> bool:
    """False when the target never climbs above the site's altitude limit (per-target plots skip it);
    True when it does or when its declination is unknown."""
    if dec_deg is None:
        return True
    h = float(highest_altitude_deg(dec_deg, site.latitude_deg))
    return not (np.isfinite(h) and h < site.constraints.min_altitude_deg)


def _plt():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def evidence_cmap():
    """Sequential colour scale of P(e > 0.1): pale sand (0) through sea green to deep indigo (1)."""
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("rhofollow_evidence", _PROB_STOPS)


def ecc_cmap():
    """Sequential scale for posterior density maps (white for empty cells)."""
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("rhofollow_density", ["#ffffff"] + _PROB_STOPS[1:])


def _q(d, key="q50"):
    if not d:
        return np.nan
    v = d.get(key)
    return np.nan if v is None else float(v)


def _fmt_q(d, nd=2):
    if not d or d.get("q50") is None:
        return "n/a"
    return f"{d['q50']:.{nd}f} (68%: {d['q16']:.{nd}f}-{d['q84']:.{nd}f})"


# ---------------------------------------------------------------------------------------------
# density comparison

def _plain_log_axis(axis):
    """Plain decimal tick labels (0.5, 1, 2, 5...) on a log axis instead of powers of ten."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    axis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
    axis.set_major_formatter(FuncFormatter(lambda v, _p: f"{v:g}"))
    axis.set_minor_formatter(NullFormatter())


def _split_lognormal(q: dict, x: np.ndarray) -> np.ndarray:
    """Density (per ln x) of a split normal in ln x through the 16/50/84 % quantiles of ``q``."""
    m, lo, hi = np.log(_q(q)), np.log(_q(q)) - np.log(_q(q, "q16")), np.log(_q(q, "q84")) - np.log(_q(q))
    lo, hi = max(lo, 1e-4), max(hi, 1e-4)
    z = np.log(x) - m
    s = np.where(z < 0, lo, hi)
    return np.sqrt(2 / np.pi) / (lo + hi) * np.exp(-0.5 * (z / s) ** 2)


def density_figure(record: dict):
    """Circular-orbit density from the transit against the independent stellar density.

    ``record`` is the assessment record (``rho_circ_cgs``, ``rho_star_cgs``, ``density_ratio``,
    ``ecc_min``...). Each distribution is drawn as a split normal in ln(rho) through the 16/50/84 %
    quantiles of its draws; the dots and bars below give the 95 % and 68 % intervals.
    """
    plt = _plt()
    rc, rs = record["rho_circ_cgs"], record["rho_star_cgs"]
    lo = min(_q(rc, "q025"), _q(rs, "q025")) / 1.6
    hi = max(_q(rc, "q975"), _q(rs, "q975")) * 1.6
    x = np.geomspace(lo, hi, 600)
    fig, ax = plt.subplots(figsize=(7.2, 5.0))
    route = record.get("route_star", "")
    curves = [(rc, COLOURS["circ"], "ρ_circ: from the transit, circular orbit assumed"),
              (rs, COLOURS["star"], "ρ*: the independent star" + (f", {route}" if route else ""))]
    top = 0.0
    for q, c, lab in curves:
        y = _split_lognormal(q, x)
        top = max(top, y.max())
        ax.fill_between(x, y, color=c, alpha=0.25, lw=0)
        ax.plot(x, y, color=c, lw=2, label=lab)
        ax.axvline(_q(q), color=c, lw=1, ls="--")
    for i, (q, c, _) in enumerate(curves):
        yy = -(0.08 + 0.07 * i) * top
        ax.plot([_q(q, "q025"), _q(q, "q975")], [yy, yy], color=c, lw=1.2)
        ax.plot([_q(q, "q16"), _q(q, "q84")], [yy, yy], color=c, lw=4, solid_capstyle="butt")
        ax.plot(_q(q), yy, "o", color="white", mec=c, ms=5)
    ax.set_xscale("log")
    _plain_log_axis(ax.xaxis)
    ax.set_xlim(lo, hi)
    ax.set_ylim(-0.25 * top, 1.5 * top)  # headroom: the numbers sit above the curves
    ax.axhline(0, color="0.5", lw=0.6)
    ax.set_yticks([])
    ax.set_xlabel("stellar density ρ (g cm$^{-3}$)")
    ax.set_ylabel("probability density (per ln ρ)")
    ratio = record.get("density_ratio", {})
    txt = (f"ρ_circ / ρ* = {_fmt_q(ratio)}\n"
           f"mismatch {record.get('density_ratio_sigma', float('nan')):.1f} σ;  "
           f"smallest e that explains it: {record.get('ecc_min', float('nan')):.2f}\n"
           f"favoured: {str(record.get('favoured', '?')).replace('_', ' ')}")
    ax.text(0.99, 0.97, txt, transform=ax.transAxes, ha="right", va="top", fontsize=8.5,
            bbox={"fc": "white", "ec": "0.7", "lw": 0.6})
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.14), fontsize=8.5, frameon=False)
    ax.set_title(_title_lines(f"{record['name']}: density from the transit vs the star "
                              "(bars: 68 % and 95 % intervals)", fig, 10, 0.85), fontsize=10)
    ax.text(0.0, -0.36, "ρ_circ > ρ*: transit shorter than circular (near periastron); ρ_circ < ρ*: longer "
            "(near apastron) or diluted.", transform=ax.transAxes, fontsize=7.5, color="0.35")
    fig.tight_layout()
    return fig


# ---------------------------------------------------------------------------------------------
# (e, omega) posterior

def _uniform_marginal(samples, record):
    """Weights of the samples re-weighted to the uniform e prior (None for a measured orbit or an
    unknown prior): the same re-weighting as the record's ``ecc_uniform_prior``."""
    from rhofollow.physics.priors import parse_prior, reweight_to_prior

    if not record or record.get("orbit_measured") or not record.get("ecc_uniform_prior"):
        return None
    try:
        prior = parse_prior(record.get("prior") or samples.meta.get("prior"))
    except ValueError:
        return None
    return reweight_to_prior(samples.e, samples.weights, prior, parse_prior("uniform"))


def ecc_omega_figure(samples, record: dict | None = None):
    """2-D weighted histogram of (omega, e) with both marginals.

    The e marginal (right) also shows the e marginal re-weighted to a uniform e prior (outline) and
    the 95 % intervals under the run's prior and under the uniform one (bars at the right edge); a
    bound the prior sets (``record['ecc_bounds']``) carries a dagger, as in the terminal table.
    ``ecc_min`` (the smallest e giving the median density ratio) is a dashed line named in the key
    below the axes, so no label covers the posterior.
    """
    plt = _plt()
    from matplotlib.gridspec import GridSpec
    from matplotlib.lines import Line2D

    rec = record or {}
    om = np.degrees(np.mod(samples.omega, 2 * np.pi))
    e, w = samples.e, samples.weights
    wu = _uniform_marginal(samples, rec)
    top_e = float(np.quantile(e, 0.999))
    uq = rec.get("ecc_uniform_prior") or {}
    if uq.get("q975") is not None:
        top_e = max(top_e, float(uq["q975"]))
    emax = min(1.0, max(0.2, top_e * 1.15))
    fig = plt.figure(figsize=(7.6, 7.0))
    gs = GridSpec(2, 3, width_ratios=[4, 1.5, 0.18], height_ratios=[1.1, 4], hspace=0.05, wspace=0.05,
                  figure=fig)
    ax = fig.add_subplot(gs[1, 0])
    axt = fig.add_subplot(gs[0, 0], sharex=ax)
    axr = fig.add_subplot(gs[1, 1], sharey=ax)
    cax = fig.add_subplot(gs[1, 2])
    h, xe, ye = np.histogram2d(om, e, bins=[72, 50], range=[[0, 360], [0, emax]], weights=w)
    h = h / (h.sum() * np.diff(xe)[0] * np.diff(ye)[0])
    mesh = ax.pcolormesh(xe, ye, h.T, cmap=ecc_cmap(), shading="flat", rasterized=True)
    cb = fig.colorbar(mesh, cax=cax)
    cb.set_label("posterior density (per degree per unit e)", fontsize=8)
    cb.ax.tick_params(labelsize=7)
    axt.hist(om, bins=72, range=(0, 360), weights=w, color=COLOURS["ecc"], alpha=0.75, histtype="stepfilled")
    dens, _, _ = axr.hist(e, bins=50, range=(0, emax), weights=w, density=True, orientation="horizontal",
                          color=COLOURS["ecc"], alpha=0.75, histtype="stepfilled")
    peak = float(np.max(dens)) if dens.size else 1.0
    handles = []
    if wu is not None:
        du, _, _ = axr.hist(e, bins=50, range=(0, emax), weights=wu, density=True, orientation="horizontal",
                            histtype="step", color="0.2", lw=1.1, ls="-")
        peak = max(peak, float(np.max(du)))
        ess_u = rec.get("ess_uniform_prior")
        handles.append(Line2D([], [], color="0.2", lw=1.1, label="e marginal re-weighted to a uniform e prior"
                              + (f" (ESS {ess_u:.0f})" if ess_u is not None else "")))
    # interval bars at the right edge of the e marginal, clear of the histograms
    axr.set_xlim(0, peak * 1.55)
    bounds = rec.get("ecc_bounds") or {}
    eq = samples.quantiles("e")
    prior_name = rec.get("prior") or samples.meta.get("prior") or "run's prior"
    first = ("95 % interval of e (the measured orbit)" if rec.get("orbit_measured")
             else f"95 % interval of e, {prior_name} prior (the run's)")
    bars = [(eq, COLOURS["ecc"], 1.22, first, True)]
    if uq.get("q025") is not None:
        bars.append((uq, "0.45", 1.42, "95 % interval of e, uniform prior (same samples re-weighted)", False))
    for q, colour, x, label, mark in bars:
        xx = peak * x
        axr.plot([xx, xx], [q["q025"], q["q975"]], color=colour, lw=4, solid_capstyle="butt")
        axr.plot(xx, q["q50"], "o", color="white", mec=colour, ms=4.5)
        handles.append(Line2D([], [], color=colour, lw=4, label=label))
        if mark:
            for side, key in (("lower", "q025"), ("upper", "q975")):
                if bounds.get(side) == "prior":
                    axr.text(xx + 0.06 * peak, q[key], "†", color="#b00020", fontsize=11, va="center",
                             ha="left", fontweight="bold")
    driven = [side for side in ("lower", "upper") if bounds.get(side) == "prior"]
    if driven:
        handles.append(Line2D([], [], ls="", marker="$†$", color="#b00020", ms=8,
                              label=f"{' and '.join(driven)} bound set by the prior (moves > "
                                    f"{_prior_delta():g} in e under a uniform prior)"))
    emin = rec.get("ecc_min")
    if emin is not None and np.isfinite(emin):
        for a in (ax, axr):
            a.axhline(emin, color=COLOURS["circ"], ls="--", lw=1.3)
        handles.insert(0, Line2D([], [], color=COLOURS["circ"], ls="--", lw=1.3,
                                 label=f"e_min = {emin:.2f}: smallest e giving the median density ratio"))
    for v, lab in ((90, "transit at periastron"), (270, "transit at apastron")):
        ax.axvline(v, color="0.45", lw=0.7, ls=":")
        ax.text(v + 2, emax * 0.97, lab, fontsize=7, color="0.35", va="top", rotation=90)
    ax.set_xlim(0, 360)
    ax.set_ylim(0, emax)
    ax.set_xticks(range(0, 361, 45))
    ax.set_xlabel("ω, argument of periastron of the star (deg; transit at true anomaly 90° − ω)")
    ax.set_ylabel("eccentricity e")
    axt.set_ylabel("P(ω)", fontsize=8)
    axr.set_xlabel("P(e)", fontsize=8)
    plt.setp(axt.get_xticklabels(), visible=False)
    plt.setp(axr.get_yticklabels(), visible=False)
    axt.set_yticks([])
    axr.set_xticks([])
    p01 = float(np.sum(w[e > 0.1]))
    p0 = rec.get("p_ecc_gt_0p1_prior")
    line2 = (f"e = {eq['q50']:.2f} (95 %: {eq['q025']:.2f}–{eq['q975']:.2f})"
             + (f"; uniform prior: {uq['q025']:.2f}–{uq['q975']:.2f}" if uq.get("q025") is not None else "")
             + (";  measured orbit" if rec.get("orbit_measured") else "")
             + f";  P(e > 0.1) = {p01:.2f}" + (f" (prior {p0:.2f})" if p0 is not None else "")
             + f";  ESS {samples.ess:.0f}")
    fig.suptitle(_title_lines(f"{samples.name}: eccentricity posterior", fig) + "\n"
                 + _title_lines(line2, fig, 9.0), fontsize=9.5)
    fig.legend(handles=handles, loc="lower center", ncol=1, fontsize=7.5, frameon=False,
               bbox_to_anchor=(0.5, 0.0))
    n_lines = _title_lines(f"{samples.name}: eccentricity posterior", fig).count("\n") + 2
    bottom = 0.085 + 0.024 * len(handles)
    fig.subplots_adjust(left=0.1, right=0.9, top=max(0.6, 0.965 - 0.03 * n_lines), bottom=bottom)
    return fig


def _prior_delta() -> float:
    from rhofollow.stages.assess import PRIOR_DRIVEN_DELTA

    return PRIOR_DRIVEN_DELTA


def _text_width_pt(text: str, fontsize: float) -> float:
    """Rendered width of ``text`` in points at ``fontsize`` (matplotlib's own text metrics)."""
    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextToPath

    w, _, _ = TextToPath().get_text_width_height_descent(text, FontProperties(size=fontsize), ismath=False)
    return float(w)


def _title_lines(text: str, fig, fontsize: float = 9.5, share: float = 0.94, max_lines: int = 5) -> str:
    """``text`` folded into lines no wider than ``share`` of the figure, measured with matplotlib's
    text metrics: words move to the next line, and a word (a long target name) wider than a line
    breaks inside, so a title never runs off the figure whatever the name. Beyond ``max_lines``
    lines the title ends in an ellipsis, so the axes keep their room (tight_layout stays
    applicable)."""
    limit = fig.get_figwidth() * 72 * share
    lines, cur = [], ""
    for word in text.split(" "):
        trial = word if not cur else cur + " " + word
        if _text_width_pt(trial, fontsize) <= limit:
            cur = trial
            continue
        if cur:
            lines.append(cur)
        cur = ""
        for ch in word:  # the word alone is too wide: break it where it must
            if cur and _text_width_pt(cur + ch, fontsize) > limit:
                lines.append(cur)
                cur = ""
            cur += ch
    if cur:
        lines.append(cur)
    if len(lines) > max_lines:  # an absurdly long name: keep the layout, end the title visibly cut
        lines = lines[:max_lines]
        lines[-1] = lines[-1][:-1] + "…"
    return "\n".join(lines)


# ---------------------------------------------------------------------------------------------
# occultation timing

def occultation_times(samples):
    """(t_ref, period, weights, offset) of the occulting samples: t_ref is the epoch-0 mid-time
    (BJD_TDB, days) including the light-travel delay; offset = (t_ref - t0) / P, the phase."""
    from rhofollow.physics.kepler import transit_to_occultation_time
    from rhofollow.physics.occultation import light_travel_delay, occultation_occurs

    s = samples
    occ = occultation_occurs(s.a_rs, s.inc, s.e, s.omega, s.k)
    i = np.flatnonzero(occ)
    if i.size == 0:
        return None
    dt = transit_to_occultation_time(s.period[i], s.e[i], s.omega[i])
    ltt = light_travel_delay(s.a_rs[i], s.rstar[i], s.inc[i], s.e[i], s.omega[i])
    ltt = np.where(np.isfinite(ltt), ltt, 0.0)
    w = s.weights[i] / s.weights[i].sum()
    return s.t0[i] + dt + ltt, s.period[i], w, (dt + ltt) / s.period[i]


def _iso_jd(iso: str) -> float:
    d = _dt.datetime.strptime(iso[:19], "%Y-%m-%dT%H:%M:%S")
    return (d - _dt.datetime(2000, 1, 1, 12)).total_seconds() / 86400.0 + 2451545.0


def occultation_figure(samples, occ_record: dict, campaign_windows: list | None = None, max_events: int = 2,
                       coverage: float = 0.9):
    """Occultation phase distribution and the timing of the next events with their windows.

    Top: phase of the occultation after transit (0.5 = circular orbit). Below, per event (up to
    ``max_events``): the distribution of the mid-time in hours from its median, the credible region
    (``coverage`` of the run), the observing window with baselines, and the blocks the campaign
    found observable from the site.
    """
    plt = _plt()
    events = (occ_record.get("events") or [])[:max_events]
    n = 1 + len(events)
    fig, axes = plt.subplots(n, 1, figsize=(7.2, 2.3 + 2.4 * len(events)), squeeze=False)
    axes = axes[:, 0]
    got = occultation_times(samples)
    ax = axes[0]
    if got is None:
        ax.text(0.5, 0.5, "no posterior sample gives an occultation", ha="center", transform=ax.transAxes)
        ax.set_axis_off()
        fig.tight_layout()
        return fig
    t_ref, per, w, phase = got
    ax.hist(np.mod(phase, 1.0), bins=60, range=(0, 1), weights=w, color=COLOURS["occ"], alpha=0.8,
            histtype="stepfilled")
    ax.axvline(0.5, color="0.3", ls="--", lw=1)
    ax.text(0.505, 0.95, "circular orbit", transform=ax.get_xaxis_transform(), fontsize=7.5, va="top",
            bbox={"fc": "white", "ec": "none", "alpha": 0.85, "pad": 1})
    ax.set_xlim(0, 1)
    ax.set_yticks([])
    ax.set_xlabel("occultation phase after mid-transit (orbital periods)")
    ax.set_ylabel("probability")
    p = occ_record.get("p_occultation", float("nan"))
    ax.set_title(_title_lines(f"{samples.name}: when is the occultation?  P(occultation happens) = {p:.2f}; "
                              f"duration {_fmt_q(occ_record.get('occ_duration_h'), 1)} h", fig, 9.5, 0.85),
                 fontsize=9.5)
    cw = campaign_windows or []
    for ax, ev in zip(axes[1:], events):
        mid = t_ref + ev["epoch"] * per
        med = ev["mid_bjd_tdb"]["q50"]
        hrs = (mid - med) * 24.0
        lo, hi = np.quantile(hrs, [0.002, 0.998])
        for a, b in ev["window_bjd_tdb"]:
            lo, hi = min(lo, (a - med) * 24 - 1), max(hi, (b - med) * 24 + 1)
        counts, _, _ = ax.hist(hrs, bins=70, range=(lo, hi), weights=w, color=COLOURS["occ"], alpha=0.8,
                               histtype="stepfilled", label="predicted mid-time")
        for j, (a, b) in enumerate(ev["region_bjd_tdb"]):
            ax.axvspan((a - med) * 24, (b - med) * 24, ymin=0, ymax=0.06, color="0.25",
                       label=f"{100 * coverage:.0f} % credible region" if j == 0 else None)
        for j, (a, b) in enumerate(ev["window_bjd_tdb"]):
            ax.axvspan((a - med) * 24, (b - med) * 24, color="0.5", alpha=0.12,
                       label="window incl. baselines" if j == 0 else None)
        # campaign blocks of this epoch (UTC -> BJD through the event's own median pair)
        shift = med - _iso_jd(ev["mid_utc"]) if ev.get("mid_utc") else None
        k = 0
        for cwin in cw:
            if cwin.get("epoch") != ev["epoch"] or shift is None:
                continue
            a, b = _iso_jd(cwin["start_utc"]) + shift, _iso_jd(cwin["end_utc"]) + shift
            ax.axvspan((a - med) * 24, (b - med) * 24, ymin=0.9, ymax=1.0, color=COLOURS["plan"],
                       label="observable block at the site" if k == 0 else None)
            k += 1
        ax.set_xlim(lo, hi)
        ax.set_ylim(0, 1.45 * float(np.max(counts)) if np.max(counts) > 0 else 1.0)  # headroom for the key
        ax.set_yticks([])
        ax.set_ylabel("probability")
        when = ev.get("mid_utc", "")[:16].replace("T", " ")
        ax.set_xlabel(f"hours from the median mid-time of epoch {ev['epoch']} ({when} UTC)")
        ax.legend(fontsize=7, loc="upper center", ncol=4, frameon=False, columnspacing=1.2)
        ax.set_title(f"epoch {ev['epoch']}: " + (f"{k} observable block(s) at the site" if k else
                                                 "no observable block at the site"),
                     fontsize=8.5, loc="left", color="0.25")
    fig.tight_layout()
    return fig


# ---------------------------------------------------------------------------------------------
# RV curves

def rv_model_draws(samples, n_draws: int = 60, n_phase: int = 241, seed: int = DEFAULT_SEED, k=None,
                   weights=None):
    """Posterior draws of the RV curve against phase from transit.

    Returns ``(phase, eccentric (D, n_phase), circular (D, n_phase), k (D,))`` in m/s. K per sample
    is ``k`` when given, else the K the RV record of this target uses: drawn from the planet mass
    and the sample's e, i, M* and P (:func:`rhofollow.stages.rv.planet_mass_and_k`) with the record's
    generator for (seed, target); ``weights`` replace the samples' weights.
    """
    from rhofollow.physics.rv import circular_shape, rv_shape

    if k is None:
        k, _ = record_k_draws(samples, seed)
    rng = target_rng(seed, samples.name, "rv-model-draws")
    w = samples.weights if weights is None else np.asarray(weights, float) / np.sum(weights)
    cw = np.cumsum(w)
    cw[-1] = 1.0
    idx = np.searchsorted(cw, (rng.random() + np.arange(n_draws)) / n_draws)
    ph = np.linspace(0.0, 1.0, n_phase)
    e, om, kk = samples.e[idx], samples.omega[idx], np.asarray(k)[idx]
    ecc = kk[:, None] * rv_shape(ph[None, :], e[:, None], om[:, None])
    circ = kk[:, None] * circular_shape(ph)[None, :]
    return ph, ecc, circ, kk


def record_k_draws(samples, seed: int = DEFAULT_SEED, relation: str = "auto"):
    """(K per sample in m/s, weights): the very draws behind the RV record's ``k_ms`` for this seed."""
    from rhofollow.stages.rv import planet_mass_and_k

    _, k, _ = planet_mass_and_k(samples, target_rng(seed, samples.name, "mass"), relation)
    return k, samples.weights


def _rv_update(samples, rv_data, jitter, seed, k_mode="marginal"):
    """(weights, K per sample) of the posterior after the measured RVs (offsets free), drawn as the
    RV record's update draws them (same generator, same K mode)."""
    from rhofollow.physics.rvupdate import conditional_k, rv_log_likelihood

    k_mass, _ = record_k_draws(samples, seed)
    args = (rv_data.bjd_tdb, rv_data.rv_ms, rv_data.rv_err_ms, rv_data.groups(), samples.period,
            samples.t0, samples.e, samples.omega)
    post = samples.reweighted(rv_log_likelihood(*args, k_ms=k_mass if k_mode == "mass" else None,
                                                jitter_ms=jitter))
    if k_mode == "mass":
        return post.weights, k_mass
    k = conditional_k(*args, jitter_ms=jitter, rng=target_rng(seed, samples.name, "kcond"))
    return post.weights, k


def k_summary(rv_record: dict | None, k=None, weights=None) -> tuple[float, dict | None, str]:
    """The K summary every report shows: ``(K, quantiles, which)`` in m/s.

    K is the posterior-weighted median of K over the samples as the RV record reports it:
    ``k_updated_ms["q50"]`` after measured RVs, else ``k_ms["q50"]``. Only without a record is it
    computed, the same way, from the draws ``k`` with ``weights``.
    """
    from rhofollow.core.samples import quantile_dict

    rec = rv_record or {}
    for key, which in (("k_updated_ms", "after the measured RVs"), ("k_ms", "before any RV")):
        q = rec.get(key)
        if q and q.get("q50") is not None:
            return float(q["q50"]), q, which
    if k is None:
        return float("nan"), None, "unknown"
    q = quantile_dict(np.asarray(k, float), weights)
    return q["q50"], q, "from the samples"


def rv_figure(samples, rv_record: dict | None, visits: list | None = None, night_phases: list | None = None,
              rv_data=None, seed: int = DEFAULT_SEED):
    """Predicted RV curves (posterior draws), circular vs eccentric, with the informative phases,
    the planned visits (campaign: triangles, first night: star) and measured RVs when given.

    With measured RVs the draws come from the posterior updated by them (K and one offset per
    instrument free); the points are shown with the offsets of the median curve removed.
    """
    plt = _plt()
    rec = rv_record or {}
    k = w = None
    if rv_data is not None:
        w, k = _rv_update(samples, rv_data, float(rec.get("jitter_ms") or 0.0), seed,
                          rec.get("k_mode", "marginal"))
        if not np.all(np.isfinite(w)) or w.sum() <= 0:
            k = w = None
    ph, ecc, circ, kk = rv_model_draws(samples, seed=seed, k=k, weights=w)
    fig, ax = plt.subplots(figsize=(8.6, 5.4))
    for row in ecc:
        ax.plot(ph, row, color=COLOURS["ecc"], lw=0.8, alpha=0.2)
    from rhofollow.physics.rv import circular_shape

    if k is None:
        k, w_k = record_k_draws(samples, seed)
    else:
        w_k = w
    if w is not None and not rec.get("k_updated_ms"):
        # the record carries no update: summarise the update's draws the same way
        kmed, kq, _ = k_summary({}, k, w_k)
        which = "after the measured RVs"
    else:
        kmed, kq, which = k_summary(rec, k, w_k)
    rng68 = f"; 68 %: {kq['q16']:.0f}-{kq['q84']:.0f} m/s" if kq else ""
    ax.plot(ph, kmed * circular_shape(ph), color=COLOURS["circ"], lw=2.2, ls="--", gid="circular-k",
            label=f"circular orbit, K = {kmed:.1f} m/s (posterior-weighted median {which}{rng68})")
    what = "updated by the measured RVs" if w is not None else "before any RV"
    ax.plot([], [], color=COLOURS["ecc"], lw=1.5, alpha=0.6,
            label=f"eccentric posterior, {what} ({ecc.shape[0]} draws)")
    for j, p in enumerate(rec.get("best_phases") or []):
        ax.axvline(p, color=COLOURS["plan"], lw=1.2, alpha=0.9, ls="-.",
                   label="most informative phases" if j == 0 else None)
    # y range: most draws, not the extreme ones (a broad mass prior has a long tail of large K)
    ymax = float(np.quantile(np.max(np.abs(ecc), axis=1), 0.85)) * 1.25 if ecc.size else 1.0
    if rv_data is not None:
        t0 = float(np.sum(samples.weights * samples.t0))
        per = float(np.sum(samples.weights * samples.period))
        phase = np.mod((rv_data.bjd_tdb - t0) / per, 1.0)
        model = np.interp(phase, ph, np.median(ecc, axis=0))
        g = rv_data.groups()
        v = np.array(rv_data.rv_ms, dtype=float)
        err = np.array(rv_data.rv_err_ms, dtype=float)
        for gi in np.unique(g):
            m = g == gi
            wt = 1.0 / err[m] ** 2
            v[m] = v[m] - np.sum(wt * (v[m] - model[m])) / np.sum(wt)
        ax.errorbar(phase, v, yerr=err, fmt="o", color="black", ms=4, lw=1, capsize=2,
                    label=f"measured RVs ({rv_data.n}), instrument offsets removed")
        ymax = max(ymax, float(np.max(np.abs(v) + err)) * 1.15)
    n_out = int(np.sum(np.max(np.abs(ecc), axis=1) > ymax)) if ecc.size else 0
    if n_out:
        ax.text(0.99, 0.98, f"{n_out} of {ecc.shape[0]} draws run beyond the plotted range (large K)",
                transform=ax.transAxes, ha="right", va="top", fontsize=7.5, color="0.35",
                bbox={"fc": "white", "ec": "none", "alpha": 0.85, "pad": 1})
    if visits:
        vp = [v["phase"] for v in visits if v.get("phase") is not None]
        ax.plot(vp, np.full(len(vp), -0.92 * ymax), "^", color=COLOURS["plan"], ms=8, mec="white",
                label=f"campaign RV visits ({len(vp)}), at their phase")
    if night_phases:
        ax.plot(night_phases, np.full(len(night_phases), -0.92 * ymax), "*", color="#e0a100", ms=14,
                mec="0.2", label="first night's RV block")
    ax.set_xlim(0, 1)
    ax.set_ylim(-ymax, ymax)
    ax.axhline(0, color="0.6", lw=0.6)
    ax.set_xlabel("orbital phase from mid-transit (0 = transit)")
    ax.set_ylabel("stellar radial velocity (m/s)")
    sub = ""
    if rec.get("sigma_rv_ms") is not None:
        n = rec.get("n_epochs_confirm_ecc")
        sub = (f"; σ per visit {rec['sigma_rv_ms']:.1f} m/s, "
               + (f"{n} visits confirm e > 0" if n else "e > 0 not confirmable with RVs"))
    ax.set_title(_title_lines(f"{samples.name}: predicted RV curve{sub}", fig, 10, 0.85), fontsize=10)
    ax.legend(fontsize=7.5, loc="upper center", bbox_to_anchor=(0.5, -0.13), ncol=2, frameon=False)
    fig.tight_layout()
    return fig


# ---------------------------------------------------------------------------------------------
# catalogue overview and campaign strip

def overview_figure(records: list[dict], periods: dict, label_top: int = 30):
    """Density ratio vs period for every assessed target, coloured by P(e > 0.1) (colour bar)."""
    plt = _plt()
    from matplotlib.colors import Normalize

    ok = [r for r in records if r.get("ok") and r.get("density_ratio")]
    fig, ax = plt.subplots(figsize=(8.0, 5.2))
    if not ok:
        ax.text(0.5, 0.5, "no target could be assessed", ha="center", transform=ax.transAxes)
        return fig
    per = np.array([periods.get(r["name"], np.nan) for r in ok])
    y = np.array([_q(r["density_ratio"]) for r in ok])
    ylo = y - np.array([_q(r["density_ratio"], "q16") for r in ok])
    yhi = np.array([_q(r["density_ratio"], "q84") for r in ok]) - y
    p = np.array([r.get("p_ecc_gt_0p1", np.nan) for r in ok])
    ax.errorbar(per, y, yerr=[ylo, yhi], fmt="none", ecolor="0.55", lw=1, zorder=1)
    sc = ax.scatter(per, y, c=p, cmap=evidence_cmap(), norm=Normalize(0, 1), s=70, edgecolors="0.15",
                    linewidths=0.7, zorder=3)
    cb = fig.colorbar(sc, ax=ax, pad=0.02)
    cb.set_label("P(e > 0.1), posterior probability")
    ax.axhline(1.0, color="0.3", ls="--", lw=1, label="ratio 1: the densities agree (circular orbit)")
    ax.legend(loc="best", fontsize=8, frameon=True, framealpha=0.9, edgecolor="0.8")
    ax.margins(x=0.12, y=0.1)
    ax.set_xscale("log")
    ax.set_yscale("log")
    _plain_log_axis(ax.xaxis)
    _plain_log_axis(ax.yaxis)
    ax.set_xlabel("orbital period (days)")
    ax.set_ylabel("ρ_circ / ρ*  (median, 68 % bars)")
    ax.set_title(f"Catalogue overview: {len(ok)} assessed targets; above 1: transit shorter than a "
                 "circular orbit allows", fontsize=10)
    ax.grid(True, which="both", color=COLOURS["grid"], lw=0.5)
    fig.tight_layout()
    order = np.argsort(-np.nan_to_num(p))[:label_top]
    _place_labels(ax, per[order], y[order], [ok[i]["name"] for i in order])
    return fig


def _place_labels(ax, xs, ys, names, fontsize=7.5):
    """Name each point where its label overlaps no label placed before it (tries eight offsets
    around the point; keeps the first offset when none is free). Call after the layout is final."""
    fig = ax.figure
    renderer = fig.canvas.get_renderer()
    offsets = [(5, 4, "left", "bottom"), (5, -4, "left", "top"), (-5, 4, "right", "bottom"),
               (-5, -4, "right", "top"), (0, 7, "center", "bottom"), (0, -7, "center", "top"),
               (9, 0, "left", "center"), (-9, 0, "right", "center")]
    taken = []
    leg = ax.get_legend()
    if leg is not None:
        taken.append(leg.get_window_extent(renderer))
    for x, y, name in zip(xs, ys, names):
        best = None
        for dx, dy, ha, va in offsets:
            a = ax.annotate(name, (x, y), xytext=(dx, dy), textcoords="offset points", fontsize=fontsize,
                            ha=ha, va=va)
            bb = a.get_window_extent(renderer).expanded(1.05, 1.1)
            inside = ax.get_window_extent(renderer).contains(bb.x0, bb.y0) and \
                ax.get_window_extent(renderer).contains(bb.x1, bb.y1)
            if inside and not any(bb.overlaps(t) for t in taken):
                best = (a, bb)
                break
            a.remove()
        if best is None:
            dx, dy, ha, va = offsets[0]
            a = ax.annotate(name, (x, y), xytext=(dx, dy), textcoords="offset points", fontsize=fontsize,
                            ha=ha, va=va)
            best = (a, a.get_window_extent(renderer))
        taken.append(best[1])


def campaign_figure(campaign: dict, nights: list | None = None, order: list[str] | None = None,
                    max_rows: int = 30):
    """Calendar strip of the campaign: one row per target (in ``order``), occultation windows and RV
    visits per night, clashes hollow; the top panel shows the dark hours of each night."""
    plt = _plt()
    import matplotlib.dates as mdates

    targets = {t["name"]: t for t in campaign.get("targets", [])}
    names = [n for n in (order or list(targets)) if n in targets
             and (targets[n]["occultation_windows"] or targets[n]["rv_visits"])][:max_rows]
    rows = max(1, len(names))
    fig, (axn, ax) = plt.subplots(2, 1, figsize=(10.0, 2.2 + 0.3 * rows), sharex=True,
                                  gridspec_kw={"height_ratios": [1.0, max(2.0, 0.3 * rows)], "hspace": 0.08})

    def day(iso_date):
        return _dt.datetime.fromisoformat(iso_date)

    if nights:
        xs = [_dt.datetime.combine(g.date, _dt.time(12)) for g in nights]
        axn.bar(xs, [g.duration_hours for g in nights], width=0.8, color="#2d4f7c", alpha=0.8)
    axn.set_ylabel("dark hours", fontsize=8)
    axn.tick_params(labelsize=7)
    axn.set_title(f"{campaign.get('site', '')}: campaign {campaign.get('start')} to {campaign.get('end')} "
                  "(each night plotted at its local evening date)", fontsize=10)
    for i, n in enumerate(names):
        t = targets[n]
        for kind, items, marker, colour in (("occ", t["occultation_windows"], "s", COLOURS["occ"]),
                                            ("rv", t["rv_visits"], "|", COLOURS["rv"])):
            for it in items:
                x = day(it["night"]) + _dt.timedelta(hours=12)
                if kind == "occ":
                    ax.plot(x, i, marker, ms=7, color=colour if not it.get("clash") else "white", mec=colour)
                else:
                    ax.plot(x, i, marker, ms=11, mew=2.2 if not it.get("clash") else 0.8, color=colour)
    ax.set_yticks(range(len(names)))
    ax.set_yticklabels(names, fontsize=8)
    ax.set_ylim(max(len(names), 1) - 0.5, -0.5)   # an empty campaign still gets a non-degenerate axis
    if not names:
        ax.text(0.5, 0.5, "nothing requested or observable in this range", transform=ax.transAxes,
                ha="center", va="center", fontsize=9, color="0.35")
    ax.grid(axis="x", color=COLOURS["grid"], lw=0.5)
    ax.xaxis.set_major_locator(mdates.AutoDateLocator(minticks=4, maxticks=12))
    ax.xaxis.set_major_formatter(mdates.DateFormatter("%Y-%m-%d"))
    plt.setp(ax.get_xticklabels(), rotation=30, ha="right", fontsize=8)
    ax.set_xlabel("local date of the evening")
    from matplotlib.lines import Line2D

    handles = [Line2D([], [], marker="s", ls="", color=COLOURS["occ"], label="occultation window"),
               Line2D([], [], marker="|", ls="", ms=11, mew=2.2, color=COLOURS["rv"], label="RV visit"),
               Line2D([], [], marker="s", ls="", color="white", mec=COLOURS["occ"],
                      label="hollow square / thin bar: clashes with a more valuable item that night")]
    fig.legend(handles=handles, fontsize=7.5, loc="lower center", ncol=3, frameon=False)
    if not names:
        ax.text(0.5, 0.5, "nothing observable in the campaign", ha="center", transform=ax.transAxes)
    fig.subplots_adjust(left=0.1, right=0.97, bottom=min(0.35, 1.1 / fig.get_figheight()), top=0.92)
    return fig
