"""Figures of the whole run: the catalogue overview and the campaign calendar strip."""
from __future__ import annotations

import datetime as _dt
import numpy as np

from rhofollow.report.plots.common import COLOURS, _plt, _q, evidence_cmap
from rhofollow.report.plots.density import _plain_log_axis


# ---------------------------------------------------------------------------------------------
# catalogue overview and campaign strip

def overview_figure(records: list[dict], periods: dict, label_top: int = 30):
    """Density ratio vs period for every assessed target, coloured by P(e > 0.1) (colour bar).

    Parameters
    ----------
    records : list of dict
        Assessment records (``density_ratio`` quantiles, ``p_ecc_gt_0p1``).
    periods : dict
        Target name -> orbital period (days).
    label_top : int
        Name the points of this many targets with the largest P(e > 0.1).

    Returns
    -------
    matplotlib.figure.Figure
        One axes: period (days, log) against rho_circ / rho* (log), plus the colour bar.
    """
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
    visits per night, clashes hollow; the top panel shows the dark hours of each night.

    Parameters
    ----------
    campaign : dict
        The campaign JSON (``targets`` with ``occultation_windows`` and ``rv_visits`` per night).
    nights : list of NightGrid, optional
        The campaign's nights (dark hours).
    order : list of str, optional
        Target names in the order of the rows (default: the campaign's order).
    max_rows : int
        Most target rows drawn.

    Returns
    -------
    matplotlib.figure.Figure
        Two axes: dark hours per night (h), and the target rows against the local evening date.
    """
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
