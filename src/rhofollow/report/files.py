"""Atomic file writing for the report folder: write beside the target, then rename into place.

An interrupted run therefore never leaves a file under its final name that is only half written.
"""
from __future__ import annotations

import io
import os
from pathlib import Path

from rhofollow.io.atomic import atomic_write_bytes

__all__ = ["atomic_write_bytes", "save_figure"]


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
