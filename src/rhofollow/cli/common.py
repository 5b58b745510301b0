"""Options and helpers shared by the commands (defined once, used everywhere)."""
from __future__ import annotations

import json
import math
import os
import tempfile
from pathlib import Path

from rich.console import Console

__all__ = ["UserError", "console", "err_console", "add_json_option", "add_seed_option",
           "write_json", "atomic_write_text", "json_default"]


class UserError(Exception):
    """A problem the user can fix (bad path, bad option value); printed as one sentence."""


_CONSOLE = None
_ERR = None


def console() -> Console:
    global _CONSOLE
    if _CONSOLE is None:
        _CONSOLE = Console()
    return _CONSOLE


def err_console() -> Console:
    global _ERR
    if _ERR is None:
        _ERR = Console(stderr=True)
    return _ERR


def add_json_option(p):
    p.add_argument("--json", metavar="PATH", help="write the machine-readable result as JSON")


def add_seed_option(p, default: int = 20261202):
    p.add_argument("--seed", type=int, default=default,
                   help=f"random seed; the same inputs and seed give the same outputs (default {default})")


def json_default(o):
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


def atomic_write_text(path: str | os.PathLike, text: str) -> Path:
    """Write text to a temporary file beside ``path`` and rename it into place (atomic)."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


def write_json(path, obj) -> Path:
    """Atomically write ``obj`` as standard JSON (NaN -> null)."""
    import numpy as np  # noqa: F401  (json_default needs it)

    text = json.dumps(_clean(json.loads(json.dumps(obj, default=json_default))), indent=2)
    return atomic_write_text(path, text + "\n")
