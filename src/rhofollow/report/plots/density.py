"""The circular-orbit density against the independent stellar density (one target)."""
from __future__ import annotations

import numpy as np

from rhofollow.report.plots.common import COLOURS, _fmt_q, _plt, _q, _title_lines


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

    Parameters
    ----------
    record : dict
        The assessment record (densities in g/cm3, quantile objects).

    Returns
    -------
    matplotlib.figure.Figure
        One axes: density (g/cm3, log scale) against probability density per ln rho.
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
