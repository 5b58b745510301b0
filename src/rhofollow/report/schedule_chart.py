"""Schedule chart of one night: the chosen blocks as a timeline, each target's altitude beneath.

Layout, top to bottom, on one time axis:

* the **sky-state rows**: the Sun row marks sunset, the -6 / -12 / -18 deg crossings of the Sun's
  centre and sunrise with labelled markers, and a bar spans the night the plan uses (between the
  site's twilight limits); the Moon row shows the Moon as dots while it is up (dot size grows
  with its altitude), its rise and set, its highest altitude and its illuminated fraction;
* one **lane per target** in the order of its first block: the block(s) as labelled bars
  coloured by kind (occultation: photometer, RV: spectrograph), and beneath them an altitude
  strip whose colour gives the target's airmass class through the whole night, with the time
  below the site's altitude limit (airmass limit or horizon mask) and below the horizon set
  apart; the highest point of the night is marked with its altitude. Beside each lane: the
  block's worst airmass and the Moon's distance during the block;
* the time axis carries two lines per tick: UTC above, the site's local time below.

The key below the chart explains every colour and marker. Written with matplotlib's Agg backend.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rhofollow.report.night_sky import _MOON, _NIGHT_BAR, _SUN, _draw_moon_row, _draw_sun_row

__all__ = ["plot_night", "night_figure", "KIND_COLOURS", "airmass_classes"]

#: Block colours by kind (the instruments of the plan): rust for photometry, teal for RVs.
KIND_COLOURS = {"occultation": "#b5532f", "rv": "#2a7f86"}
_KIND_NAME = {"occultation": "occultation", "rv": "RV visit"}
#: Airmass strip: deep violet (overhead) to pale lilac near the limit; then grey and white.
_STRIP_GOOD = ["#3b2a6b", "#62519a", "#9486c2", "#c9c0e3"]
_BELOW_LIMIT = "#d6d3cc"
_BELOW_HORIZON = "#ffffff"
_INK = "#222222"


def airmass_classes(max_airmass: float) -> list[float]:
    """Upper edges of the strip's airmass classes (sec z) below the site's limit ``max_airmass``.

    The classes are 1-1.15, 1.15-1.3, 1.3-1.5 and 1.5-limit (those that lie below the limit);
    the last edge is the limit itself. Common practice, no source.

    Parameters
    ----------
    max_airmass : float
        The site's airmass limit (sec z).

    Returns
    -------
    list of float
        Upper class edges (sec z), increasing, the last one ``max_airmass``.
    """
    edges = [x for x in (1.15, 1.3, 1.5) if x < max_airmass - 1e-6]
    return edges + [float(max_airmass)]


def _runs(mask):
    """(start, end) index pairs of the True runs of a boolean array (end inclusive)."""
    m = np.concatenate([[False], np.asarray(mask, bool), [False]])
    d = np.diff(m.astype(int))
    return list(zip(np.flatnonzero(d == 1), np.flatnonzero(d == -1) - 1))


def _block_label(b: dict) -> str:
    if b["kind"] == "occultation":
        lab = f"occ E{b['epoch']}" if b.get("epoch") is not None else "occ"
        if b.get("partial") and b.get("p_catch") is not None:
            lab += f" ({100 * b['p_catch']:.0f}%)"
        return lab
    return f"RV φ {b['phase']:.2f}" if b.get("phase") is not None else "RV"


@dataclass
class _Frame:
    """The chart's frame: the time grid (JD UTC and hours from 0h UTC), the figure and its two axes."""

    t: np.ndarray            # JD UTC, about every 2 minutes from sunset - 0.5 h to sunrise + 0.5 h
    x: np.ndarray            # the same times in hours from jd_mid0
    t0: float
    t1: float
    jd_mid0: float           # 0h UTC of the evening's UTC date
    fig: object = None
    ax_sky: object = None
    ax: object = None
    left: float = 0.0
    right: float = 1.0
    width: float = 11.5      # inches
    height: float = 1.0      # inches

    def xh(self, jd):
        """Hours from ``jd_mid0`` of a JD UTC.

        Parameters
        ----------
        jd : float or array
            Julian date (UTC, days).

        Returns
        -------
        float or array
            Hours from 0h UTC of the evening's UTC date.
        """
        return (jd - self.jd_mid0) * 24.0


def _time_grid(night) -> _Frame:
    """The chart's time grid: sunset - 0.5 h to sunrise + 0.5 h (noon to noon without a sunset)."""
    t0 = (night.sunset_jd if np.isfinite(night.sunset_jd) else night.start_jd) - 0.5 / 24
    t1 = (night.sunrise_jd if np.isfinite(night.sunrise_jd) else night.end_jd) + 0.5 / 24
    if not (np.isfinite(t0) and np.isfinite(t1)):
        t0, t1 = night.noon_jd, night.next_noon_jd
    t = np.linspace(t0, t1, max(200, int((t1 - t0) * 1440 / 2)))  # about every 2 minutes
    jd_mid0 = np.floor(t0 - 0.5) + 0.5
    return _Frame(t=t, x=(t - jd_mid0) * 24.0, t0=t0, t1=t1, jd_mid0=jd_mid0)


def _add_axes(fr: _Frame, n: int) -> None:
    """The figure and its axes, sized in inches so text stays the same size whatever the lane count."""
    import matplotlib.pyplot as plt

    lane_in, sky_in, key_in, head_in, foot_in = 0.62, 1.0, 0.75, 0.75, 0.6
    lanes_in = lane_in * max(n, 1)
    fr.height = height = head_in + sky_in + 0.12 + lanes_in + foot_in + key_in
    width = fr.width
    fr.fig = fig = plt.figure(figsize=(width, height), dpi=110)
    fr.left, fr.right = left, right = 1.05 / width, 1.0 - 1.55 / width
    top = 1.0 - head_in / height
    fr.ax_sky = fig.add_axes([left, top - sky_in / height, right - left, sky_in / height])
    lanes_top = top - (sky_in + 0.12) / height
    fr.ax = fig.add_axes([left, lanes_top - lanes_in / height, right - left, lanes_in / height],
                         sharex=fr.ax_sky)
    fr.ax_sky.set_label("sky")
    fr.ax.set_label("schedule")


def _strip_scale(c):
    """The airmass strip's scale: ``(limit, class edges, colour map, norm)`` (sec z)."""
    from matplotlib.colors import BoundaryNorm, ListedColormap

    xlim = c.max_airmass if c.max_airmass else 1.0 / np.sin(np.radians(max(c.min_altitude_deg, 1.0)))
    xlim = min(xlim, 1.0 / np.sin(np.radians(max(c.min_altitude_deg, 1.0))))
    edges = airmass_classes(xlim)
    bounds = [1.0] + edges + [50.0, 100.0]
    cmap = ListedColormap(_STRIP_GOOD[:len(edges)] + [_BELOW_LIMIT, _BELOW_HORIZON])
    return xlim, edges, cmap, BoundaryNorm(bounds, cmap.N)


def _draw_strips(fr: _Frame, engine, shown, by_name, scale) -> None:
    """The lower half of each lane: the target's airmass class through the night, culmination marked."""
    from matplotlib.patches import Rectangle

    ax, t, x, c = fr.ax, fr.t, fr.x, engine.site.constraints
    _xlim, edges, cmap, norm = scale
    ra = np.array([by_name[nm]["ra_deg"] for nm in shown])
    dec = np.array([by_name[nm]["dec_deg"] for nm in shown])
    alt, az = engine.altaz(ra, dec, t)
    req = c.required_altitude_deg(az)
    with np.errstate(divide="ignore"):
        am = np.where(alt > 0, np.minimum(1.0 / np.sin(np.radians(np.clip(alt, 1e-6, 90))), 49.0), 99.0)
    am = np.where((alt > 0) & (alt < req - 1e-9), 20.0, am)  # blocked by the limit or the mask
    xe = np.concatenate([[x[0]], 0.5 * (x[1:] + x[:-1]), [x[-1]]])
    for i, nm in enumerate(shown):
        ax.pcolormesh(xe, [i + 0.52, i + 0.9], am[i][None, :], cmap=cmap, norm=norm, shading="flat",
                      rasterized=True, gid=f"strip:{nm}")
        ax.add_patch(Rectangle((x[0], i + 0.52), x[-1] - x[0], 0.38, fc="none", ec="0.6", lw=0.5))
        k = int(np.argmax(alt[i]))
        if 0.02 * len(x) < k < 0.98 * len(x) and alt[i][k] > 0:  # culmination inside the chart
            ax.plot([x[k]], [i + 0.52], marker="v", ms=4, color=_INK, ls="", zorder=5)
            ha = "left" if k < len(x) * 0.9 else "right"
            ax.text(x[k] + (0.05 if ha == "left" else -0.05), i + 0.58, f"max {alt[i][k]:.0f}°",
                    fontsize=6.5, ha=ha, va="top", color="white" if am[i][k] < edges[-1] else _INK,
                    zorder=5)
        elif alt[i][k] <= 0:
            ax.text(x[len(x) // 2], i + 0.71, "below the horizon all night", fontsize=7, ha="center",
                    va="center", color=_INK)


def _draw_blocks(fr: _Frame, blocks, shown) -> None:
    """The upper half of each lane: the chosen blocks as bars in their kind's colour, labelled inside
    when the label fits, else just after the bar."""
    from matplotlib.patches import FancyBboxPatch

    ax, x, xh = fr.ax, fr.x, fr.xh
    axes_w_in = (fr.right - fr.left) * fr.width
    h_per_in = (x[-1] - x[0]) / axes_w_in
    for b in blocks:
        if b["name"] not in shown:
            continue
        i = shown.index(b["name"])
        xs, xe_ = xh(b["start_jd"]), xh(b["end_jd"])
        col = KIND_COLOURS.get(b["kind"], "0.4")
        ax.add_patch(FancyBboxPatch((xs, i + 0.1), xe_ - xs, 0.34, boxstyle="round,pad=0,rounding_size=0.04",
                                    mutation_aspect=0.3, fc=col, ec="white", lw=0.6, zorder=4,
                                    gid=f"block:{b['name']}:{b['kind']}"))
        for xx in (xs, xe_):
            ax.plot([xx, xx], [i + 0.44, i + 0.9], color=col, lw=0.8, zorder=5)
        lab = _block_label(b)
        fits = len(lab) * 0.058 * h_per_in < (xe_ - xs) * 0.95
        if fits:
            ax.text(0.5 * (xs + xe_), i + 0.27, lab, fontsize=7, ha="center", va="center", color="white",
                    zorder=6, gid="block-label")
        else:
            ax.text(xe_ + 0.05, i + 0.27, lab, fontsize=7, ha="left", va="center", color=col, zorder=6,
                    gid="block-label")


def _draw_lane_notes(fr: _Frame, engine, blocks, shown, by_name, malt) -> None:
    """Beside each lane: the worst airmass in its blocks and the Moon's distance during them."""
    t = fr.t
    for i, nm in enumerate(shown):
        bs = [b for b in blocks if b["name"] == nm]
        worst = max(float(b.get("airmass_max", np.nan)) for b in bs)
        inb = np.zeros(len(t), bool)
        for b in bs:
            inb |= (t >= b["start_jd"]) & (t <= b["end_jd"])
        moon_up = inb & (malt > 0)
        if moon_up.any():
            sep = engine.moon_separation([by_name[nm]["ra_deg"]], [by_name[nm]["dec_deg"]], t[moon_up])[0]
            mtxt = f"Moon ≥ {np.min(sep):.0f}° away"
        else:
            mtxt = "Moon down"
        fr.ax.text(1.01, i + 0.5, f"airmass ≤ {worst:.2f}\n{mtxt}", transform=fr.ax.get_yaxis_transform(),
                   fontsize=7, va="center", ha="left", color=_INK, gid="lane-note")


def _draw_lane_frame(fr: _Frame, night, shown, n) -> None:
    """The night's edges across both axes, the lane separators and the lanes' names."""
    ax, ax_sky, xh = fr.ax, fr.ax_sky, fr.xh
    for jd in (night.start_jd, night.end_jd):
        if np.isfinite(jd):
            ax.axvline(xh(jd), color=_NIGHT_BAR, lw=0.9, zorder=3)
            ax_sky.plot([xh(jd), xh(jd)], [0.13, 1.6], color=_NIGHT_BAR, lw=0.6, ls=":", zorder=1)
    for i in range(1, max(n, 1)):
        ax.axhline(i, color="0.85", lw=0.6, zorder=0)
    ax.set_yticks(np.arange(max(n, 1)) + 0.5)
    ax.set_yticklabels(shown if shown else [""], fontsize=8.5)
    ax.tick_params(axis="y", length=0)
    ax.set_xlim(fr.x[0], fr.x[-1])


def _time_axis(fr: _Frame, engine, plan) -> None:
    """The time axis: UTC on the first line of each tick label, the site's local time on the second."""
    from matplotlib.ticker import FuncFormatter, MultipleLocator

    ax, jd_mid0 = fr.ax, fr.jd_mid0

    def utc_local(v, _pos=None):
        minutes = int(round(v * 60.0))
        loc = engine.local_time(jd_mid0 + minutes / 1440.0 + 1e-7)
        return f"{(minutes // 60) % 24:02d}:{minutes % 60:02d}\n{loc:%H:%M}"

    ax.xaxis.set_major_locator(MultipleLocator(1.0))
    ax.xaxis.set_major_formatter(FuncFormatter(utc_local))
    ax.tick_params(axis="x", labelsize=8)
    ax.grid(axis="x", color="0.88", lw=0.6, zorder=0)
    mid = engine.local_time(0.5 * (fr.t0 + fr.t1))
    off_h = mid.utcoffset().total_seconds() / 3600.0
    zone = plan.get("timezone") or engine.site.timezone
    ax.text(-0.01, -0.04, "UTC\nlocal", transform=ax.transAxes, ha="right", va="top", fontsize=8,
            fontweight="bold", color=_INK)
    ax.set_xlabel(f"time: UTC (upper line) and local time at the site (lower line: {zone}, {mid.tzname()}, "
                  f"UTC{off_h:+g} h)", fontsize=8.5)


def _draw_key(fig, instruments: dict, scale, c) -> None:
    """The key below the chart: block kinds, airmass classes (with altitudes), Sun and Moon markers."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    xlim, edges, cmap, _norm = scale
    handles, labels = [], []
    for kind in ("occultation", "rv"):
        inst = instruments.get(kind)
        handles.append(Patch(fc=KIND_COLOURS[kind], ec="white"))
        labels.append(f"{_KIND_NAME[kind]} block" + (f" ({inst})" if inst else ""))
    lo = 1.0
    for e_, col in zip(edges, cmap.colors):
        a_lo, a_hi = 90 - np.degrees(np.arccos(1 / e_)), 90 - np.degrees(np.arccos(1 / lo))
        handles.append(Patch(fc=col, ec="0.6", lw=0.5))
        labels.append(f"airmass {lo:.2f}-{e_:.2f} (altitude {a_lo:.0f}-{a_hi:.0f}°)")
        lo = e_
    handles.append(Patch(fc=_BELOW_LIMIT, ec="0.6", lw=0.5))
    labels.append(f"below the limit: airmass > {xlim:.2f} (altitude < {c.min_altitude_deg:.0f}°)"
                  + (" or the horizon mask" if c.horizon_mask else ""))
    handles.append(Patch(fc=_BELOW_HORIZON, ec="0.6", lw=0.5))
    labels.append("below the horizon")
    handles.append(Line2D([], [], marker="D", ls="", mfc=_SUN, mec=_SUN))
    labels.append("Sun: sets/rises (centre at −0.833°)")
    handles.append(Line2D([], [], marker="D", ls="", mfc="white", mec=_SUN))
    labels.append("Sun centre crosses −6 / −12 / −18°")
    handles.append(Line2D([], [], marker="o", ls="", color=_MOON))
    labels.append("Moon up (larger dot: higher)")
    fig.legend(handles, labels, loc="lower center", ncol=3, fontsize=7.3, frameon=False,
               bbox_to_anchor=(0.5, 0.0), columnspacing=1.5, handlelength=1.6)


def _draw_titles(fr: _Frame, engine, plan, blocks, order, hidden, max_targets) -> None:
    """The title (site and date) and the line below it (what the lanes show, lanes not drawn)."""
    date = plan.get("date", "")
    site = plan.get("site", engine.site.name)
    fr.fig.text(fr.left, 1.0 - 0.18 / fr.height, f"{site}: schedule for the night of {date} (local evening date)",
                fontsize=11, fontweight="bold", va="top", color=_INK)
    sub = (f"{len(blocks)} block(s) for {len(order)} target(s); one lane per target: its block(s) above "
           "(E: occultation epoch, φ: orbital phase from mid-transit), its airmass through the night below.")
    if hidden:
        sub += f" Not drawn (lane limit {max_targets}): {', '.join(hidden)}."
    fr.fig.text(fr.left, 1.0 - 0.45 / fr.height, sub + " Advisory: observatory safety limits and the site's "
                "operations rules override this plan.", fontsize=7.8, va="top", color="0.3", wrap=True)


def night_figure(engine, night, science: list[dict], plan: dict, max_targets: int = 10):
    """A matplotlib Figure of the night (see the module docstring).

    Parameters
    ----------
    engine : VisibilityEngine
        Gives Sun, Moon and target positions (deg) and local time.
    night : NightGrid
        The night (JD UTC limits).
    science : list of dict
        Science dicts with ``name``, ``ra_deg``, ``dec_deg`` (deg).
    plan : dict
        The night JSON (``blocks`` with ``name``, ``kind``, ``start_jd``, ``end_jd`` (JD UTC),
        ``airmass_max`` and ``epoch`` / ``phase``; optional ``instruments``, ``date``, ``site``,
        ``cautions``).
    max_targets : int
        Most lanes drawn (targets in the order of their first block); the rest are named in a note.

    Returns
    -------
    matplotlib.figure.Figure
        Its axes are, in order: the sky-state axes (rows "Sun" and "Moon") and the schedule axes
        (one lane per target; x in hours from 0h UTC of the evening's UTC date).
    """
    from rhofollow.report.plots.common import _plt

    _plt()  # the Agg backend
    c = engine.site.constraints
    fr = _time_grid(night)
    blocks = sorted(plan.get("blocks", []), key=lambda b: b["start_jd"])
    by_name = {s["name"]: s for s in science}
    order = [n for n in dict.fromkeys(b["name"] for b in blocks) if n in by_name]
    shown, hidden = order[:max_targets], order[max_targets:]
    n = len(shown)
    _add_axes(fr, n)
    _draw_sun_row(fr, engine, night)
    malt, _ill = _draw_moon_row(fr, engine)
    scale = _strip_scale(c)
    fr.ax.set_ylim(max(n, 1), 0)
    if shown:
        _draw_strips(fr, engine, shown, by_name, scale)
        _draw_blocks(fr, blocks, shown)
        _draw_lane_notes(fr, engine, blocks, shown, by_name, malt)
    else:
        fr.ax.text(0.5, 0.5, "no block could be scheduled this night", transform=fr.ax.transAxes, ha="center",
                   va="center", fontsize=10, color=_INK)
    _draw_lane_frame(fr, night, shown, n)
    _time_axis(fr, engine, plan)
    _draw_key(fr.fig, plan.get("instruments") or {}, scale, c)
    _draw_titles(fr, engine, plan, blocks, order, hidden, max_targets)
    return fr.fig


def plot_night(path, engine, night, science: list[dict], plan: dict, max_targets: int = 10):
    """Write :func:`night_figure` to ``path`` and close it (the format follows the file's extension).

    Parameters
    ----------
    path : str or os.PathLike
        The image file to write (PNG for ``.png``).
    engine, night, science, plan, max_targets
        As :func:`night_figure`.

    Returns
    -------
    str or os.PathLike
        ``path``.
    """
    import matplotlib.pyplot as plt

    fig = night_figure(engine, night, science, plan, max_targets)
    try:
        fig.savefig(path)
    finally:
        plt.close(fig)
    return path
