"""Atomic file writes: write to a temporary file beside the target, then rename it into place.

An interrupted run therefore never leaves a half-written file under the final name.
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

__all__ = ["atomic_write_bytes", "atomic_write_text"]


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically (temporary ``.part`` file in the same folder, then rename)."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    """Write UTF-8 ``text`` to ``path`` atomically."""
    return atomic_write_bytes(path, text.encode("utf-8"))
