"""RV curves of one target: model draws, K summary, planned visits and measured RVs."""
from __future__ import annotations

import numpy as np

from rhofollow.core.defaults import DEFAULT_SEED
from rhofollow.core.seeds import target_rng
from rhofollow.report.plots.common import COLOURS, _plt, _title_lines


# ---------------------------------------------------------------------------------------------
# RV curves

def rv_model_draws(samples, n_draws: int = 60, n_phase: int = 241, seed: int = DEFAULT_SEED, k=None,
                   weights=None):
    """Posterior draws of the RV curve against phase from transit.

    K per sample is ``k`` when given, else the K the RV record of this target uses: drawn from the
    planet mass and the sample's e, i, M* and P (:func:`rhofollow.stages.rv.planet_mass_and_k`) with
    the record's generator for (seed, target).

    Parameters
    ----------
    samples : rhofollow.core.samples.SampleSet
        The target's weighted posterior samples.
    n_draws : int
        Number of curves D (systematic resampling by weight).
    n_phase : int
        Phase grid points over one orbit.
    seed : int
        Run seed.
    k : array, optional
        K per sample (m/s).
    weights : array, optional
        Replace the samples' weights.

    Returns
    -------
    tuple
        ``(phase (n_phase,) in orbital periods from mid-transit, eccentric curves (D, n_phase) in
        m/s, circular curves (D, n_phase) in m/s, K (D,) in m/s)``.
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
    """The very K draws behind the RV record's ``k_ms`` for this seed.

    Parameters
    ----------
    samples : rhofollow.core.samples.SampleSet
        The target's weighted posterior samples.
    seed : int
        Run seed.
    relation : str
        Mass-radius relation (as :func:`rhofollow.stages.rv.planet_mass_and_k`).

    Returns
    -------
    tuple
        ``(K per sample in m/s, weights)``.
    """
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

    Parameters
    ----------
    rv_record : dict or None
        The target's RV record.
    k : array, optional
        K draws (m/s), used without a record.
    weights : array, optional
        Their weights.

    Returns
    -------
    tuple
        ``(K median in m/s, quantile dict in m/s or None, which)``; ``which`` says whether it is
        before or after the measured RVs.
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


def _k_for_figure(samples, rec, k, w, seed):
    """``(K median, its quantiles, which)`` (m/s) the figure names: the record's K summary, or the
    measured-RV update's draws summarised the same way when the record carries no update."""
    if k is None:
        k, w_k = record_k_draws(samples, seed)
    else:
        w_k = w
    if w is not None and not rec.get("k_updated_ms"):
        # the record carries no update: summarise the update's draws the same way
        kmed, kq, _ = k_summary({}, k, w_k)
        return kmed, kq, "after the measured RVs"
    return k_summary(rec, k, w_k)


def _draw_curves(ax, samples, rec, ph, ecc, k, w, seed) -> None:
    """The eccentric draws, the circular curve with the record's K and the most informative phases."""
    from matplotlib.collections import LineCollection

    from rhofollow.physics.rv import circular_shape

    # the draws as one collection: one artist to build and draw instead of one line per draw
    ax.add_collection(LineCollection(np.stack([np.broadcast_to(ph, ecc.shape), ecc], axis=-1), colors=COLOURS["ecc"],
                                     linewidths=0.8, alpha=0.2, gid="rv-draws"))
    kmed, kq, which = _k_for_figure(samples, rec, k, w, seed)
    rng68 = f"; 68 %: {kq['q16']:.0f}-{kq['q84']:.0f} m/s" if kq else ""
    ax.plot(ph, kmed * circular_shape(ph), color=COLOURS["circ"], lw=2.2, ls="--", gid="circular-k",
            label=f"circular orbit, K = {kmed:.1f} m/s (posterior-weighted median {which}{rng68})")
    what = "updated by the measured RVs" if w is not None else "before any RV"
    ax.plot([], [], color=COLOURS["ecc"], lw=1.5, alpha=0.6,
            label=f"eccentric posterior, {what} ({ecc.shape[0]} draws)")
    for j, p in enumerate(rec.get("best_phases") or []):
        ax.axvline(p, color=COLOURS["plan"], lw=1.2, alpha=0.9, ls="-.",
                   label="most informative phases" if j == 0 else None)


def _draw_measured(ax, samples, rv_data, ph, ecc) -> float:
    """The measured RVs against phase, each instrument's offset to the median curve removed.
    Returns the half-height (m/s) they need."""
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
    return float(np.max(np.abs(v) + err)) * 1.15


def _draw_visits(ax, visits, night_phases, ymax) -> None:
    """The campaign's RV visits (triangles) and the first night's RV block (star) at their phases."""
    if visits:
        vp = [v["phase"] for v in visits if v.get("phase") is not None]
        ax.plot(vp, np.full(len(vp), -0.92 * ymax), "^", color=COLOURS["plan"], ms=8, mec="white",
                label=f"campaign RV visits ({len(vp)}), at their phase")
    if night_phases:
        ax.plot(night_phases, np.full(len(night_phases), -0.92 * ymax), "*", color="#e0a100", ms=14,
                mec="0.2", label="first night's RV block")


def _label_rv_axes(fig, ax, samples, rec, ymax) -> None:
    """Limits, axis labels, the title (visit precision and visits to confirm e > 0) and the key."""
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


def rv_figure(samples, rv_record: dict | None, visits: list | None = None, night_phases: list | None = None,
              rv_data=None, seed: int = DEFAULT_SEED):
    """Predicted RV curves (posterior draws), circular vs eccentric, with the informative phases,
    the planned visits (campaign: triangles, first night: star) and measured RVs when given.

    With measured RVs the draws come from the posterior updated by them (K and one offset per
    instrument free); the points are shown with the offsets of the median curve removed.

    Parameters
    ----------
    samples : rhofollow.core.samples.SampleSet
        The target's weighted posterior samples.
    rv_record : dict or None
        The target's RV record (``k_ms`` / ``k_updated_ms`` quantiles in m/s, ``best_phases``,
        ``sigma_rv_ms`` in m/s, ``n_epochs_confirm_ecc``, ``jitter_ms``, ``k_mode``).
    visits : list of dict, optional
        The campaign's RV visits (``phase``: orbital phase from mid-transit, 0-1).
    night_phases : list of float, optional
        Phases (0-1) of the first night's RV blocks.
    rv_data : RVData, optional
        Measured RVs (BJD_TDB days, m/s) of this target.
    seed : int
        Run seed: the figure's draws and K come from the target's generators for this seed.

    Returns
    -------
    matplotlib.figure.Figure
        One axes: phase from mid-transit (0-1) against stellar radial velocity (m/s).
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
    _draw_curves(ax, samples, rec, ph, ecc, k, w, seed)
    # y range: most draws, not the extreme ones (a broad mass prior has a long tail of large K)
    ymax = float(np.quantile(np.max(np.abs(ecc), axis=1), 0.85)) * 1.25 if ecc.size else 1.0
    if rv_data is not None:
        ymax = max(ymax, _draw_measured(ax, samples, rv_data, ph, ecc))
    n_out = int(np.sum(np.max(np.abs(ecc), axis=1) > ymax)) if ecc.size else 0
    if n_out:
        ax.text(0.99, 0.98, f"{n_out} of {ecc.shape[0]} draws run beyond the plotted range (large K)",
                transform=ax.transAxes, ha="right", va="top", fontsize=7.5, color="0.35",
                bbox={"fc": "white", "ec": "none", "alpha": 0.85, "pad": 1})
    _draw_visits(ax, visits, night_phases, ymax)
    _label_rv_axes(fig, ax, samples, rec, ymax)
    fig.tight_layout()
    return fig
