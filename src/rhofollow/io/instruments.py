"""Instrument models from TOML files (tomllib), validated with errors that name file and key.

Two kinds (key ``kind``):

``kind = "spectrograph"`` — an RV instrument. Keys (unit in the name):

=======================  ========  ==========================================================
key                      default   meaning
=======================  ========  ==========================================================
name                     required  instrument name as written in RV files (``instrument``)
precision_ref_ms         required  photon-limited RV error at ``vmag_ref`` and ``exposure_ref_s``
vmag_ref                 required  reference V magnitude
exposure_ref_s           required  reference exposure time (s)
floor_ms                 required  instrumental noise floor per epoch (m/s)
exposure_min_s           60        shortest useful exposure (s)
exposure_max_s           3600      longest exposure (s): a fainter star gets this and a larger error
overhead_min             required  pointing, acquisition and read-out per visit (minutes): the whole
                                   overhead of an RV visit (the site's slew and setup are not added)
observatory              ""        free text
=======================  ========  ==========================================================

``kind = "photometer"`` — a camera for occultation (secondary-eclipse) light curves. Keys:
``name``, ``overhead_min`` (per visit), ``exposure_s`` (typical cadence exposure), ``readout_s``,
``filter`` (text), ``precision_ref_ppm`` (scatter per minute at ``vmag_ref``), ``vmag_ref``,
``baseline_h`` (out-of-eclipse baseline wanted on each side of an event), ``observatory``,
``band_center_um`` and ``band_width_um`` (the top-hat band, microns, in which the occultation
depth is computed for this camera; default 2.15 and 0.32, a Ks-like band). With
``precision_ref_ppm`` and ``vmag_ref`` every occultation record gets its expected S/N, and the
planners fund only windows whose S/N × catch probability passes the documented threshold; the
scatter is scaled from ``vmag_ref`` to the star's V magnitude as photon noise (colour terms
between V and the camera's band are ignored).
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from pathlib import Path

from rhofollow.errors import InputError
from rhofollow.physics.thermal import BAND_MAX_UM, BAND_MIN_UM

__all__ = ["InstrumentError", "Spectrograph", "Photometer", "read_instrument", "read_instruments"]


class InstrumentError(InputError, ValueError):
    """An instrument file is missing, unreadable or has a bad key (message names file and key)."""


@dataclass(frozen=True)
class Spectrograph:
    """An RV spectrograph's precision model (see module docstring for the keys and units)."""

    name: str
    precision_ref_ms: float
    vmag_ref: float
    exposure_ref_s: float
    floor_ms: float
    overhead_min: float
    exposure_min_s: float = 60.0
    exposure_max_s: float = 3600.0
    observatory: str = ""
    source: str = ""
    kind: str = "spectrograph"

    @property
    def overhead_s(self) -> float:
        """The overhead of one RV visit, in seconds.

        Returns
        -------
        float
            ``overhead_min`` in seconds.
        """
        return 60.0 * self.overhead_min


@dataclass(frozen=True)
class Photometer:
    """A photometer for occultation light curves (see module docstring for the keys and units)."""

    name: str
    overhead_min: float
    exposure_s: float = 60.0
    readout_s: float = 10.0
    filter: str = ""
    precision_ref_ppm: float = math.nan
    vmag_ref: float = math.nan
    baseline_h: float = 1.0
    band_center_um: float = 2.15
    band_width_um: float = 0.32
    observatory: str = ""
    source: str = ""
    kind: str = "photometer"

    @property
    def has_precision(self) -> bool:
        """True when the precision model (``precision_ref_ppm``, ``vmag_ref``) is complete."""
        return math.isfinite(self.precision_ref_ppm) and math.isfinite(self.vmag_ref)


# key -> (required, bound): bound 0.0 means "> 0", -1.0 means ">= 0", None means unbounded
_SPEC_NUM = {"precision_ref_ms": (True, 0.0), "vmag_ref": (True, None), "exposure_ref_s": (True, 0.0),
             "floor_ms": (True, -1.0), "overhead_min": (True, -1.0), "exposure_min_s": (False, 0.0),
             "exposure_max_s": (False, 0.0)}
_PHOT_NUM = {"overhead_min": (True, -1.0), "exposure_s": (False, 0.0), "readout_s": (False, -1.0),
             "precision_ref_ppm": (False, 0.0), "vmag_ref": (False, None), "baseline_h": (False, -1.0),
             "band_center_um": (False, 0.0), "band_width_um": (False, 0.0)}
_TEXT = ("name", "observatory", "filter")


def _num(data, key, required, lower, src):
    if key not in data:
        if required:
            raise InstrumentError(f"{src}: key '{key}' is missing")
        return None
    v = data[key]
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        raise InstrumentError(f"{src}: key '{key}' must be a number, got {v!r}")
    v = float(v)
    if not math.isfinite(v):
        raise InstrumentError(f"{src}: key '{key}' must be finite, got {v}")
    if lower is not None:
        if lower < 0 and v < 0:
            raise InstrumentError(f"{src}: key '{key}' must be >= 0, got {v:g}")
        if lower >= 0 and v <= lower:
            raise InstrumentError(f"{src}: key '{key}' must be > {lower:g}, got {v:g}")
    return v


def read_instrument(path) -> Spectrograph | Photometer:
    """Read and validate one instrument TOML file.

    Parameters
    ----------
    path : str or path-like
        The instrument file (keys and units in the module docstring).

    Returns
    -------
    Spectrograph or Photometer
        The instrument model (by key ``kind``), with ``source`` the file.

    Raises
    ------
    InstrumentError
        The file is missing or not TOML, or a key is unknown, missing or out of range (a
        one-sentence message naming the file and key).
    """
    p = Path(path)
    src = str(p)
    try:
        with p.open("rb") as fh:
            data = tomllib.load(fh)
    except FileNotFoundError:
        raise InstrumentError(f"{src}: instrument file not found") from None
    except IsADirectoryError:
        raise InstrumentError(f"{src}: is a directory, not an instrument file") from None
    except tomllib.TOMLDecodeError as exc:
        raise InstrumentError(f"{src}: not valid TOML ({exc})") from None
    kind = data.get("kind")
    if kind not in ("spectrograph", "photometer"):
        raise InstrumentError(f"{src}: key 'kind' must be \"spectrograph\" or \"photometer\", got {kind!r}")
    spec = _SPEC_NUM if kind == "spectrograph" else _PHOT_NUM
    allowed = set(spec) | set(_TEXT) | {"kind"}
    for key in data:
        if key not in allowed:
            raise InstrumentError(f"{src}: unknown key '{key}' for a {kind} "
                                  f"(allowed: {', '.join(sorted(allowed))})")
    name = data.get("name")
    if not isinstance(name, str) or not name.strip():
        raise InstrumentError(f"{src}: key 'name' must be a non-empty string")
    for key in ("observatory", "filter"):
        if key in data and not isinstance(data[key], str):
            raise InstrumentError(f"{src}: key '{key}' must be a string")
    vals = {k: _num(data, k, req, lo, src) for k, (req, lo) in spec.items()}
    vals = {k: v for k, v in vals.items() if v is not None}
    text = {k: data[k] for k in ("observatory", "filter") if k in data}
    if kind == "spectrograph":
        text.pop("filter", None)
        inst = Spectrograph(name=name.strip(), source=src, **vals, **text)
        if inst.exposure_min_s > inst.exposure_max_s:
            raise InstrumentError(f"{src}: key 'exposure_min_s' ({inst.exposure_min_s:g}) exceeds "
                                  f"'exposure_max_s' ({inst.exposure_max_s:g})")
        return inst
    inst = Photometer(name=name.strip(), source=src, **vals, **text)
    lo, hi = inst.band_center_um - inst.band_width_um / 2, inst.band_center_um + inst.band_width_um / 2
    if lo < BAND_MIN_UM or hi > BAND_MAX_UM:
        raise InstrumentError(f"{src}: keys 'band_center_um' and 'band_width_um' give {lo:g}-{hi:g} micron, "
                              f"outside the {BAND_MIN_UM:g}-{BAND_MAX_UM:g} micron range of the depth model")
    if math.isfinite(inst.precision_ref_ppm) != math.isfinite(inst.vmag_ref):
        raise InstrumentError(f"{src}: keys 'precision_ref_ppm' and 'vmag_ref' go together "
                              "(the scatter per minute at a reference V magnitude)")
    return inst


def read_instruments(paths) -> dict[str, Spectrograph | Photometer]:
    """Read several instrument files. Two files with one name is an error.

    Parameters
    ----------
    paths : iterable of str or path-like
        The instrument files, in order.

    Returns
    -------
    dict of str to Spectrograph or Photometer
        Instrument name -> model, in the order of ``paths``.

    Raises
    ------
    InstrumentError
        A file is bad (see :func:`read_instrument`) or repeats another file's instrument name.
    """
    out: dict[str, Spectrograph | Photometer] = {}
    for p in paths:
        inst = read_instrument(p)
        if inst.name in out:
            raise InstrumentError(f"{p}: key 'name' repeats instrument '{inst.name}' of {out[inst.name].source}")
        out[inst.name] = inst
    return out
