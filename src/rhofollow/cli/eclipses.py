"""``rhofollow eclipses``: when each occultation will happen, whether it happens, how long and
how deep it is, and the observing windows of every event in a date range."""
from __future__ import annotations

import numpy as np
from rich.text import Text

from rhofollow.cli.common import (UserError, add_assess_options, add_json_option, console,
                     load_catalogue, report_row_issues, run_assessment, write_json)
from rhofollow.cli.render import Col, FittedTable, fit_table, message, say, table_note

__all__ = ["register", "run", "parse_band", "read_filter_curve", "events_table"]


def register(subparsers) -> None:
    """Add the ``eclipses`` command (occultation timing, depth and windows) to the command-line parser.

    Parameters
    ----------
    subparsers : argparse._SubParsersAction
        The sub-command registry of the ``rhofollow`` parser.
    """
    p = subparsers.add_parser(
        "eclipses", help="occultation (secondary-eclipse) timing, depth and observing windows",
        description="Predict each candidate's occultation from its eccentricity posterior: phase, "
        "probability that it happens, duration, depth in a band, and the observing window of "
        "every event between two dates (UTC and BJD_TDB).")
    p.add_argument("catalog", metavar="CATALOG", help="candidate catalogue (CSV, ECSV or VOTable)")
    p.add_argument("--start", required=True, metavar="DATE", help="first date (UTC, ISO 8601)")
    p.add_argument("--end", required=True, metavar="DATE", help="last date (UTC, ISO 8601)")
    p.add_argument("--coverage", type=float, default=0.9, metavar="P",
                   help="probability each event's window must hold (default 0.9)")
    band = p.add_mutually_exclusive_group()
    band.add_argument("--band", metavar="MICRONS:WIDTH",
                      help="top-hat band for the depth, centre and width in microns "
                      "(default 2.15:0.32)")
    band.add_argument("--filter", metavar="FILE",
                      help="filter curve: two columns, wavelength [micron] and response")
    p.add_argument("--baseline", type=float, default=None, metavar="HOURS",
                   help="out-of-eclipse baseline before and after each window (default: the "
                   "occultation duration, at least 1 h)")
    p.add_argument("--location", metavar="LAT,LON[,HEIGHT_M]",
                   help="observer's geodetic site for the UTC times (default: the geocentre)")
    p.add_argument("--ics", metavar="PATH", help="write the windows as an iCalendar file")
    add_json_option(p)
    add_assess_options(p)
    p.set_defaults(func=run)


def parse_band(text: str) -> tuple[float, float]:
    """'4.5:1.0' -> (4.5, 1.0).

    Parameters
    ----------
    text : str
        The ``--band`` value, CENTRE:WIDTH in microns.

    Returns
    -------
    (float, float)
        Band centre and width, microns.

    Raises
    ------
    UserError
        Not two numbers (names the option).
    """
    try:
        c, w = (float(v) for v in text.split(":"))
    except ValueError:
        raise UserError(f"--band '{text}' must be CENTRE:WIDTH in microns, e.g. 4.5:1.0") from None
    return c, w


def read_filter_curve(path: str):
    """Two-column filter file (wavelength in microns, response); '#' starts a comment.

    Parameters
    ----------
    path : str
        The filter file.

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        Wavelengths (microns) and responses (unitless), at least two rows.

    Raises
    ------
    UserError
        The file is unreadable, or a line is not two numbers (names the file and line).
    """
    lam, resp = [], []
    try:
        with open(path, encoding="utf-8") as fh:
            lines = fh.readlines()
    except OSError as exc:
        raise UserError(f"{path}: cannot read the filter file ({exc.strerror})") from None
    for i, line in enumerate(lines, start=1):
        text = line.split("#", 1)[0].replace(",", " ").strip()
        if not text:
            continue
        parts = text.split()
        try:
            if len(parts) != 2:
                raise ValueError
            lam.append(float(parts[0]))
            resp.append(float(parts[1]))
        except ValueError:
            raise UserError(f"{path}, line {i}: expected two numbers (wavelength in microns, "
                            f"response), got '{line.strip()}'") from None
    if len(lam) < 2:
        raise UserError(f"{path}: the filter curve needs at least two rows")
    return np.array(lam), np.array(resp)


def _location(text):
    if not text:
        return None
    import astropy.units as u
    from astropy.coordinates import EarthLocation

    try:
        vals = [float(v) for v in text.split(",")]
        if len(vals) not in (2, 3) or not (-90 <= vals[0] <= 90):
            raise ValueError
    except ValueError:
        raise UserError(f"--location '{text}' must be LAT,LON[,HEIGHT_M] in degrees and metres"
                        ) from None
    h = vals[2] if len(vals) == 3 else 0.0
    return EarthLocation.from_geodetic(vals[1] * u.deg, vals[0] * u.deg, h * u.m)


def _q(d, nd=2, scale=1.0):
    if not d or d.get("q50") is None:
        return "—"
    return (f"{d['q50'] * scale:.{nd}f} [{d['q16'] * scale:.{nd}f}, "
            f"{d['q84'] * scale:.{nd}f}]")


def band_label(band: dict | None) -> str:
    """'2.15 µm' for a top-hat band, 'filter 1.9–2.4 µm' for a filter curve.

    Parameters
    ----------
    band : dict or None
        The result's band (``center_um``, or ``filter`` with ``min_um`` / ``max_um``, microns).

    Returns
    -------
    str
        The label ('band ?' when unknown).
    """
    band = band or {}
    if band.get("filter"):
        return f"filter {band['min_um']:g}–{band['max_um']:g} µm"
    if "center_um" in band:
        return f"{band['center_um']:g} µm"
    return "band ?"


def events_table(result: dict, width: int = 80) -> FittedTable:
    """Terminal table: one row per target with its first window; columns chosen for ``width``.

    Parameters
    ----------
    result : dict
        The occultation result of :func:`rhofollow.stages.occultations.predict_occultations`.
    width : int
        Terminal width, in character cells.

    Returns
    -------
    FittedTable
        The table (times UTC, durations h, depths ppm).
    """
    band = band_label(result.get("band"))
    cols = [Col("target", justify="left"), Col("phase [68%]", compact_header="phase", what="phase interval"),
            Col("P(occ)"), Col("duration h\n[68%]", compact_header="duration\nh", what="duration interval", drop=2),
            Col(f"depth ppm @ {band}\n[68%]", compact_header=f"depth ppm\n@ {band}", drop=1,
                what="depth interval"),
            Col("events", drop=3), Col("next window (UTC)", justify="left", wrap=True)]
    rows = []
    for r in result["targets"]:
        if not r.get("ok"):
            rows.append([r["name"], *["—"] * 5, Text("not assessed (see errors)", style="red")])
            continue
        evs = r.get("events", [])
        nxt = "—"
        if evs:
            w = evs[0].get("window_utc")
            if w:
                nxt = "; ".join(f"{a[:16].replace('T', ' ')} → {b[11:16]}" if a[:10] == b[:10]
                                else f"{a[:16].replace('T', ' ')} → {b[:16].replace('T', ' ')}" for a, b in w)
            else:
                nxt = "; ".join(f"BJD {a:.3f} → {b:.3f}" for a, b in evs[0]["window_bjd_tdb"])
        rows.append([r["name"] + (" ?" if r.get("reliable") is False else ""), _q2(r.get("occ_phase"), 3), f"{r.get('p_occultation', 0):.2f}",
                     _q2(r.get("occ_duration_h"), 2), _q2(r.get("depth_ppm"), 0), str(len(evs)), nxt])
    return fit_table("Occultations (medians; [68 %] intervals)", cols, rows, width)


def _q2(d, nd):
    """(full, compact) forms of a median with its 68 % interval."""
    full = _q(d, nd)
    if full == "—":
        return full
    return full, f"{d['q50']:.{nd}f}"


def run(args) -> int:
    """Run ``rhofollow eclipses``: predict every occultation between --start and --end, print them.

    Parameters
    ----------
    args : argparse.Namespace
        The parsed options of the command (see :func:`register`).

    Returns
    -------
    int
        The exit status (0: success; see :func:`rhofollow.stages.records.envelope` for the others).
    """
    from rhofollow.stages.occultations import EclipseInputError, EclipseOptions, predict_occultations

    opts = EclipseOptions(coverage=args.coverage, baseline_h=args.baseline,
                          location=_location(args.location))
    if args.band:
        opts.band = parse_band(args.band)
    if args.filter:
        opts.filter_curve = read_filter_curve(args.filter)
    if args.baseline is not None and not args.baseline >= 0:
        raise UserError("--baseline must be zero or a positive number of hours")
    # Check the cheap options before the expensive assessment.
    try:
        predict_occultations([], args.start, args.end, opts)
    except EclipseInputError as exc:
        raise UserError(f"{exc}") from None

    cat = load_catalogue(args.catalog)
    report_row_issues(cat, quiet=True)
    assessments = run_assessment(cat.targets, args, label="assessing")
    result = predict_occultations(assessments, args.start, args.end, opts)
    from rhofollow.stages.records import envelope

    doc = envelope("eclipses", catalogue=cat, seed=args.seed, targets=result["targets"],
                   caution=result["caution"],
                   payload={k: v for k, v in result.items() if k not in ("targets", "caution")})

    fitted = events_table(result, console().width)
    console().print(fitted.table)
    table_note(fitted)
    if any(r.get("reliable") is False for r in result["targets"]):
        say("?: unreliable quantiles (effective sample size below the floor)", style="dim")
    for r in result["targets"]:
        for msg in r.get("errors", []):
            message(f"{r['name']}: {msg}", "error")
        for msg in r.get("warnings", []):
            message(f"{r['name']}: {msg}", "warning")
    for msg in result.get("notices", []):
        message(msg, "notice")
    say(result["caution"], style="italic")
    if args.json:
        write_json(args.json, doc)
    if args.ics:
        from rhofollow.io.calendar import write_ics

        write_ics(args.ics, doc)
    return doc["exit_status"]
