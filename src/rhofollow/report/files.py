"""Atomic file writing for the report folder: write beside the target, then rename into place.

An interrupted run therefore never leaves a file under its final name that is only half written.
"""
from __future__ import annotations

import io
import os
import tempfile
from pathlib import Path

__all__ = ["atomic_write_bytes", "save_figure"]


def atomic_write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` to a temporary file in the target's folder and rename it to ``path``."""
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


def save_figure(fig, path: str | os.PathLike | None = None, dpi: int = 110) -> bytes:
    """Render a matplotlib figure to PNG bytes, close it, and write it atomically when ``path`` is given."""
    import matplotlib.pyplot as plt

    buf = io.BytesIO()
    try:
        fig.savefig(buf, format="png", dpi=dpi)
    finally:
        plt.close(fig)
    data = buf.getvalue()
    if path is not None:
        atomic_write_bytes(path, data)
    return data
