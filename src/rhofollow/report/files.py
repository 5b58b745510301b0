"""Atomic file writing for the report folder: write beside the target, then rename into place.

An interrupted run therefore never leaves a file under its final name that is only half written.
"""
from __future__ import annotations

import io
import os
from pathlib import Path

from rhofollow.io.atomic import atomic_write_bytes

__all__ = ["atomic_write_bytes", "save_figure", "PNG_COMPRESS_LEVEL"]


#: zlib level of the PNG files: at 3 a report's figures come out as small as at PIL's default 6
#: (within 1-2 %) and encode about a third faster (measured on the demo report's figures).
PNG_COMPRESS_LEVEL = 3


def save_figure(fig, path: str | os.PathLike | None = None, dpi: int = 110) -> bytes:
    """Render a matplotlib figure to PNG bytes, close it, and write it atomically when ``path`` is given.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure; it is closed afterwards, also when rendering fails.
    path : str or os.PathLike, optional
        Where to write the PNG (atomically: beside it first, then renamed into place).
    dpi : int
        Resolution in dots per inch.

    Returns
    -------
    bytes
        The PNG file's bytes.
    """
    import matplotlib.pyplot as plt

    buf = io.BytesIO()
    try:
        fig.savefig(buf, format="png", dpi=dpi, pil_kwargs={"compress_level": PNG_COMPRESS_LEVEL})
    finally:
        plt.close(fig)
    data = buf.getvalue()
    if path is not None:
        atomic_write_bytes(path, data)
    return data
