"""Occultation timing of one target: mid-time distributions of the next events and the planned windows."""
from __future__ import annotations

import datetime as _dt
import numpy as np

from rhofollow.report.plots.common import COLOURS, _fmt_q, _plt, _title_lines


# ---------------------------------------------------------------------------------------------
# occultation timing

def occultation_times(samples):
    """Epoch-0 occultation mid-times of the samples whose orbit gives an occultation.

    Parameters
    ----------
    samples : rhofollow.core.samples.SampleSet
        The target's weighted posterior samples.

    Returns
    -------
    tuple or None
        ``(t_ref, period, weights, offset)`` of the occulting samples: t_ref the epoch-0 mid-time
        (BJD_TDB, days) including the light-travel delay, period (days), weights renormalised to
        sum 1, offset = (t_ref - t0) / P the phase (orbital periods); None when no sample occults.
    """
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

    Parameters
    ----------
    samples : rhofollow.core.samples.SampleSet
        The target's weighted posterior samples.
    occ_record : dict
        The target's occultation record (``events`` with ``epoch``, ``mid_bjd_tdb``,
        ``region_bjd_tdb``, ``window_bjd_tdb`` in BJD_TDB days, ``mid_utc``; ``p_occultation``,
        ``occ_duration_h`` in hours).
    campaign_windows : list of dict, optional
        The campaign's observable blocks (``epoch``, ``start_utc``, ``end_utc``).
    max_events : int
        Most events drawn.
    coverage : float
        Credible-region probability of the run (0-1).

    Returns
    -------
    matplotlib.figure.Figure
        Axes: the occultation phase (orbital periods), then one per event (hours from the median
        mid-time).
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
    for ax, ev in zip(axes[1:], events):
        _draw_event(ax, ev, t_ref, per, w, campaign_windows or [], coverage)
    fig.tight_layout()
    return fig


def _draw_event(ax, ev: dict, t_ref, per, w, cw: list, coverage: float) -> None:
    """One event's panel: its mid-time distribution in hours from the median, the credible region,
    the window with baselines and the campaign's observable blocks of that epoch."""
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
