"""The (e, omega) posterior of one target, with the uniform-prior interval and prior-driven bounds."""
from __future__ import annotations

import numpy as np

from rhofollow.report.plots.common import COLOURS, _plt, _title_lines, ecc_cmap


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


def _ecc_top(e, uq) -> float:
    """Upper end of the e axis: above 99.9 % of the samples and the uniform-prior interval, in [0.2, 1]."""
    top_e = float(np.quantile(e, 0.999))
    if uq.get("q975") is not None:
        top_e = max(top_e, float(uq["q975"]))
    return min(1.0, max(0.2, top_e * 1.15))


def _ecc_axes(plt):
    """The figure and its four axes: the (omega, e) map, the omega marginal above it, the e marginal
    to its right and the colour bar."""
    from matplotlib.gridspec import GridSpec

    fig = plt.figure(figsize=(7.6, 7.0))
    gs = GridSpec(2, 3, width_ratios=[4, 1.5, 0.18], height_ratios=[1.1, 4], hspace=0.05, wspace=0.05,
                  figure=fig)
    ax = fig.add_subplot(gs[1, 0])
    axt = fig.add_subplot(gs[0, 0], sharex=ax)
    axr = fig.add_subplot(gs[1, 1], sharey=ax)
    cax = fig.add_subplot(gs[1, 2])
    return fig, ax, axt, axr, cax


def _draw_posterior(fig, axes, om, e, w, wu, emax, ess_u, handles) -> float:
    """The weighted 2-D histogram with its colour bar and both marginals (the e marginal also
    re-weighted to the uniform prior when ``wu`` is given). Returns the e marginal's peak density."""
    from matplotlib.lines import Line2D

    ax, axt, axr, cax = axes
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
    if wu is not None:
        du, _, _ = axr.hist(e, bins=50, range=(0, emax), weights=wu, density=True, orientation="horizontal",
                            histtype="step", color="0.2", lw=1.1, ls="-")
        peak = max(peak, float(np.max(du)))
        handles.append(Line2D([], [], color="0.2", lw=1.1, label="e marginal re-weighted to a uniform e prior"
                              + (f" (ESS {ess_u:.0f})" if ess_u is not None else "")))
    return peak


def _draw_interval_bars(axr, rec, eq, uq, prior_name, peak, handles) -> None:
    """The 95 % intervals of e (run's prior, uniform prior) as bars at the right edge of the e
    marginal, clear of the histograms; a bound the prior sets carries a dagger."""
    from matplotlib.lines import Line2D

    axr.set_xlim(0, peak * 1.55)
    bounds = rec.get("ecc_bounds") or {}
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


def _draw_guides(ax, axr, emin, emax, handles) -> None:
    """e_min as a dashed line across the map and the e marginal (named in the key, first), and the
    omega of a transit at periastron / apastron as dotted lines."""
    from matplotlib.lines import Line2D

    if emin is not None and np.isfinite(emin):
        for a in (ax, axr):
            a.axhline(emin, color=COLOURS["circ"], ls="--", lw=1.3)
        handles.insert(0, Line2D([], [], color=COLOURS["circ"], ls="--", lw=1.3,
                                 label=f"e_min = {emin:.2f}: smallest e giving the median density ratio"))
    for v, lab in ((90, "transit at periastron"), (270, "transit at apastron")):
        ax.axvline(v, color="0.45", lw=0.7, ls=":")
        ax.text(v + 2, emax * 0.97, lab, fontsize=7, color="0.35", va="top", rotation=90)


def _label_ecc_axes(plt, ax, axt, axr, emax) -> None:
    """Limits, ticks and labels of the map and its marginals."""
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


def _ecc_title_and_key(fig, samples, rec, eq, uq, handles) -> None:
    """The two-line title (name; e, its intervals, P(e > 0.1), ESS) and the key below the axes."""
    e, w = samples.e, samples.weights
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


def ecc_omega_figure(samples, record: dict | None = None):
    """2-D weighted histogram of (omega, e) with both marginals.

    The e marginal (right) also shows the e marginal re-weighted to a uniform e prior (outline) and
    the 95 % intervals under the run's prior and under the uniform one (bars at the right edge); a
    bound the prior sets (``record['ecc_bounds']``) carries a dagger, as in the terminal table.
    ``ecc_min`` (the smallest e giving the median density ratio) is a dashed line named in the key
    below the axes, so no label covers the posterior.

    Parameters
    ----------
    samples : rhofollow.core.samples.SampleSet
        The target's weighted posterior samples (e dimensionless, omega in rad).
    record : dict, optional
        The assessment record (``ecc_uniform_prior``, ``ecc_bounds``, ``ecc_min``, ``prior``,
        ``p_ecc_gt_0p1_prior``, ``ess_uniform_prior``, ``orbit_measured``).

    Returns
    -------
    matplotlib.figure.Figure
        Axes in order: the (omega [deg], e) map, the omega marginal, the e marginal, the colour bar
        (posterior density per degree per unit e).
    """
    plt = _plt()
    rec = record or {}
    om = np.degrees(np.mod(samples.omega, 2 * np.pi))
    e, w = samples.e, samples.weights
    wu = _uniform_marginal(samples, rec)
    uq = rec.get("ecc_uniform_prior") or {}
    emax = _ecc_top(e, uq)
    fig, ax, axt, axr, cax = _ecc_axes(plt)
    handles = []
    peak = _draw_posterior(fig, (ax, axt, axr, cax), om, e, w, wu, emax, rec.get("ess_uniform_prior"), handles)
    eq = samples.quantiles("e")
    prior_name = rec.get("prior") or samples.meta.get("prior") or "run's prior"
    _draw_interval_bars(axr, rec, eq, uq, prior_name, peak, handles)
    _draw_guides(ax, axr, rec.get("ecc_min"), emax, handles)
    _label_ecc_axes(plt, ax, axt, axr, emax)
    _ecc_title_and_key(fig, samples, rec, eq, uq, handles)
    return fig


def _prior_delta() -> float:
    from rhofollow.stages.assess import PRIOR_DRIVEN_DELTA

    return PRIOR_DRIVEN_DELTA
