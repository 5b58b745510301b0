"""Altitude chart of a night: the planned targets' altitude against UTC and local time.

Darkness is shaded by the Sun's altitude (day, civil, nautical, astronomical twilight, night), the
site's altitude limit is drawn, and every chosen block is marked: the target's curve is drawn
thick during its block and a labelled band on top shows the block (occultation or RV). The
figure is written with matplotlib's Agg backend (no display needed).
"""
from __future__ import annotations

import numpy as np

__all__ = ["plot_night", "night_figure"]

_KIND_LABEL = {"occultation": "occ", "rv": "RV"}
#: Sun-altitude bands (deg): the sky gets darker as the Sun goes down.
_TWILIGHT = [(-0.833, 90.0, "#fffdf2", "day (Sun up)"), (-6.0, -0.833, "#eef0f5", "civil twilight"),
             (-12.0, -6.0, "#dde1ec", "nautical twilight"), (-18.0, -12.0, "#cbd1e2", "astronomical twilight"),
             (-91.0, -18.0, "#b9c1d8", "dark (Sun below -18°)")]


def _runs(mask):
    """(start, end) index pairs of the True runs of a boolean array."""
    m = np.concatenate([[False], np.asarray(mask, bool), [False]])
    d = np.diff(m.astype(int))
    return list(zip(np.flatnonzero(d == 1), np.flatnonzero(d == -1) - 1))


def night_figure(engine, night, science: list[dict], plan: dict, max_targets: int = 10):
    """A matplotlib Figure of the night (see the module docstring).

    Parameters
    ----------
    engine : VisibilityEngine
        Gives Sun and target altitudes (deg) and local time.
    night : NightGrid
        The night (JD UTC limits).
    science : list of dict
        Science dicts with ``name``, ``ra_deg``, ``dec_deg``.
    plan : dict
        The night JSON (``blocks`` with ``name``, ``kind``, ``start_jd``, ``end_jd``).
    max_targets : int
        Most curves drawn: the targets with blocks first, then none other (keeps it legible).
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    pad = 1.5 / 24.0
    t0 = (night.sunset_jd if np.isfinite(night.sunset_jd) else night.start_jd) - 0.5 / 24
    t1 = (night.sunrise_jd if np.isfinite(night.sunrise_jd) else night.end_jd) + 0.5 / 24
    if not (np.isfinite(t0) and np.isfinite(t1)):
        t0, t1 = night.start_jd - pad, night.end_jd + pad
    t = np.linspace(t0, t1, 400)
    # x axis: hours since 0h UTC of the evening's UTC date
    jd_mid0 = np.floor(t0 - 0.5) + 0.5
    x = (t - jd_mid0) * 24.0
    off_h = engine.local_time(0.5 * (t0 + t1)).utcoffset().total_seconds() / 3600.0

    fig, ax = plt.subplots(figsize=(11, 6.2), dpi=110)
    sun = engine.sun_altitude(t)
    for lo, hi, color, label in _TWILIGHT:
        for a, b in _runs((sun >= lo) & (sun < hi)):
            ax.axvspan(x[a], x[min(b + 1, len(x) - 1)], color=color, lw=0, zorder=0)
    lim = engine.site.constraints.min_altitude_deg
    ax.axhline(lim, color="0.25", ls="--", lw=1.0, zorder=2)
    ax.text(x[1], lim + 0.8, f"altitude limit {lim:.0f}°", fontsize=8, color="0.25", va="bottom")

    blocks = plan.get("blocks", [])
    order = list(dict.fromkeys(b["name"] for b in blocks))
    by_name = {s["name"]: s for s in science}
    shown = [n for n in order if n in by_name][:max_targets]
    tab = plt.get_cmap("tab10")
    palette = [tab(i) for i in (0, 1, 2, 3, 4, 5, 6, 8, 9)]  # no grey: the Moon is grey

    def cmap(i):
        return palette[i % len(palette)]

    if shown:
        ra = np.array([by_name[n]["ra_deg"] for n in shown])
        dec = np.array([by_name[n]["dec_deg"] for n in shown])
        alt = engine.altitude(ra, dec, t)
        for i, n in enumerate(shown):
            ax.plot(x, alt[i], color=cmap(i), lw=1.2, alpha=0.85, zorder=3, label=n)
            for b in (b for b in blocks if b["name"] == n):
                m = (t >= b["start_jd"]) & (t <= b["end_jd"])
                ax.plot(x[m], alt[i][m], color=cmap(i), lw=4.5, solid_capstyle="butt", zorder=4)
    # the blocks: a band in the target's colour along the top, labelled with target and kind
    color_of = {n: cmap(i) for i, n in enumerate(shown)}
    for b in blocks:
        xs, xe = (b["start_jd"] - jd_mid0) * 24.0, (b["end_jd"] - jd_mid0) * 24.0
        c = color_of.get(b["name"], "0.4")
        occ = b["kind"] == "occultation"
        ax.axvspan(xs, xe, ymin=0.955, ymax=1.0, fc=c, ec="white" if occ else c, lw=0, zorder=5,
                   hatch="////" if occ else None)
        ax.axvline(xs, ymin=0.0, ymax=0.955, color=c, lw=0.7, ls=":", zorder=2)
        ax.axvline(xe, ymin=0.0, ymax=0.955, color=c, lw=0.7, ls=":", zorder=2)
        ax.text(0.5 * (xs + xe), 85.5, f"{b['name']} {_KIND_LABEL.get(b['kind'], b['kind'])}",
                rotation=90, ha="center", va="top", fontsize=7, color="0.1", zorder=6,
                bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": c, "lw": 0.8, "alpha": 0.9})
    moon = engine.moon(t)
    ax.plot(x, moon["alt_deg"], color="0.45", lw=1.0, ls="-.", zorder=2,
            label=f"Moon ({100 * np.nanmean(moon['illumination']):.0f}% lit)")
    for jd, lab in ((night.start_jd, "night starts"), (night.end_jd, "night ends")):
        if np.isfinite(jd):
            ax.axvline((jd - jd_mid0) * 24.0, color="0.15", lw=0.8, zorder=2)
            ax.text((jd - jd_mid0) * 24.0, 2.0, " " + lab, rotation=90, fontsize=7, va="bottom",
                    ha="right" if lab.endswith("starts") else "left", color="0.15")

    ax.set_xlim(x[0], x[-1])
    ax.set_ylim(0.0, 90.0)
    ax.set_ylabel("altitude (deg, geometric)")
    ax.set_xlabel("UTC (hours, hh:mm)")

    def fmt(v, _pos=None):
        v = v % 24.0
        h = int(np.floor(v + 1e-9))
        return f"{h:02d}:{int(round((v - h) * 60)) % 60:02d}"

    from matplotlib.ticker import FuncFormatter, MultipleLocator

    ax.xaxis.set_major_locator(MultipleLocator(1.0))
    ax.xaxis.set_major_formatter(FuncFormatter(fmt))
    top = ax.secondary_xaxis("top", functions=(lambda v: v + off_h, lambda v: v - off_h))
    tzname = engine.local_time(0.5 * (t0 + t1)).tzname()
    top.set_xlabel(f"local time, {engine.site.timezone} ({tzname}, UTC{off_h:+g} h)")
    top.xaxis.set_major_locator(MultipleLocator(1.0))
    top.xaxis.set_major_formatter(FuncFormatter(fmt))
    for lab in ax.get_xticklabels() + top.get_xticklabels():
        lab.set_fontsize(8)
    ax.grid(axis="y", color="0.6", lw=0.4, alpha=0.6)

    from matplotlib.patches import Patch

    handles, labels = ax.get_legend_handles_labels()
    handles += [Patch(fc="0.5", hatch="////", ec="white"), Patch(fc="0.6", ec="0.3")]
    labels += ["occultation block (top band)", "RV block (top band)"]
    handles += [Patch(fc=c, ec="0.7") for _, _, c, _ in _TWILIGHT]
    labels += [lab for *_, lab in _TWILIGHT]
    ax.legend(handles, labels, loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=8, frameon=False)
    date = plan.get("date", "")
    ax.set_title(f"{plan.get('site', engine.site.name)}: night of {date} (local evening date). Thick line: "
                 "target during its chosen block. Advisory plan.", fontsize=10, pad=28)
    fig.tight_layout()
    return fig


def plot_night(path, engine, night, science: list[dict], plan: dict, max_targets: int = 10):
    """Write :func:`night_figure` to ``path`` (PNG) and close it; returns the path."""
    import matplotlib.pyplot as plt

    fig = night_figure(engine, night, science, plan, max_targets)
    try:
        fig.savefig(path)
    finally:
        plt.close(fig)
    return path
