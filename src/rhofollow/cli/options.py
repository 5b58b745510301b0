"""Options and argument loading shared by several commands (no command imports another).

* :func:`add_report_options`: the options of ``plan`` and ``demo``;
* :func:`load_site_arg`: the ``--site`` file, as a :class:`rhofollow.planning.site.Site`;
* :func:`demo_paths`, :func:`site_evening_date`, :data:`DEMO_DAYS`: the bundled demo scenario and its
  date range (``plan`` without a catalogue, ``demo``).

The options of the assessment and of the night and campaign planners are in :mod:`rhofollow.cli.common`.
"""
from __future__ import annotations

import datetime as dt
from pathlib import Path

from rhofollow.cli.common import UserError, add_sample_format_option, add_seed_option
from rhofollow.core.defaults import DEFAULT_SAMPLES, DEFAULT_SIMS, QUICK_SAMPLES, QUICK_SIMS

__all__ = ["add_report_options", "load_site_arg", "demo_paths", "site_evening_date", "DEMO_DAYS",
           "add_hours_option", "parse_hours", "MAX_NIGHTS", "night_range"]

#: Most nights one campaign (or one reachable-epoch RV estimate) may span; split longer ranges.
MAX_NIGHTS = 400

#: Length of the demo's date range (days from today).
DEMO_DAYS = 60


def add_report_options(p, demo: bool = False) -> None:
    """Options shared by ``plan`` and ``demo``.

    Parameters
    ----------
    p : argparse.ArgumentParser
        The command's parser.
    demo : bool
        The ``demo`` form: no catalogue, site or dates; shorter defaults.
    """
    from rhofollow.physics.priors import DEFAULT_PRIOR

    if not demo:
        p.add_argument("catalog", metavar="CATALOG", nargs="?",
                       help="target catalogue (CSV, ECSV or VOTable); omit for the bundled demo")
        p.add_argument("--site", metavar="FILE", help="site file (TOML); required with a catalogue")
        p.add_argument("--start", metavar="YYYY-MM-DD", help="local date of the first evening")
        p.add_argument("--end", metavar="YYYY-MM-DD", help="local date of the last evening")
    p.add_argument("--out", metavar="DIR", default="rhofollow-report" if demo else None,
                   required=not demo, help="report folder (created, or an earlier report folder replaced as a whole)"
                   + (" (default ./rhofollow-report)" if demo else ""))
    samples = QUICK_SAMPLES if demo else DEFAULT_SAMPLES
    p.add_argument("--samples", type=int, default=samples, metavar="N",
                   help=f"posterior samples per target (default {samples})")
    p.add_argument("--ecc-prior", default=DEFAULT_PRIOR, metavar="NAME[:PARAMS]",
                   help=f"eccentricity prior (default {DEFAULT_PRIOR}; see `rhofollow assess --help`)")
    p.add_argument("--no-transit-weight", action="store_true",
                   help="do not weight the prior by the transit probability")
    p.add_argument("--workers", type=int, default=None, metavar="N",
                   help="processes for the per-target work (default: one per CPU core, at most 8, "
                   "for 16 targets or more, else 1; results identical to 1 worker)")
    p.add_argument("--dask", metavar="ADDRESS",
                   help="send the per-target work to this dask.distributed scheduler (e.g. tcp://host:8786)")
    p.add_argument("--rv-data", metavar="PATH",
                   help="measured RVs: a folder of <target>.csv / .ecsv files, or one file with a 'target' column")
    sims = QUICK_SIMS if demo else DEFAULT_SIMS
    p.add_argument("--sims", type=int, default=sims, metavar="N",
                   help=f"simulated null data sets per RV test (default {sims})")
    add_hours_option(p)
    p.add_argument("--plot-targets", type=int, default=10, metavar="N",
                   help="per-target figures for the N highest-ranked targets (0: all; default 10)")
    add_sample_format_option(p)
    add_seed_option(p)


def load_site_arg(path):
    """The site file named by ``--site``.

    Parameters
    ----------
    path : str or path-like
        The site file (TOML).

    Returns
    -------
    rhofollow.planning.site.Site
        The validated site.

    Raises
    ------
    UserError
        The file is missing or invalid (the message names file and key).
    """
    from rhofollow.planning.site import ConfigError, load_site

    try:
        return load_site(path)
    except (ConfigError, OSError) as exc:
        raise UserError(str(exc)) from None


def demo_paths() -> tuple[Path, Path]:
    """The bundled demo catalogue and site: package data (:mod:`rhofollow.io.demo_data`), so the demo
    runs from a wheel as from a source checkout."""
    from rhofollow.io.demo_data import demo_file

    try:
        return (demo_file("examples/hts_candidates.csv"), demo_file("site_configs/alto_quemado.toml"))
    except FileNotFoundError as exc:
        raise UserError(f"{exc}; reinstall rhofollow, or give a catalogue, --site, --start and --end "
                        "instead") from None


def site_evening_date(site_path) -> dt.date:
    """The local date of the evening in progress or coming at the site.

    Before local noon it is the evening that began yesterday; the time zone is the site file's IANA
    zone, and today's UTC date is used when the file is unreadable.

    Parameters
    ----------
    site_path : str or path-like
        The site file (TOML).

    Returns
    -------
    datetime.date
        The local date of the evening.
    """
    from rhofollow.planning.site import ConfigError, load_site

    try:
        tz = load_site(site_path, check_files=False).tzinfo
    except (ConfigError, OSError):
        return dt.datetime.now(dt.timezone.utc).date()
    now = dt.datetime.now(tz)
    return now.date() - dt.timedelta(days=1) if now.hour < 12 else now.date()


def add_hours_option(p) -> None:
    """Add ``--hours INSTRUMENT=H`` (repeatable): RV budgets per spectrograph.

    Parameters
    ----------
    p : argparse.ArgumentParser
        The command's parser.
    """
    from rhofollow.planning.budget import MIN_GAIN_PER_HOUR

    p.add_argument("--hours", metavar="INSTRUMENT=H", action="append",
                   help="RV hours available on a spectrograph of the site (repeat for several): the visits "
                   "are shared out to maximise the expected number of confirmed eccentric orbits. Without "
                   f"it, targets are requested when they give at least {MIN_GAIN_PER_HOUR:g} expected "
                   "confirmations per hour")


def parse_hours(values, spectrographs) -> dict | None:
    """``["AQ-VEL=40", ...]`` -> ``{"AQ-VEL": 40.0}``.

    Parameters
    ----------
    values : list of str or None
        The ``--hours`` values.
    spectrographs : iterable of str
        Names of the site's spectrographs.

    Returns
    -------
    dict of str to float, or None
        Hours per spectrograph (None without ``--hours``).

    Raises
    ------
    UserError
        A value that is malformed, not positive, names an unknown spectrograph or repeats one.
    """
    import math

    if not values:
        return None
    names = list(spectrographs)
    out: dict[str, float] = {}
    for v in values:
        name, sep, h = str(v).partition("=")
        name = name.strip()
        if not sep or not name:
            raise UserError(f"--hours {v!r}: write INSTRUMENT=HOURS, e.g. --hours {names[0] if names else 'RV'}=40")
        try:
            hours = float(h)
        except ValueError:
            raise UserError(f"--hours {v!r}: {h!r} is not a number of hours") from None
        if not math.isfinite(hours) or hours <= 0:
            raise UserError(f"--hours {v!r}: the hours must be a positive number")
        if name not in names:
            known = ", ".join(names) if names else "none"
            raise UserError(f"--hours {v!r}: {name!r} is not a spectrograph of the site (spectrographs: {known})")
        if name in out:
            raise UserError(f"--hours {v!r}: {name} given twice")
        out[name] = hours
    return out


def night_range(start_text: str, end_text: str) -> tuple[dt.date, dt.date]:
    """``--start`` and ``--end`` as dates, in order, spanning at most :data:`MAX_NIGHTS` evenings.

    Parameters
    ----------
    start_text, end_text : str
        Local dates of the first and last evening, YYYY-MM-DD.

    Returns
    -------
    (datetime.date, datetime.date)
        The first and last evening.

    Raises
    ------
    UserError
        A malformed date, ``--end`` before ``--start``, or too many nights (names the option).
    """
    dates = []
    for text, opt in ((start_text, "--start"), (end_text, "--end")):
        try:
            dates.append(dt.date.fromisoformat(text))
        except (TypeError, ValueError):
            raise UserError(f"{opt} must be YYYY-MM-DD, got {text!r}") from None
    start, end = dates
    if end < start:
        raise UserError(f"--end {end} is before --start {start}")
    n_nights = (end - start).days + 1
    if n_nights > MAX_NIGHTS:
        raise UserError(f"{n_nights} nights requested; at most {MAX_NIGHTS} (split the date range)")
    return start, end
