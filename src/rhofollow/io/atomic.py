"""Atomic file writes: write to a temporary file beside the target, then rename it into place.

An interrupted run therefore never leaves a half-written file under the final name. The file
gets the permissions an ordinary ``open(path, "w")`` would give: those of the file it replaces,
or ``0o666`` less the process umask for a new file (the temporary file's owner-only mode is not
kept). A full disk raises :class:`NoSpaceError`, whose message names the path and says that
nothing was written there.
"""
from __future__ import annotations

import errno
import os
import stat
import tempfile
from pathlib import Path

from rhofollow.errors import OutputError

__all__ = ["NoSpaceError", "atomic_write_bytes", "atomic_write_text", "current_umask", "is_no_space",
           "new_file_mode", "new_dir_mode"]

#: errno values meaning "the disk (or the user's quota) is full".
_NO_SPACE = {errno.ENOSPC} | ({errno.EDQUOT} if hasattr(errno, "EDQUOT") else set())


class NoSpaceError(OutputError, OSError):
    """The disk is full; the message says where and that nothing was written."""

    def __init__(self, path, what: str = "nothing was written"):
        self.path = str(path)
        super().__init__(errno.ENOSPC, f"no space left on {path}; {what}")

    def __str__(self) -> str:
        return self.strerror


def is_no_space(exc: BaseException) -> bool:
    """True for an OSError (or SQLite error) that means the disk or quota is full.

    Parameters
    ----------
    exc : BaseException
        The error raised by a write.

    Returns
    -------
    bool
        True when ``exc`` means "no space left" (ENOSPC, EDQUOT or SQLite's "database or disk is full").
    """
    if isinstance(exc, OSError) and exc.errno in _NO_SPACE:
        return True
    return "database or disk is full" in str(exc)


def current_umask() -> int:
    """The process umask (read by setting and restoring it).

    Returns
    -------
    int
        The umask as permission bits (e.g. ``0o022``).
    """
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def new_file_mode() -> int:
    """Permission bits of a new regular file: ``0o666`` less the umask.

    Returns
    -------
    int
        Permission bits (e.g. ``0o644``).
    """
    return 0o666 & ~current_umask()


def new_dir_mode() -> int:
    """Permission bits of a new folder: ``0o777`` less the umask.

    Returns
    -------
    int
        Permission bits (e.g. ``0o755``).
    """
    return 0o777 & ~current_umask()


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically (temporary ``.part`` file in the same folder, then rename).

    Parameters
    ----------
    path : str or path-like
        The final file; missing parent folders are created.
    data : bytes
        The whole content of the file.

    Returns
    -------
    pathlib.Path
        ``path``, written.

    Raises
    ------
    NoSpaceError
        The disk or quota is full; nothing was written under ``path``.
    """
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name[:200]}.", suffix=".part", dir=path.parent)
    except OSError as exc:
        if is_no_space(exc):
            raise NoSpaceError(path) from exc
        raise
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        try:
            mode = stat.S_IMODE(path.stat().st_mode)
        except FileNotFoundError:
            mode = new_file_mode()
        os.chmod(tmp, mode)
        os.replace(tmp, path)
    except BaseException as exc:
        if os.path.exists(tmp):
            os.unlink(tmp)
        if isinstance(exc, OSError) and is_no_space(exc):
            raise NoSpaceError(path) from exc
        raise
    return path


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    """Write UTF-8 ``text`` to ``path`` atomically.

    Parameters
    ----------
    path : str or path-like
        The final file; missing parent folders are created.
    text : str
        The whole content, encoded as UTF-8.

    Returns
    -------
    pathlib.Path
        ``path``, written.
    """
    return atomic_write_bytes(path, text.encode("utf-8"))
