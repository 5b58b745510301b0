"""The error and warning classes every rhofollow module derives from (one base each).

``RhofollowError`` is the base of every error rhofollow raises on purpose; the CLI turns it into one
sentence and exit status 2 (except :class:`NumericalError`, an internal failure: exit status 3).
The kinds below it say what went wrong; each existing error class derives from one of them and keeps
its name where it is defined, so ``except CatalogueError`` and ``except ValueError`` go on working::

    RhofollowError
      InputError        a bad input file or value (file, row, column when known)
        ConfigError     a site, instrument or other configuration file (every problem found)
      LedgerError       the campaign ledger file itself, or measurements it cannot reconcile
      OutputError       an output cannot be written (report folder in the way, disk full)
      NumericalError    a computation did not converge (a bug or a corner case, not the user's input)
    RhofollowWarning    base of the warnings rhofollow issues (e.g. the offline IERS tables notice)

This module imports nothing from rhofollow, so every floor (physics included) may use it.
"""
from __future__ import annotations

from pathlib import Path

__all__ = ["RhofollowError", "InputError", "ConfigError", "LedgerError", "OutputError", "NumericalError",
           "RhofollowWarning"]


class RhofollowError(Exception):
    """Base of every error rhofollow raises on purpose (the CLI prints it as one sentence, exit 2)."""


class InputError(RhofollowError):
    """A bad input file or value; ``file``, ``row`` and ``column`` say where, when known.

    Parameters
    ----------
    message : str
        One sentence that already names the file, row and column (printed as is).
    file : str or os.PathLike, optional
        The input file.
    row : int, optional
        1-based data row in ``file``.
    column : str, optional
        Column (or key, or option) name.
    """

    def __init__(self, message: str = "", *, file=None, row: int | None = None, column: str | None = None):
        super().__init__(message)
        self.file = str(file) if file is not None else None
        self.row = row
        self.column = column


class ConfigError(InputError, ValueError):
    """A site (or other) configuration file is invalid. ``problems`` lists every problem found.

    Parameters
    ----------
    path : str or os.PathLike or None
        The configuration file (``None``: a configuration given in memory).
    problems : list of str
        Every problem found, each naming its key.
    """

    def __init__(self, path, problems: list[str]):
        self.path = Path(path) if path is not None else None
        self.problems = list(problems)
        where = str(path) if path is not None else "<site config>"
        if len(self.problems) == 1:
            msg = f"{where}: {self.problems[0]}"
        else:
            msg = f"{where}: {len(self.problems)} problems:\n  - " + "\n  - ".join(self.problems)
        super().__init__(msg, file=path)


class LedgerError(RhofollowError):
    """A problem with the ledger file itself (newer schema, not a ledger, ...)."""


class OutputError(RhofollowError):
    """An output cannot be written (the report folder is in the way, the disk is full)."""


class NumericalError(RhofollowError):
    """A computation did not converge; not the user's input (the CLI reports an internal error)."""


class RhofollowWarning(UserWarning):
    """Base of the warnings rhofollow issues."""
