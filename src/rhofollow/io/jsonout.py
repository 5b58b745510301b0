"""The JSON writer of every output file: standard JSON (NaN and infinities become null), written atomically.

numpy scalars and arrays, and paths, are converted on the way (:func:`json_default`); the file is
written through :func:`rhofollow.io.atomic.atomic_write_text`, so an interrupted run never leaves a
half-written file under the final name.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

from rhofollow.io.atomic import atomic_write_text

__all__ = ["write_json", "json_default", "json_text"]


def json_default(o):
    """``json.dumps`` hook: numpy floats, integers, booleans and arrays, and paths, as plain JSON values.

    Parameters
    ----------
    o : object
        A value the standard encoder does not know.

    Returns
    -------
    float, int, bool, list or str
        The plain value (units unchanged).

    Raises
    ------
    TypeError
        ``o`` has no JSON form.
    """
    import numpy as np

    if isinstance(o, (np.floating,)):
        return float(o)
    if isinstance(o, (np.integer,)):
        return int(o)
    if isinstance(o, np.bool_):
        return bool(o)
    if isinstance(o, np.ndarray):
        return o.tolist()
    if isinstance(o, Path):
        return str(o)
    raise TypeError(f"not JSON serialisable: {type(o).__name__}")


def _clean(o):
    """Replace non-finite floats by None so the JSON is standard (no NaN/Infinity tokens)."""
    if isinstance(o, float):
        return o if math.isfinite(o) else None
    if isinstance(o, dict):
        return {k: _clean(v) for k, v in o.items()}
    if isinstance(o, (list, tuple)):
        return [_clean(v) for v in o]
    return o


def json_text(obj) -> str:
    """``obj`` as indented standard JSON text (NaN -> null), with a final newline.

    Parameters
    ----------
    obj : object
        JSON-ready data (dicts, lists, numbers, text, numpy values, paths).

    Returns
    -------
    str
        The JSON text, indented by 2.
    """
    return json.dumps(_clean(json.loads(json.dumps(obj, default=json_default))), indent=2) + "\n"


def write_json(path, obj) -> Path:
    """Atomically write ``obj`` as standard JSON (NaN -> null).

    Parameters
    ----------
    path : str or path-like
        The JSON file to write.
    obj : object
        JSON-ready data, as for :func:`json_text`.

    Returns
    -------
    pathlib.Path
        ``path``, written.
    """
    return atomic_write_text(path, json_text(obj))
