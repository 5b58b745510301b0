"""Write the report folder of a ``plan`` run.

Layout::

    summary.md  summary.html  results.json  results.ecsv  results.csv  night.json  campaign.json
    windows.ics  samples/<target>.ecsv  plots/*.png

Every file is written into a fresh temporary folder beside the target folder, which is swapped
in by renaming once the whole report is there (the folder it replaces is kept until then, and
removed after). So a folder with a summary is a complete one, files of an earlier run never
stay behind, and an interrupted run leaves the earlier report untouched and no half folder.
Per-target file names are :func:`rhofollow.io.safety.file_stem` of the name: unique and bounded.
"""
from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path

from rhofollow.io.atomic import NoSpaceError, is_no_space, new_dir_mode
from rhofollow.io.safety import file_stem
from rhofollow.report.files import atomic_write_bytes, save_figure
from rhofollow.errors import OutputError

__all__ = ["write_report", "slug", "REPORT_FILES", "ReportFolderError", "check_report_folder"]

#: Files every report folder holds (besides samples/ and plots/).
REPORT_FILES = ("summary.md", "summary.html", "results.json", "results.ecsv", "results.csv", "night.json",
                "campaign.json", "windows.ics",
                # written after the folder by ``plan --table`` (rhofollow.report.proposal)
                "proposal_table.md", "proposal_table.tex", "proposal_table.csv")
_REPORT_DIRS = ("samples", "plots")


class ReportFolderError(OutputError):
    """The report folder cannot be (re)placed: it is a file, or holds files not of a report."""


def slug(name: str) -> str:
    """File-name stem of a target name (unique and bounded, see :func:`rhofollow.io.safety.file_stem`)."""
    return file_stem(name)


def check_report_folder(out_dir) -> Path:
    """Check that ``out_dir`` can take a report: missing, empty, or an earlier report folder.

    A folder holding anything else is refused rather than replaced, so pointing ``--out`` at a
    folder of one's own never deletes its files.
    """
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise ReportFolderError(f"{out} exists and is not a folder; choose another --out")
    if out.is_dir():
        foreign = sorted(p.name for p in out.iterdir()
                         if not (p.name in REPORT_FILES and p.is_file())
                         and not (p.name in _REPORT_DIRS and p.is_dir()))
        if foreign:
            shown = ", ".join(foreign[:5]) + (f" and {len(foreign) - 5} more" if len(foreign) > 5 else "")
            raise ReportFolderError(f"{out} holds files that are not part of a report ({shown}); it would be "
                                    "replaced as a whole, so choose a new or empty folder for --out")
    return out


def _text(path: Path, text: str) -> Path:
    return atomic_write_bytes(path, text.encode("utf-8"))


def write_report(result, out_dir, **kw) -> dict:
    """Write every report file of ``result`` (:class:`rhofollow.pipeline.PipelineResult`) into ``out_dir``.

    The report is built in a temporary folder beside ``out_dir`` and swapped in at the end (see
    the module notes); keyword arguments as :func:`write_report_files`. The returned ``files``
    are the final paths inside ``out_dir``. A full disk raises
    :class:`rhofollow.io.atomic.NoSpaceError` with ``out_dir`` unchanged.
    """
    out = check_report_folder(out_dir).absolute()
    parent = out.parent
    try:
        parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=f".{out.name[:100]}.", suffix=".partdir", dir=parent))
    except OSError as exc:
        if is_no_space(exc):
            raise NoSpaceError(parent, f"nothing was written ({out} is unchanged)") from exc
        raise
    old = None
    try:
        os.chmod(tmp, new_dir_mode())
        written = write_report_files(result, tmp, **kw)
        if out.exists():
            old = Path(tempfile.mkdtemp(prefix=f".{out.name[:100]}.", suffix=".old", dir=parent))
            os.replace(out, old / "report")
        os.replace(tmp, out)
    except BaseException as exc:
        if old is not None and (old / "report").exists() and not out.exists():
            os.replace(old / "report", out)     # put the earlier report back
        shutil.rmtree(tmp, ignore_errors=True)
        if old is not None:
            shutil.rmtree(old, ignore_errors=True)
        if isinstance(exc, OSError) and is_no_space(exc):
            raise NoSpaceError(parent, f"nothing was written ({out} is unchanged)") from exc
        raise
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)
    written["files"] = [out / Path(f).relative_to(tmp) for f in written["files"]]
    return written


def write_report_files(result, out_dir, *, plot_targets: int = 10, rv_data: dict | None = None,
                       progress=None) -> dict:
    """Write every report file of ``result`` (:class:`rhofollow.pipeline.PipelineResult`) into the
    folder ``out_dir`` as it is (no swap; :func:`write_report` calls this on a temporary folder).

    Parameters
    ----------
    plot_targets : per-target figures for this many top-ranked targets (0: all assessed targets)
    rv_data : target name -> measured RVs, drawn on the RV figures
    progress : optional ``progress(label, total)`` returning ``advance(k=1)``

    Returns
    -------
    dict with ``doc`` (the results.json document), ``files`` (paths written) and ``ranking``.
    """
    from rhofollow.io.jsonout import write_json
    from rhofollow.report.schedule_chart import night_figure
    from rhofollow.planning.campaign import to_ical
    from rhofollow.report import plots
    from rhofollow.report.summary import CAUTIONS, assumptions, html_summary, markdown_summary
    from rhofollow.report.tables import flat_rows, rank_targets, results_document, rows_to_csv, rows_to_ecsv

    progress = progress or (lambda label, total: (lambda k=1: None))
    out = Path(out_dir)
    (out / "plots").mkdir(parents=True, exist_ok=True)
    (out / "samples").mkdir(parents=True, exist_ok=True)
    files = []
    ranking = rank_targets(result)
    doc = results_document(result, ranking, [], list(CAUTIONS))
    doc["assumptions"] = assumptions(doc)
    periods = {a.name: float((a.samples.weights * a.samples.period).sum()) for a in result.assessments if a.ok}

    files.append(write_json(out / "results.json", doc))
    rows = flat_rows(doc, periods)
    meta = {"site": doc["site"], "start": doc["start"], "end": doc["end"], "seed": doc["seed"],
            "samples": doc["samples"], "prior": doc["prior"], "priority_rule": doc["priority_rule"]}
    files.append(_text(out / "results.ecsv", rows_to_ecsv(rows, meta)))
    files.append(_text(out / "results.csv", rows_to_csv(rows)))
    if result.night is not None:
        files.append(write_json(out / "night.json", result.night))
    files.append(write_json(out / "campaign.json", result.campaign))
    files.append(atomic_write_bytes(out / "windows.ics", to_ical(result.campaign_plan)))

    ok = [a for a in result.assessments if a.ok and a.samples is not None]
    adv = progress("writing samples", len(ok))
    for a in ok:
        files.append(_text(out / "samples" / f"{slug(a.name)}.ecsv", a.samples.to_ecsv_text()))
        adv(1)

    # figures: run-level first, then per target in rank order
    ranked = sorted((a for a in ok if ranking.get(a.name, {}).get("rank")), key=lambda a: ranking[a.name]["rank"])
    # no per-target figures for a target that never climbs above the site's altitude limit (its
    # warning says why): the planners' list, and the geometric check for results built without it
    never = getattr(result, "unreachable", {}) or {}
    site = getattr(result.engine, "site", None)
    plottable = [a for a in ranked if a.name not in never
                 and (site is None or plots.rises_at_site(a.samples.meta.get("dec_deg"), site))]
    chosen = plottable if plot_targets <= 0 else plottable[:plot_targets]
    adv = progress("plotting", 3 + 4 * len(chosen))
    figs_md: dict[str, list[str]] = {}
    figs_html: dict[str, list[tuple[str, bytes]]] = {}

    def add(section, name, fig, caption):
        png = save_figure(fig, out / "plots" / name)
        files.append(out / "plots" / name)
        figs_md.setdefault(section, []).append(f"plots/{name}")
        figs_html.setdefault(section, []).append((caption, png))
        adv(1)

    add("Catalogue overview", "overview.png", plots.overview_figure([a.record for a in result.assessments], periods),
        "Density ratio against period, coloured by P(e > 0.1)")
    if result.night is not None:
        add("First night", "night_altitude.png",
            night_figure(result.engine, result.night_grid, result.stages.science, result.night),
            f"Schedule of the night of {result.night.get('date')}: the chosen blocks per target over each target's airmass")
    add("Campaign", "campaign_calendar.png",
        plots.campaign_figure(result.campaign, result.nights, [a.name for a in ranked]),
        "Occultation windows and RV visits per night, targets in rank order")
    occ = {r["name"]: r for r in result.occultations["targets"]}
    rv = {r["name"]: r for r in result.rv}
    camp = {t["name"]: t for t in result.campaign["targets"]}
    night_phases = {}
    for b in (result.night or {}).get("blocks", []):
        if b.get("kind") == "rv" and b.get("phase") is not None:
            night_phases.setdefault(b["name"], []).append(b["phase"])
    for a in chosen:
        s, n = a.samples, slug(a.name)
        sec = f"{a.name} (rank {ranking[a.name]['rank']})"
        add(sec, f"{n}_density.png", plots.density_figure(a.record), "Circular-orbit vs independent density")
        add(sec, f"{n}_ecc_omega.png", plots.ecc_omega_figure(s, a.record), "Eccentricity posterior")
        add(sec, f"{n}_occultation.png",
            plots.occultation_figure(s, occ.get(a.name, {}), camp.get(a.name, {}).get("occultation_windows"),
                                     coverage=result.options.coverage),
            "Occultation phase and the timing of the next events")
        add(sec, f"{n}_rv.png",
            plots.rv_figure(s, rv.get(a.name), camp.get(a.name, {}).get("rv_visits"), night_phases.get(a.name),
                            (rv_data or {}).get(a.name), seed=result.options.seed),
            "Predicted RV curves, informative phases and planned visits")

    files.append(_text(out / "summary.md", markdown_summary(doc, figs_md, result.night)))
    files.append(_text(out / "summary.html", html_summary(doc, figs_html, result.night)))
    return {"doc": doc, "files": [Path(f) for f in files], "ranking": ranking}
