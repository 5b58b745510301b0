"""Shared pieces of the report figures: palette, colour maps, the pyplot handle, quantile text, site helpers,
titles folded to the figure width."""
from __future__ import annotations

import functools

import numpy as np


#: Our palette: circular-orbit quantities warm, the independent star cool, plans green.
COLOURS = {"circ": "#c0603a", "star": "#2f6f8f", "ecc": "#2f6f8f", "plan": "#4f7d2c",
           "occ": "#b5532f", "rv": "#2a7f86", "ink": "#222222", "grid": "#d9d9d9"}

_PROB_STOPS = ["#f6f1e4", "#d9e8c9", "#8cc5b0", "#3f8f9f", "#2d4f7c", "#24153f"]


def highest_altitude_deg(dec_deg, latitude_deg):
    """Geometric altitude (deg) of a target at upper culmination: 90 - |latitude - declination|.

    Common practice, no source (spherical astronomy of the meridian transit). NaN in, NaN out.

    Parameters
    ----------
    dec_deg : float or array
        Declination (deg).
    latitude_deg : float or array
        Site latitude (deg).

    Returns
    -------
    numpy.ndarray
        Altitude at upper culmination (deg).
    """
    return 90.0 - np.abs(np.asarray(latitude_deg, float) - np.asarray(dec_deg, float))


def rises_at_site(dec_deg, site) -> bool:
    """False when the target never climbs above the site's altitude limit (per-target plots skip it);
    True when it does or when its declination is unknown.

    Parameters
    ----------
    dec_deg : float or None
        Declination (deg); None or NaN when unknown.
    site : rhofollow.planning.site.Site
        The site (latitude and altitude limit in deg).

    Returns
    -------
    bool
    """
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


@functools.lru_cache(maxsize=4096)
def _text_width_pt(text: str, fontsize: float) -> float:
    """Rendered width of ``text`` in points at ``fontsize`` (matplotlib's own text metrics).

    Cached: a report measures the same title words for every target, and each measurement shapes
    the text with the font."""
    from matplotlib.font_manager import FontProperties

    w, _, _ = _text_to_path().get_text_width_height_descent(text, FontProperties(size=fontsize), ismath=False)
    return float(w)


@functools.lru_cache(maxsize=1)
def _text_to_path():
    from matplotlib.textpath import TextToPath

    return TextToPath()


def _title_lines(text: str, fig, fontsize: float = 9.5, share: float = 0.94, max_lines: int = 5) -> str:
    """``text`` folded into lines no wider than ``share`` of the figure, measured with matplotlib's
    text metrics: words move to the next line, and a word (a long target name) wider than a line
    breaks inside, so a title never runs off the figure whatever the name. Beyond ``max_lines``
    lines the title ends in an ellipsis, so the axes keep their room (tight_layout stays
    applicable). A text that fits on one line is measured once."""
    limit = fig.get_figwidth() * 72 * share
    if not text.startswith(" ") and _text_width_pt(text, fontsize) <= limit:
        return text
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
