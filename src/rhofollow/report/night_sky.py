"""The sky-state rows of the night's schedule chart (:mod:`rhofollow.report.schedule_chart`).

The Sun row marks sunset, the -6 / -12 / -18 deg crossings of the Sun's centre and sunrise with
labelled markers, and a bar spans the night the plan uses; the Moon row shows the Moon as dots while
it is up (dot size grows with its altitude), its rise and set, its highest altitude and its
illuminated fraction. Both draw on the chart's frame (its time grid and sky axes).
"""
from __future__ import annotations

import numpy as np

_SUN = "#c8891c"
_NIGHT_BAR = "#24305e"
_MOON = "#7d7a6e"
#: Sun-centre altitudes (deg) marked on the Sun row.
_SUN_LEVELS = [(-0.833, "sunset", "sunrise"), (-6.0, "−6°", "−6°"), (-12.0, "−12°", "−12°"),
               (-18.0, "−18°", "−18°")]


def _minus(v: float) -> str:
    """A number with a typographic minus sign."""
    return f"{v:g}".replace("-", "−")


def _crossings(t, y, level):
    """Times where ``y`` crosses ``level`` (linear interpolation): list of (time, rising)."""
    d = y - level
    out = []
    for i in np.flatnonzero(np.sign(d[:-1]) * np.sign(d[1:]) < 0):
        f = d[i] / (d[i] - d[i + 1])
        out.append((t[i] + f * (t[i + 1] - t[i]), bool(d[i + 1] > d[i])))
    return out


def _draw_sun_row(fr, engine, night) -> None:
    """Sun row (y = 0): the night the plan uses as a bar, sunset / twilight crossings / sunrise marked."""
    from matplotlib.patches import Rectangle

    ax_sky, xh, c = fr.ax_sky, fr.xh, engine.site.constraints
    ax_sky.set_ylim(1.6, -0.6)
    sun = engine.sun_altitude(fr.t)
    ax_sky.axhline(0.0, color="0.8", lw=0.8, zorder=1)
    lim = c.sun_altitude_limit_deg
    if np.isfinite(night.start_jd) and np.isfinite(night.end_jd) and night.duration_hours > 0:
        ax_sky.add_patch(Rectangle((xh(night.start_jd), -0.13), xh(night.end_jd) - xh(night.start_jd), 0.26,
                                   fc=_NIGHT_BAR, ec="none", zorder=2, gid="night-bar"))
        ax_sky.text(0.5 * (xh(night.start_jd) + xh(night.end_jd)), 0.0,
                    f"night used by the plan: Sun below {_minus(lim)}° ({c.twilight} twilight limit), "
                    f"{night.duration_hours:.1f} h", color="white", fontsize=7.5, ha="center", va="center",
                    zorder=3)
    events = []
    for k, (level, eve, morn) in enumerate(_SUN_LEVELS):
        for jd, rising in _crossings(fr.t, sun, level):
            events.append((jd, morn if rising else eve, k))
    events.sort()
    for j, (jd, lab, k) in enumerate(events):
        ax_sky.plot([xh(jd)], [0.0], marker="D", ms=5.5 - 0.6 * k, mfc=_SUN if k == 0 else "white",
                    mec=_SUN, mew=1.3, ls="", zorder=4, gid="twilight-marker")
        up = (j % 2 == 0)
        ax_sky.text(xh(jd), -0.24 if up else 0.26, lab, fontsize=6.8, ha="center", va="bottom" if up else "top",
                    color=_SUN if k == 0 else "0.3", zorder=4)


def _draw_moon_row(fr, engine) -> tuple[np.ndarray, float]:
    """Moon row (y = 1): dots while it is up, rise and set, its highest altitude; then the row names.

    Returns the Moon's altitude (deg) on the time grid and its mean illuminated fraction.
    """
    ax_sky, t, x, xh = fr.ax_sky, fr.t, fr.x, fr.xh
    moon = engine.moon(t)
    malt = moon["alt_deg"]
    ill = float(np.nanmean(moon["illumination"]))
    ax_sky.axhline(1.0, color="0.85", lw=0.8, zorder=1)
    step = max(1, int(round(len(t) / ((fr.t1 - fr.t0) * 24 * 6))))  # a dot every ~10 minutes
    sel = np.arange(0, len(t), step)
    up_sel = sel[malt[sel] > 0]
    if up_sel.size:
        ax_sky.scatter(x[up_sel], np.ones(up_sel.size), s=6 + 60 * np.clip(malt[up_sel], 0, 90) / 90,
                       color=_MOON, alpha=0.5 + 0.5 * ill, lw=0, zorder=3, gid="moon-dots")
        top_i = int(np.argmax(malt))
        ax_sky.text(x[top_i], 1.3, f"{malt[top_i]:.0f}°", fontsize=6.8, ha="center", va="top", color=_MOON)
    for jd, rising in _crossings(t, malt, 0.0):
        ax_sky.plot([xh(jd)], [1.0], marker="^" if rising else "v", ms=6, color=_MOON, ls="", zorder=4,
                    gid="moon-rise-set")
        ax_sky.text(xh(jd), 0.7, "moonrise" if rising else "moonset", fontsize=6.8, ha="center",
                    va="bottom", color=_MOON)
    if not up_sel.size:
        ax_sky.text(x[len(x) // 2], 1.0, "Moon below the horizon all night", fontsize=7, ha="center",
                    va="center", color=_MOON, bbox={"fc": "white", "ec": "none", "pad": 1})
    ax_sky.set_yticks([0, 1])
    ax_sky.set_yticklabels(["Sun", f"Moon\n{100 * ill:.0f}% lit"], fontsize=8)
    ax_sky.tick_params(axis="y", length=0)
    ax_sky.tick_params(axis="x", which="both", bottom=False, labelbottom=False)
    for s in ("top", "right", "left"):
        ax_sky.spines[s].set_visible(False)
    ax_sky.spines["bottom"].set_color("0.75")
    ax_sky.grid(axis="x", color="0.92", lw=0.6, zorder=0)
    return malt, ill
