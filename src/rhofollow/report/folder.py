"""Write the report folder of a ``plan`` run.

Layout::

    summary.md  summary.html  results.json  results.ecsv  results.csv  night.json  campaign.json
    windows.ics  samples/<target>.ecsv (or .fits)  plots/*.png

The sample files are ECSV or FITS binary tables (:mod:`rhofollow.report.sample_files`,
``--sample-format``; ``auto``: ECSV up to ``AUTO_FITS_ABOVE`` targets, FITS above); results.json
(``sample_files``) and summary.md say which. With more than one worker a process pool writes them.

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
    """File-name stem of a target name (unique and bounded, see :func:`rhofollow.io.safety.file_stem`).

    Parameters
    ----------
    name : str
        The target name.

    Returns
    -------
    str
        The stem of its per-target files.
    """
    return file_stem(name)


def check_report_folder(out_dir) -> Path:
    """Check that ``out_dir`` can take a report: missing, empty, or an earlier report folder.

    A folder holding anything else is refused rather than replaced, so pointing ``--out`` at a
    folder of one's own never deletes its files.

    Parameters
    ----------
    out_dir : str or os.PathLike
        The report folder.

    Returns
    -------
    pathlib.Path
        ``out_dir``; :class:`ReportFolderError` when it cannot take a report.
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
    the module notes). A full disk raises :class:`rhofollow.io.atomic.NoSpaceError` with
    ``out_dir`` unchanged.

    Parameters
    ----------
    result : rhofollow.pipeline.PipelineResult
        The finished run.
    out_dir : str or os.PathLike
        The report folder (see :func:`check_report_folder`).
    **kw
        ``plot_targets``, ``rv_data``, ``progress``, ``sample_format`` as :func:`write_report_files`.

    Returns
    -------
    dict
        As :func:`write_report_files`; ``files`` are the final paths inside ``out_dir``.
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


class _Figures:
    """Writes the report's figures into ``plots/`` and collects them per summary section."""

    def __init__(self, out: Path, files: list, adv):
        self.out, self.files, self.adv = out, files, adv
        self.md: dict[str, list[str]] = {}
        self.html: dict[str, list[tuple[str, bytes]]] = {}

    def add(self, section: str, name: str, fig, caption: str) -> None:
        """Write a figure to ``plots/name`` and list it under ``section``.

        Parameters
        ----------
        section : str
            Summary section title.
        name : str
            PNG file name inside ``plots/``.
        fig : matplotlib.figure.Figure or bytes
            The figure (rendered and closed here), or its PNG bytes rendered elsewhere.
        caption : str
            Its caption in the HTML summary.
        """
        png = fig if isinstance(fig, bytes) else save_figure(fig)
        self.files.append(atomic_write_bytes(self.out / "plots" / name, png))
        self.md.setdefault(section, []).append(f"plots/{name}")
        self.html.setdefault(section, []).append((caption, png))
        self.adv(1)


def _write_tables(result, out: Path, files: list, sample_note: dict):
    """results.json / .ecsv / .csv, night.json, campaign.json and windows.ics (``sample_note``: how
    the sample files are written, :func:`~rhofollow.report.sample_files.sample_files_note`); returns
    ``(doc, ranking, periods)`` (periods: target name -> posterior-mean period in days)."""
    from rhofollow.io.jsonout import write_json
    from rhofollow.planning.campaign import to_ical
    from rhofollow.report.summary import CAUTIONS, assumptions
    from rhofollow.report.tables import flat_rows, rank_targets, results_document, rows_to_csv, rows_to_ecsv

    ranking = rank_targets(result)
    doc = results_document(result, ranking, [], list(CAUTIONS))
    doc["assumptions"] = assumptions(doc, (result.campaign or {}).get("scheduler"))
    doc["sample_files"] = sample_note
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
    return doc, ranking, periods


def _figure_targets(result, ok, ranking, plot_targets: int):
    """``(ranked, chosen)``: the assessed targets in rank order, and those that get per-target figures.

    No per-target figures for a target that never climbs above the site's altitude limit (its
    warning says why): the planners' list, and the geometric check for results built without it.
    """
    from rhofollow.report.plots import rises_at_site

    ranked = sorted((a for a in ok if ranking.get(a.name, {}).get("rank")), key=lambda a: ranking[a.name]["rank"])
    never = getattr(result, "unreachable", {}) or {}
    site = getattr(result.engine, "site", None)
    plottable = [a for a in ranked if a.name not in never
                 and (site is None or rises_at_site(a.samples.meta.get("dec_deg"), site))]
    return ranked, (plottable if plot_targets <= 0 else plottable[:plot_targets])


def _run_figures(figs: _Figures, result, ranked, periods) -> None:
    """The figures of the whole run: catalogue overview, first night, campaign calendar."""
    from rhofollow.report import plots
    from rhofollow.report.schedule_chart import night_figure

    figs.add("Catalogue overview", "overview.png",
             plots.overview_figure([a.record for a in result.assessments], periods),
             "Density ratio against period, coloured by P(e > 0.1)")
    if result.night is not None:
        figs.add("First night", "night_altitude.png",
                 night_figure(result.engine, result.night_grid, result.stages.science, result.night),
                 f"Schedule of the night of {result.night.get('date')}: the chosen blocks per target over each "
                 "target's airmass")
    figs.add("Campaign", "campaign_calendar.png",
             plots.campaign_figure(result.campaign, result.nights, [a.name for a in ranked]),
             "Occultation windows and RV visits per night, targets in rank order")


def _target_figures(figs: _Figures, result, chosen, ranking, rv_data, meanwhile) -> None:
    """Density, (e, omega), occultation and RV figures of each chosen target, in rank order, rendered by
    :mod:`rhofollow.report.target_figures` (a process pool with more than one worker, while
    ``meanwhile`` draws the run-level figures here)."""
    from rhofollow.report.target_figures import FIGURE_KINDS, render_target_figures

    for a, pngs in render_target_figures(result, chosen, rv_data, workers=result.options.workers,
                                         meanwhile=meanwhile):
        n, sec = slug(a.name), f"{a.name} (rank {ranking[a.name]['rank']})"
        for (kind, caption), png in zip(FIGURE_KINDS, pngs):
            figs.add(sec, f"{n}_{kind}.png", png, caption)


def write_report_files(result, out_dir, *, plot_targets: int = 10, rv_data: dict | None = None,
                       progress=None, sample_format: str = "auto") -> dict:
    """Write every report file of ``result`` into the folder ``out_dir`` as it is (no swap;
    :func:`write_report` calls this on a temporary folder).

    Parameters
    ----------
    result : rhofollow.pipeline.PipelineResult
        The finished ``plan`` run.
    out_dir : str or os.PathLike
        The folder to write into (created when missing).
    plot_targets : int
        Per-target figures for this many top-ranked targets (0: all assessed targets).
    rv_data : dict, optional
        Target name -> measured RVs (BJD_TDB days, m/s), drawn on the RV figures.
    progress : callable, optional
        ``progress(label, total)`` returning ``advance(k=1)``.
    sample_format : str
        ``"auto"``, ``"ecsv"`` or ``"fits"``: the sample files' format
        (:func:`rhofollow.report.sample_files.resolve_sample_format` of the number of assessed targets).

    Returns
    -------
    dict
        ``doc`` (the results.json document), ``files`` (paths written), ``ranking`` and
        ``sample_format`` (the format used).
    """
    from rhofollow.report.sample_files import resolve_sample_format, sample_files_note, write_sample_files
    from rhofollow.report.summary import html_summary, markdown_summary

    progress = progress or (lambda label, total: (lambda k=1: None))
    out = Path(out_dir)
    (out / "plots").mkdir(parents=True, exist_ok=True)
    (out / "samples").mkdir(parents=True, exist_ok=True)
    files = []
    fmt = resolve_sample_format(sample_format, len(result.assessments))
    doc, ranking, periods = _write_tables(result, out, files, sample_files_note(sample_format, fmt))

    ok = [a for a in result.assessments if a.ok and a.samples is not None]
    files += write_sample_files([(a.name, a.samples) for a in ok], out / "samples", fmt,
                                workers=result.options.workers, progress=progress("writing samples", len(ok)))

    # figures: run-level first, then per target in rank order
    ranked, chosen = _figure_targets(result, ok, ranking, plot_targets)
    figs = _Figures(out, files, progress("plotting", 3 + 4 * len(chosen)))
    _target_figures(figs, result, chosen, ranking, rv_data, lambda: _run_figures(figs, result, ranked, periods))

    files.append(_text(out / "summary.md", markdown_summary(doc, figs.md, result.night)))
    files.append(_text(out / "summary.html", html_summary(doc, figs.html, result.night)))
    return {"doc": doc, "files": [Path(f) for f in files], "ranking": ranking, "sample_format": fmt}
