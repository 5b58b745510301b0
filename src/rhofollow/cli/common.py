"""Options and helpers shared by the commands (defined once, used everywhere)."""
from __future__ import annotations

from rich.console import Console

from rhofollow.core.defaults import DEFAULT_SAMPLES, DEFAULT_SEED, MIN_SAMPLES
from rhofollow.io.atomic import atomic_write_text
from rhofollow.io.jsonout import _clean, json_default, write_json  # noqa: F401  (re-exported)
from rhofollow.errors import InputError

__all__ = ["UserError", "atomic_write_text", "console", "err_console", "add_json_option", "add_seed_option",
           "add_sample_format_option", "write_json", "atomic_write_text", "json_default"]


class UserError(InputError):
    """A problem the user can fix (bad path, bad option value); printed as one sentence."""


_CONSOLE = None
_ERR = None


def console() -> Console:
    """The shared stdout console (created on first use, so it sees the terminal width of the run).

    Returns
    -------
    rich.console.Console
        The console for results.
    """
    global _CONSOLE
    if _CONSOLE is None:
        _CONSOLE = Console()
    return _CONSOLE


def err_console() -> Console:
    """The shared stderr console (created on first use), for messages and progress bars.

    Returns
    -------
    rich.console.Console
        The console for messages.
    """
    global _ERR
    if _ERR is None:
        _ERR = Console(stderr=True)
    return _ERR


def add_json_option(p):
    """Add ``--json PATH``: write the machine-readable result as JSON.

    Parameters
    ----------
    p : argparse.ArgumentParser
        The command's parser.
    """
    p.add_argument("--json", metavar="PATH", help="write the machine-readable result as JSON")


def add_seed_option(p, default: int = DEFAULT_SEED):
    """Add ``--seed N``: the random seed of the run.

    Parameters
    ----------
    p : argparse.ArgumentParser
        The command's parser.
    default : int
        The default seed.
    """
    p.add_argument("--seed", type=int, default=default,
                   help=f"random seed; the same inputs and seed give the same outputs (default {default})")


def add_sample_format_option(p) -> None:
    """Add ``--sample-format {auto,ecsv,fits}``: the format of the per-target sample files.

    Parameters
    ----------
    p : argparse.ArgumentParser
        The command's parser.
    """
    from rhofollow.report.sample_files import AUTO_FITS_ABOVE, SAMPLE_FORMATS

    p.add_argument("--sample-format", choices=SAMPLE_FORMATS, default="auto",
                   help="format of the per-target sample files: ecsv (text), fits (FITS binary tables, about "
                   "20 times faster to write), or auto: ECSV for a run of at most "
                   f"{AUTO_FITS_ABOVE} targets, FITS above (default auto)")


# --------------------------------------------------------------------------------------------
# catalogue + assessment shared by every command that needs posterior samples

def add_assess_options(p) -> None:
    """Options of the assessment stage (shared by assess, eclipses, rv, night, campaign, plan).

    Parameters
    ----------
    p : argparse.ArgumentParser
        The command's parser.
    """
    from rhofollow.physics.priors import DEFAULT_PRIOR, PRIOR_NAMES

    p.add_argument("--samples", type=int, default=DEFAULT_SAMPLES, metavar="N",
                   help=f"posterior samples per target (default {DEFAULT_SAMPLES})")
    p.add_argument("--ecc-prior", default=DEFAULT_PRIOR, metavar="NAME[:PARAMS]",
                   help=f"eccentricity prior: {', '.join(PRIOR_NAMES)}, or beta:A,B, halfnormal:S, "
                   f"rayleigh:S, uniform:EMAX (default {DEFAULT_PRIOR})")
    p.add_argument("--no-transit-weight", action="store_true",
                   help="do not weight the prior by the transit probability (1 + e sin w)/(1 - e^2)")
    p.add_argument("--workers", type=int, default=None, metavar="N",
                   help="processes for the per-target work (default: one per CPU core, at most 8, "
                   "for 16 targets or more, else 1; results identical to 1 worker)")
    add_seed_option(p)


def add_plan_options(p) -> None:
    """Options shared by the planning commands (night, campaign): assessment options plus the ledger.

    Parameters
    ----------
    p : argparse.ArgumentParser
        The command's parser.
    """
    add_assess_options(p)
    p.add_argument("--ledger", metavar="PATH",
                   help="campaign ledger (SQLite, see 'rhofollow log'): its RVs and occultation timings "
                   "update the posteriors, visits done count, measured occultations are not re-planned")


def _progress_columns(time_column):
    """Progress-line columns: label, count and time never wrap; the bar is short (20 columns)."""
    from rich.progress import BarColumn, MofNCompleteColumn, TextColumn
    from rich.table import Column

    return (TextColumn("[bold]{task.description:<18}", table_column=Column(no_wrap=True)),
            BarColumn(bar_width=20),
            MofNCompleteColumn(table_column=Column(no_wrap=True)),
            time_column(table_column=Column(no_wrap=True)))


def stage_progress(transient: bool = True):
    """Context manager: a rich Progress on stderr and a StageProgress callback drawing on it.

    Parameters
    ----------
    transient : bool
        Remove the bars when the context ends.

    Returns
    -------
    contextlib.AbstractContextManager
        Yields ``stage(label, total)``, which adds a bar and returns its ``advance(k=1)`` callback.
    """
    from contextlib import contextmanager

    from rich.progress import Progress, TimeElapsedColumn

    @contextmanager
    def _bars():
        with Progress(*_progress_columns(TimeElapsedColumn), console=err_console(),
                      transient=transient) as prog:
            def stage(label, total):
                task = prog.add_task(label, total=max(1, total))
                return lambda k=1: prog.advance(task, k)

            yield stage

    return _bars()


def report_row_issues(result, quiet: bool = False) -> None:
    """Print the catalogue's row problems to stderr (one line each, never wrapped) and a summary line.

    Parameters
    ----------
    result : rhofollow.core.types.CatalogueResult
        What the catalogue reader returned.
    quiet : bool
        Print errors only (no warnings).
    """
    from rhofollow.cli.render import message

    for issue in result.issues:
        if not quiet or issue.severity == "error":
            message(issue, issue.severity)
    if result.n_failed:
        message(f"{result.n_rows} rows read, {result.n_failed} failed validation and were skipped; "
                f"{len(result.targets)} go on.")


def load_catalogue(path, require_coords: bool = False):
    """Read and validate a catalogue; file-level problems become a :class:`UserError`.

    Parameters
    ----------
    path : str or path-like
        The catalogue file.
    require_coords : bool
        Also require ``ra_deg`` and ``dec_deg``.

    Returns
    -------
    rhofollow.core.types.CatalogueResult
        Valid targets and every row problem.
    """
    from rhofollow.io.catalogue import CatalogueError, read_catalogue

    try:
        return read_catalogue(path, require_coords=require_coords)
    except CatalogueError as exc:
        raise UserError(str(exc)) from None
    except FileNotFoundError:
        raise UserError(f"{path}: no such file") from None


def checked_prior(args):
    """The eccentricity prior of the assessment options, with the sample count checked.

    Parameters
    ----------
    args : argparse.Namespace
        Parsed options with ``ecc_prior`` and ``samples``.

    Returns
    -------
    object
        The prior, as :func:`rhofollow.physics.priors.parse_prior` returns it.

    Raises
    ------
    UserError
        A bad ``--ecc-prior`` or too few ``--samples``.
    """
    from rhofollow.physics.priors import parse_prior

    try:
        prior = parse_prior(args.ecc_prior)
    except ValueError as exc:
        raise UserError(f"--ecc-prior: {exc}") from None
    if args.samples < MIN_SAMPLES:
        raise UserError(f"--samples must be at least {MIN_SAMPLES}")
    return prior


def count_progress(total: int, label: str = "assessing"):
    """A transient rich progress bar on stderr (hidden for fewer than 5 items).

    Parameters
    ----------
    total : int
        Number of items.
    label : str
        Unused here; the caller labels its task.

    Returns
    -------
    rich.progress.Progress
        The progress display (a context manager).
    """
    from rich.progress import Progress, TimeRemainingColumn

    prog = Progress(*_progress_columns(TimeRemainingColumn), console=err_console(), transient=True,
                    disable=total < 5)
    return prog


def run_assessment(targets, args, label: str = "assessing"):
    """Run the assessment with a progress bar on stderr.

    Parameters
    ----------
    targets : list of rhofollow.core.types.Target
        Validated catalogue rows.
    args : argparse.Namespace
        The assessment options (see :func:`add_assess_options`).
    label : str
        The progress bar's label.

    Returns
    -------
    list
        One Assessment per target, in input order.
    """
    from rhofollow.stages.assess_many import assess_parallel

    prior = checked_prior(args)
    with count_progress(len(targets), label) as prog:
        task = prog.add_task(label, total=len(targets))
        return assess_parallel(targets, n_samples=args.samples, prior=prior, seed=args.seed,
                               transit_prob=not args.no_transit_weight,
                               workers=max(1, int(getattr(args, "workers", 1) or 1)),
                               progress=lambda k=1: prog.advance(task, k))


def resolve_workers(requested, n_targets: int) -> int:
    """The processes a command uses: ``--workers`` as given, else
    :func:`rhofollow.core.executor.auto_workers` for the catalogue's size.

    Parameters
    ----------
    requested : int or None
        The ``--workers`` value (None when not given).
    n_targets : int
        Valid catalogue rows.

    Returns
    -------
    int
        Worker processes (>= 1 when given as such; a value below 1 is left for the caller to refuse).
    """
    from rhofollow.core.executor import auto_workers

    return auto_workers(n_targets) if requested is None else int(requested)
