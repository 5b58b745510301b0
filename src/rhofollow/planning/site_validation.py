"""Validation of a site file (TOML): one step per section, every problem named and collected.

Each problem names the dotted key (``constraints.twilight``) and what is wrong, with the allowed
range or the nearest known key; :mod:`rhofollow.planning.site` turns them into a
:class:`~rhofollow.errors.ConfigError` naming the file (or a list of sentences for ``check``).
"""
from __future__ import annotations

import difflib
import math
from pathlib import Path
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

from rhofollow.planning.site import (DEFAULT_LOSS_FRACTION, TWILIGHT_SUN_ALTITUDE_DEG, Constraints, Site,
                                     airmass_to_altitude_deg)

__all__ = ["validate_site_document"]

_TOP_KEYS = {"site", "instruments", "constraints", "overheads"}
_SITE_KEYS = {"name", "latitude_deg", "longitude_deg", "elevation_m", "timezone", "instruments"}
_CONSTRAINT_KEYS = {"min_altitude_deg", "max_airmass", "twilight", "min_moon_separation_deg",
                    "min_moon_separation_new_deg", "moon_ignore_below_horizon", "horizon_mask"}
_OVERHEAD_KEYS = {"slew_minutes", "setup_minutes", "loss_fraction"}


class _Collector:
    """The problems found so far, each naming its dotted key, and the typed readers that add them."""

    def __init__(self):
        self.problems: list[str] = []

    def add(self, key: str, msg: str):
        """Record one problem.

        Parameters
        ----------
        key : str
            Dotted key (``constraints.twilight``).
        msg : str
            What is wrong.

        Returns
        -------
        None
        """
        self.problems.append(f"key '{key}': {msg}")

    def unknown(self, table: dict, allowed: set, prefix: str):
        """Record every key of ``table`` not in ``allowed``, with the nearest allowed key.

        Parameters
        ----------
        table : dict
            One table of the file.
        allowed : set of str
            Its known keys.
        prefix : str
            Dotted prefix of the table (``"constraints."``; "" at the top).

        Returns
        -------
        None
        """
        for k in table:
            if k not in allowed:
                near = difflib.get_close_matches(k, sorted(allowed), n=1)
                hint = f" (did you mean '{prefix}{near[0]}'?)" if near else \
                    f" (allowed: {', '.join(sorted(allowed))})"
                self.add(f"{prefix}{k}", "unknown key" + hint)

    def number(self, table: dict, key: str, prefix: str, *, required: bool, lo=None, hi=None,
               lo_open=False, default=None):
        """A finite number in ``[lo, hi]`` (``(lo, hi]`` with ``lo_open``), or ``default`` and a problem.

        Parameters
        ----------
        table : dict
            The table holding the key.
        key : str
            The key.
        prefix : str
            Dotted prefix of the table.
        required : bool
            A missing key is a problem.
        lo, hi : float or None
            Allowed range, in the key's own unit (degrees, metres, minutes ...).
        lo_open : bool
            Exclude ``lo`` itself.
        default : float or None
            Returned when the key is missing or wrong.

        Returns
        -------
        float or None
            The value, in the key's unit, or ``default``.
        """
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
        """A non-empty string (stripped), or ``default`` and a problem.

        Parameters
        ----------
        table : dict
            The table holding the key.
        key : str
            The key.
        prefix : str
            Dotted prefix of the table.
        required : bool
            A missing key is a problem.
        default : str or None
            Returned when the key is missing or wrong.

        Returns
        -------
        str or None
            The stripped string or ``default``.
        """
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


def validate_site_document(doc: dict, base_dir: Path | None, check_files: bool, source: Path | None):
    """Validate a parsed site file, one step per section, every problem collected in file order.

    Parameters
    ----------
    doc : dict
        The parsed TOML document.
    base_dir : Path or None
        Folder that relative instrument paths are resolved against (the site file's).
    check_files : bool
        Also require the instrument files to exist.
    source : Path or None
        The site file, recorded in the :class:`~rhofollow.planning.site.Site`.

    Returns
    -------
    site : Site or None
        The site (angles in degrees, elevation in metres, overheads in minutes); None when there
        are problems.
    problems : list of str
        Each naming the dotted key (``constraints.twilight``) and what is wrong; empty when valid.
    """
    c = _Collector()
    c.unknown(doc, _TOP_KEYS, "")
    s = _table(c, doc, "site", required=True)
    name, lat, lon, elev, tz = _site_section(c, doc, s)
    instruments = _instruments_section(c, doc, s, base_dir, check_files)
    cons = _constraints_section(c, doc)
    slew, setup, loss = _overheads_section(c, doc)
    if c.problems:
        return None, c.problems
    site = Site(name=name, latitude_deg=lat, longitude_deg=lon, elevation_m=elev, timezone=tz,
                constraints=cons, instruments=tuple(instruments), slew_minutes=slew,
                setup_minutes=setup, loss_fraction=loss, source=source)
    return site, []


def _site_section(c: _Collector, doc: dict, s: dict):
    """[site]: name, latitude, longitude (east positive, folded to -180..180), elevation, time zone."""
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
    return name, lat, lon, elev, tz


def _instruments_section(c: _Collector, doc: dict, s: dict, base_dir: Path | None,
                         check_files: bool) -> list[Path]:
    """``instruments``: resolved paths of the instrument files (relative to the site file)."""
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
    return instruments


def _constraints_section(c: _Collector, doc: dict) -> Constraints:
    """[constraints]: altitude / airmass, twilight, Moon separation, horizon mask."""
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
    moon_full, moon_new = _moon_separations(c, k)
    ignore_down = k.get("moon_ignore_below_horizon", False)
    if not isinstance(ignore_down, bool):
        c.add("constraints.moon_ignore_below_horizon", f"must be true or false, got {_show(ignore_down)}")
        ignore_down = False
    mask = _validate_mask(c, k.get("horizon_mask", None)) if "horizon_mask" in k else ()
    eff_alt = min_alt if min_alt is not None else 0.0
    if max_am is not None:
        eff_alt = max(eff_alt, airmass_to_altitude_deg(max_am))
    return Constraints(min_altitude_deg=eff_alt, max_airmass=max_am, twilight=twilight,
                       min_moon_separation_deg=moon_full, min_moon_separation_new_deg=moon_new,
                       moon_ignore_below_horizon=ignore_down, horizon_mask=mask)


def _moon_separations(c: _Collector, k: dict):
    """(full-Moon, new-Moon or None) separations (deg) of [constraints]; the new one <= the full one."""
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
    return (0.0 if moon_full is None else moon_full), moon_new


def _overheads_section(c: _Collector, doc: dict):
    """[overheads]: slew and setup (minutes), loss fraction (0 to 0.95)."""
    o = _table(c, doc, "overheads", required=False)
    c.unknown(o, _OVERHEAD_KEYS, "overheads.")
    slew = c.number(o, "slew_minutes", "overheads.", required=False, lo=0.0, hi=600.0, default=0.0)
    setup = c.number(o, "setup_minutes", "overheads.", required=False, lo=0.0, hi=600.0, default=0.0)
    loss = c.number(o, "loss_fraction", "overheads.", required=False, lo=0.0, hi=0.95,
                    default=DEFAULT_LOSS_FRACTION)
    return slew, setup, loss


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
