"""Command-line interface: one module per command, each with ``register(subparsers)``.

The CLI is thin: parse options, call the library, render. Results go to stdout, messages to stderr.
"""
from __future__ import annotations

import argparse
import importlib
import sys

from rhofollow import __version__

#: Command modules in the order they appear in ``--help``. A module that is not present yet is
#: skipped, so commands can be added one file at a time.
COMMANDS = ["demo", "check", "assess", "eclipses", "rv", "night", "campaign", "plan", "log"]


def build_parser() -> argparse.ArgumentParser:
    """The ``rhofollow`` parser with every command of :data:`COMMANDS` registered.

    Returns
    -------
    argparse.ArgumentParser
        The parser.
    """
    p = argparse.ArgumentParser(
        prog="rhofollow",
        description="Eccentricity constraints from the stellar-density mismatch of transiting "
        "planets, and the follow-up plans that test them.",
    )
    p.add_argument("--version", action="version", version=f"rhofollow {__version__}")
    p.add_argument("--debug", action="store_true", help="show tracebacks of unexpected errors")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        try:
            mod = importlib.import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"{__name__}.{name}":
                continue
            raise
        mod.register(sub)
    return p


def main(argv: list[str] | None = None) -> int:
    """Run one command; offline-table notices print as one ``notice:`` line (no source line).

    Parameters
    ----------
    argv : list of str or None
        The arguments (None: ``sys.argv[1:]``).

    Returns
    -------
    int
        The exit status: 0 success, 1 some targets failed, 2 a problem the user can fix, 3 an internal
        error, 130 interrupted.
    """
    import warnings

    from rhofollow.core.timescales import OfflineTablesWarning
    from rhofollow.cli.render import message

    shown = warnings.showwarning

    def show(msg, category, filename, lineno, file=None, line=None):
        if issubclass(category, OfflineTablesWarning):
            message(str(msg), "notice")
        else:
            shown(msg, category, filename, lineno, file, line)

    with warnings.catch_warnings():     # restores the filters and showwarning afterwards
        warnings.simplefilter("always", OfflineTablesWarning)   # a notice, never an error
        warnings.showwarning = show
        return _main(argv)


def _internal(exc: BaseException, args) -> int:
    """An unexpected error: one sentence and exit status 3 (the traceback with ``--debug``)."""
    from rhofollow.cli.render import message

    if args.debug:
        raise exc
    message(f"{type(exc).__name__}: {exc} (run with --debug for the traceback)", "internal error")
    return 3


def _main(argv: list[str] | None = None) -> int:
    from rhofollow.cli.render import message
    from rhofollow.errors import NumericalError, RhofollowError

    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 2
    try:
        return int(args.func(args) or 0)
    except NumericalError as exc:    # a computation that did not converge: not the user's input
        return _internal(exc, args)
    except RhofollowError as exc:    # bad input, configuration, ledger or output: one sentence
        message(exc, "error")
        return 2
    except OSError as exc:           # a full disk (NoSpaceError is an OutputError, caught above)
        from rhofollow.io.atomic import is_no_space

        if not is_no_space(exc) or args.debug:
            return _internal(exc, args)
        message(f"no space left on {exc.filename or 'the disk'}", "error")
        return 2
    except KeyboardInterrupt:
        message("interrupted")
        return 130
    except Exception as exc:  # noqa: BLE001 - last line of defence, the user sees one sentence
        return _internal(exc, args)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
