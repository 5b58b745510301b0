"""Observing sites: the TOML site file, its validation and the frozen :class:`Site` record.

A site file (see ``site_configs/alto_quemado.toml`` for a documented example) holds::

    [site]          name, latitude_deg, longitude_deg, elevation_m, timezone (IANA name)
    instruments     list of instrument files, relative to the site file
    [constraints]   min_altitude_deg and/or max_airmass, twilight, Moon separation, horizon_mask
    [overheads]     slew_minutes, setup_minutes, loss_fraction

Every problem is reported with the file and the dotted key (``constraints.twilight``), all at
once: :func:`check_site` returns them as a list, :func:`load_site` raises :class:`ConfigError`
carrying them.
"""
from __future__ import annotations

import difflib
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import numpy as np

from rhofollow.errors import ConfigError

__all__ = ["ConfigError", "Site", "Constraints", "TWILIGHT_SUN_ALTITUDE_DEG", "load_site", "check_site",
           "site_from_dict", "airmass_to_altitude_deg"]

#: Sun-centre altitude (deg) that ends evening twilight / starts morning twilight.
#: Civil -6, nautical -12, astronomical -18 (REFERENCE.md section 12).
TWILIGHT_SUN_ALTITUDE_DEG = {"civil": -6.0, "nautical": -12.0, "astronomical": -18.0}


# ConfigError (every problem of a configuration file) is defined in rhofollow.errors, re-exported here.


def airmass_to_altitude_deg(airmass: float) -> float:
    """Altitude (deg) at which the plane-parallel airmass sec z equals ``airmass``.

    sec z is what astropy's ``AltAz.secz`` and astroplan's ``AirmassConstraint`` use; it is within
    1 % of Kasten & Young (1989) above airmass 3 (REFERENCE.md section 12).
    """
    return 90.0 - math.degrees(math.acos(1.0 / airmass))


@dataclass(frozen=True)
class Constraints:
    """Observability constraints of a site. Angles in degrees.

    ``min_altitude_deg``: the stricter of the file's ``min_altitude_deg`` and the altitude of
    ``max_airmass`` (sec z). ``twilight``: which twilight ends the night. The Moon separation
    required is ``min_moon_separation_deg`` at full Moon; with ``min_moon_separation_new_deg``
    it is interpolated linearly in the Moon's illuminated fraction between new (0) and full (1).
    ``horizon_mask`` is a tuple of (azimuth_deg, min_altitude_deg) sorted by azimuth, linearly
    interpolated and wrapped at 360 deg; the required altitude is the larger of the mask and
    ``min_altitude_deg``.
    """

    min_altitude_deg: float = 0.0
    max_airmass: float | None = None
    twilight: str = "astronomical"
    min_moon_separation_deg: float = 0.0
    min_moon_separation_new_deg: float | None = None
    moon_ignore_below_horizon: bool = False
    horizon_mask: tuple[tuple[float, float], ...] = ()

    @property
    def sun_altitude_limit_deg(self) -> float:
        """Highest Sun altitude (deg) counted as night."""
        return TWILIGHT_SUN_ALTITUDE_DEG[self.twilight]

    def required_altitude_deg(self, az_deg) -> np.ndarray:
        """Minimum altitude (deg) required at azimuth ``az_deg`` (deg, N=0, E=90)."""
        az = np.asarray(az_deg, dtype=float)
        if not self.horizon_mask:
            return np.full(az.shape, self.min_altitude_deg)
        return np.maximum(self.min_altitude_deg, _mask_interp(self.horizon_mask, az))

    def required_moon_separation_deg(self, illumination) -> np.ndarray:
        """Minimum Moon separation (deg) at the Moon's illuminated fraction ``illumination`` (0-1)."""
        ill = np.asarray(illumination, dtype=float)
        if self.min_moon_separation_new_deg is None:
            return np.full(ill.shape, self.min_moon_separation_deg)
        lo, hi = self.min_moon_separation_new_deg, self.min_moon_separation_deg
        return lo + (hi - lo) * np.clip(ill, 0.0, 1.0)


def _mask_interp(mask, az):
    a = np.array([m[0] for m in mask], dtype=float)
    h = np.array([m[1] for m in mask], dtype=float)
    # periodic: repeat the first and last points one turn away
    a = np.concatenate([[a[-1] - 360.0], a, [a[0] + 360.0]])
    h = np.concatenate([[h[-1]], h, [h[0]]])
    return np.interp(np.mod(az, 360.0), a, h)


@dataclass(frozen=True)
class Site:
    """An observing site. Angles in degrees (geodetic, east longitude positive), elevation in metres.

    ``instruments`` are resolved absolute paths (the instrument loader is ``rhofollow.io.instruments``).
    """

    name: str
    latitude_deg: float
    longitude_deg: float
    elevation_m: float
    timezone: str
    constraints: Constraints = field(default_factory=Constraints)
    instruments: tuple[Path, ...] = ()
    slew_minutes: float = 0.0
    setup_minutes: float = 0.0
    #: Probability that a requested visit is lost to weather or technical problems (0 to 0.95;
    #: default 0.25 when the file gives none, common practice, no source).
    loss_fraction: float = 0.25
    source: Path | None = field(default=None, compare=False)

    @property
    def tzinfo(self) -> ZoneInfo:
        """The site's time zone as a :class:`zoneinfo.ZoneInfo`."""
        return ZoneInfo(self.timezone)

    @property
    def location(self):
        """The site as an :class:`astropy.coordinates.EarthLocation` (WGS84 geodetic)."""
        import astropy.units as u
        from astropy.coordinates import EarthLocation

        return EarthLocation.from_geodetic(self.longitude_deg * u.deg, self.latitude_deg * u.deg,
                                           self.elevation_m * u.m)

    def observer(self):
        """An :class:`astroplan.Observer` at this site (no refraction: pressure 0)."""
        from astroplan import Observer

        return Observer(location=self.location, name=self.name, timezone=self.timezone)


# ----------------------------------------------------------------------------------------------
# validation

_TOP_KEYS = {"site", "instruments", "constraints", "overheads"}
_SITE_KEYS = {"name", "latitude_deg", "longitude_deg", "elevation_m", "timezone", "instruments"}
_CONSTRAINT_KEYS = {"min_altitude_deg", "max_airmass", "twilight", "min_moon_separation_deg",
                    "min_moon_separation_new_deg", "moon_ignore_below_horizon", "horizon_mask"}
_OVERHEAD_KEYS = {"slew_minutes", "setup_minutes", "loss_fraction"}

#: Loss fraction of a site file without ``overheads.loss_fraction``.
DEFAULT_LOSS_FRACTION = 0.25


class _Collector:
    def __init__(self):
        self.problems: list[str] = []

    def add(self, key: str, msg: str):
        self.problems.append(f"key '{key}': {msg}")

    def unknown(self, table: dict, allowed: set, prefix: str):
        for k in table:
            if k not in allowed:
                near = difflib.get_close_matches(k, sorted(allowed), n=1)
                hint = f" (did you mean '{prefix}{near[0]}'?)" if near else \
                    f" (allowed: {', '.join(sorted(allowed))})"
                self.add(f"{prefix}{k}", "unknown key" + hint)

    def number(self, table: dict, key: str, prefix: str, *, required: bool, lo=None, hi=None,
               lo_open=False, default=None):
        full = f"{prefix}{key}"
        if key not in table:
            if required:
                self.add(full, "missing (required)")
            return default
        v = table[key]
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            self.add(full, f"must be a number, got {_show(v)}")
            return default
        v = float(v)
        if not math.isfinite(v):
            self.add(full, f"must be finite, got {v}")
            return default
        if lo is not None and (v < lo or (lo_open and v == lo)):
            self.add(full, f"must be {'>' if lo_open else '>='} {lo}{_range(lo, hi)}, got {v}")
            return default
        if hi is not None and v > hi:
            self.add(full, f"must be <= {hi}{_range(lo, hi)}, got {v}")
            return default
        return v

    def string(self, table: dict, key: str, prefix: str, *, required: bool, default=None):
        full = f"{prefix}{key}"
        if key not in table:
            if required:
                self.add(full, "missing (required)")
            return default
        v = table[key]
        if not isinstance(v, str) or not v.strip():
            self.add(full, f"must be a non-empty string, got {_show(v)}")
            return default
        return v.strip()


def _range(lo, hi):
    return f" (allowed range {lo} to {hi})" if lo is not None and hi is not None else ""


def _show(v):
    return f"{type(v).__name__} {v!r}"


def _table(c: _Collector, doc: dict, key: str, *, required: bool) -> dict:
    if key not in doc:
        if required:
            c.add(key, "missing table (required)")
        return {}
    v = doc[key]
    if not isinstance(v, dict):
        c.add(key, f"must be a table ([{key}]), got {_show(v)}")
        return {}
    return v


def _validate(doc: dict, base_dir: Path | None, check_files: bool, source: Path | None):
    """Return (Site or None, problems)."""
    c = _Collector()
    c.unknown(doc, _TOP_KEYS, "")

    s = _table(c, doc, "site", required=True)
    c.unknown(s, _SITE_KEYS, "site.")
    name = c.string(s, "name", "site.", required="site" in doc)
    lat = c.number(s, "latitude_deg", "site.", required="site" in doc, lo=-90.0, hi=90.0)
    lon = c.number(s, "longitude_deg", "site.", required="site" in doc, lo=-180.0, hi=360.0)
    elev = c.number(s, "elevation_m", "site.", required="site" in doc, lo=-500.0, hi=9000.0)
    tz = c.string(s, "timezone", "site.", required="site" in doc)
    if tz is not None:
        try:
            ZoneInfo(tz)
        except (ZoneInfoNotFoundError, ValueError):
            near = difflib.get_close_matches(tz, _available_zones(), n=1)
            c.add("site.timezone", f"unknown IANA time zone {tz!r}"
                  + (f" (did you mean '{near[0]}'?)" if near else " (e.g. 'America/Santiago')"))
            tz = None
    if lon is not None and lon > 180.0:
        lon -= 360.0

    # ``instruments`` may sit at the top of the file or inside [site] (where TOML puts a key
    # written after the [site] header); not both.
    instruments: list[Path] = []
    ikey = "site.instruments" if "instruments" in s else "instruments"
    if "instruments" in s and "instruments" in doc:
        c.add("instruments", "given both at the top level and in [site]; keep one")
    elif ikey == "site.instruments" or "instruments" in doc:
        inst = s["instruments"] if ikey == "site.instruments" else doc["instruments"]
        if not isinstance(inst, list):
            c.add(ikey, f"must be a list of file paths, got {_show(inst)}")
        else:
            for i, p in enumerate(inst):
                if not isinstance(p, str) or not p.strip():
                    c.add(f"{ikey}[{i}]", f"must be a file path string, got {_show(p)}")
                    continue
                path = Path(p).expanduser()
                if not path.is_absolute() and base_dir is not None:
                    path = base_dir / path
                path = path.resolve()
                if check_files and not path.is_file():
                    c.add(f"{ikey}[{i}]", f"instrument file not found: {path}")
                instruments.append(path)

    k = _table(c, doc, "constraints", required=True)
    c.unknown(k, _CONSTRAINT_KEYS, "constraints.")
    min_alt = c.number(k, "min_altitude_deg", "constraints.", required=False, lo=0.0, hi=89.0)
    max_am = c.number(k, "max_airmass", "constraints.", required=False, lo=1.0, hi=40.0, lo_open=True)
    if "constraints" in doc and "min_altitude_deg" not in k and "max_airmass" not in k:
        c.add("constraints.min_altitude_deg", "missing: give min_altitude_deg and/or max_airmass")
    twilight = c.string(k, "twilight", "constraints.", required="constraints" in doc)
    if twilight is not None and twilight not in TWILIGHT_SUN_ALTITUDE_DEG:
        c.add("constraints.twilight", f"unknown twilight {twilight!r}; use one of "
              + ", ".join(repr(t) for t in TWILIGHT_SUN_ALTITUDE_DEG))
        twilight = None
    moon_full = c.number(k, "min_moon_separation_deg", "constraints.", required=False, lo=0.0,
                         hi=180.0, default=None)
    if "min_moon_separation_deg" not in k:
        moon_full = 0.0
    moon_new = c.number(k, "min_moon_separation_new_deg", "constraints.", required=False, lo=0.0,
                        hi=180.0)
    # compare the two only when both were given and valid: a rejected full-Moon value must not
    # give a follow-on message with a value the user never wrote
    if moon_new is not None and moon_full is not None and moon_new > moon_full:
        c.add("constraints.min_moon_separation_new_deg",
              f"must not exceed min_moon_separation_deg (the full-Moon value), got {moon_new} > {moon_full}")
    moon_full = 0.0 if moon_full is None else moon_full
    ignore_down = k.get("moon_ignore_below_horizon", False)
    if not isinstance(ignore_down, bool):
        c.add("constraints.moon_ignore_below_horizon", f"must be true or false, got {_show(ignore_down)}")
        ignore_down = False
    mask = _validate_mask(c, k.get("horizon_mask", None)) if "horizon_mask" in k else ()

    o = _table(c, doc, "overheads", required=False)
    c.unknown(o, _OVERHEAD_KEYS, "overheads.")
    slew = c.number(o, "slew_minutes", "overheads.", required=False, lo=0.0, hi=600.0, default=0.0)
    setup = c.number(o, "setup_minutes", "overheads.", required=False, lo=0.0, hi=600.0, default=0.0)
    loss = c.number(o, "loss_fraction", "overheads.", required=False, lo=0.0, hi=0.95,
                    default=DEFAULT_LOSS_FRACTION)

    if c.problems:
        return None, c.problems
    eff_alt = min_alt if min_alt is not None else 0.0
    if max_am is not None:
        eff_alt = max(eff_alt, airmass_to_altitude_deg(max_am))
    cons = Constraints(min_altitude_deg=eff_alt, max_airmass=max_am, twilight=twilight,
                       min_moon_separation_deg=moon_full, min_moon_separation_new_deg=moon_new,
                       moon_ignore_below_horizon=ignore_down, horizon_mask=mask)
    site = Site(name=name, latitude_deg=lat, longitude_deg=lon, elevation_m=elev, timezone=tz,
                constraints=cons, instruments=tuple(instruments), slew_minutes=slew,
                setup_minutes=setup, loss_fraction=loss, source=source)
    return site, []


def _validate_mask(c: _Collector, mask) -> tuple:
    key = "constraints.horizon_mask"
    if not isinstance(mask, list) or not mask:
        c.add(key, "must be a non-empty list of [azimuth_deg, min_altitude_deg] pairs, "
              f"got {_show(mask)}")
        return ()
    out = []
    for i, pair in enumerate(mask):
        ok = (isinstance(pair, list) and len(pair) == 2
              and all(isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)
                      for x in pair))
        if not ok:
            c.add(f"{key}[{i}]", f"must be a pair [azimuth_deg, min_altitude_deg] of numbers, got {pair!r}")
            return ()
        az, alt = float(pair[0]), float(pair[1])
        if not 0.0 <= az <= 360.0:
            c.add(f"{key}[{i}]", f"azimuth must be in 0-360 deg, got {az}")
            return ()
        if not -5.0 <= alt <= 90.0:
            c.add(f"{key}[{i}]", f"minimum altitude must be in -5-90 deg, got {alt}")
            return ()
        out.append((az, alt))
    for i in range(1, len(out)):
        if out[i][0] <= out[i - 1][0]:
            c.add(f"{key}[{i}]", "azimuths must be strictly increasing (sorted); "
                  f"{out[i][0]} follows {out[i - 1][0]}")
            return ()
    if out[-1][0] - out[0][0] >= 360.0:
        c.add(key, "azimuths 0 and 360 are the same direction; give only one of them")
        return ()
    return tuple(out)


_ZONES: list[str] | None = None


def _available_zones() -> list[str]:
    global _ZONES
    if _ZONES is None:
        import zoneinfo

        _ZONES = sorted(zoneinfo.available_timezones())
    return _ZONES


# ----------------------------------------------------------------------------------------------
# public entry points

def _read(path: Path) -> tuple[dict | None, list[str]]:
    try:
        with open(path, "rb") as fh:
            return tomllib.load(fh), []
    except FileNotFoundError:
        return None, ["file not found"]
    except IsADirectoryError:
        return None, ["is a directory, not a site file"]
    except tomllib.TOMLDecodeError as exc:
        return None, [f"not valid TOML: {exc}"]
    except OSError as exc:
        return None, [f"cannot read: {exc.strerror or exc}"]


def site_from_dict(doc: dict, *, base_dir=None, source=None, check_files: bool = True) -> Site:
    """Build a :class:`Site` from an already-parsed TOML document (raises :class:`ConfigError`)."""
    site, problems = _validate(doc, Path(base_dir) if base_dir is not None else None, check_files,
                               Path(source) if source is not None else None)
    if problems:
        raise ConfigError(source, problems)
    return site


def load_site(path, *, check_files: bool = True) -> Site:
    """Read and validate a site TOML file.

    Parameters
    ----------
    path : str or Path
        The site file; relative instrument paths are resolved against its folder.
    check_files : bool
        Also require the instrument files to exist (default True).

    Raises
    ------
    ConfigError
        With every problem found, each naming the file and the dotted key.
    """
    path = Path(path)
    doc, problems = _read(path)
    if problems:
        raise ConfigError(path, problems)
    return site_from_dict(doc, base_dir=path.parent, source=path, check_files=check_files)


def check_site(path, *, check_files: bool = True) -> list[str]:
    """Problems in a site file as sentences naming the file and key; empty list if it is valid."""
    path = Path(path)
    doc, problems = _read(path)
    site = None
    if not problems:
        site, problems = _validate(doc, path.parent, check_files, path)
    out = [f"{path}: {p}" for p in problems]
    if site is not None and check_files and site.instruments:
        out.extend(_instrument_problems(site.instruments))
    return out


def _instrument_problems(paths) -> list[str]:
    """Problems of the instrument files themselves (via ``rhofollow.io.instruments``, if present)."""
    try:
        from rhofollow.io.instruments import read_instruments
    except ImportError:     # the instrument loader is optional for site checks
        return []
    try:
        read_instruments(paths)
    except ValueError as exc:   # InstrumentError names the instrument file and key
        return [str(exc)]
    return []
