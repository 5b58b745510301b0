"""Observing sites: the TOML site file, its validation and the frozen :class:`Site` record.

A site file (see ``site_configs/alto_quemado.toml`` for a documented example) holds::

    [site]          name, latitude_deg, longitude_deg, elevation_m, timezone (IANA name)
    instruments     list of instrument files, relative to the site file
    [constraints]   min_altitude_deg and/or max_airmass, twilight, Moon separation, horizon_mask
    [overheads]     slew_minutes, setup_minutes, loss_fraction

Every problem is reported with the file and the dotted key (``constraints.twilight``), all at
once: :func:`check_site` returns them as a list, :func:`load_site` raises :class:`ConfigError`
carrying them. The checks themselves, one step per section of the file, are in
:mod:`rhofollow.planning.site_validation`.
"""
from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from zoneinfo import ZoneInfo

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

    Parameters
    ----------
    airmass : float
        Airmass (dimensionless, sec z), >= 1.

    Returns
    -------
    float
        Altitude above the horizon (degrees).
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
        """Minimum altitude required at an azimuth: the horizon mask or ``min_altitude_deg``, the higher.

        Parameters
        ----------
        az_deg : float or array
            Azimuth (degrees, N = 0, E = 90).

        Returns
        -------
        ndarray
            Required altitude (degrees), shaped like ``az_deg``.
        """
        az = np.asarray(az_deg, dtype=float)
        if not self.horizon_mask:
            return np.full(az.shape, self.min_altitude_deg)
        return np.maximum(self.min_altitude_deg, _mask_interp(self.horizon_mask, az))

    def required_moon_separation_deg(self, illumination) -> np.ndarray:
        """Minimum Moon separation at the Moon's illuminated fraction.

        Parameters
        ----------
        illumination : float or array
            Illuminated fraction of the Moon (0 new, 1 full).

        Returns
        -------
        ndarray
            Required separation (degrees), shaped like ``illumination``.
        """
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


#: Loss fraction of a site file without ``overheads.loss_fraction``.
DEFAULT_LOSS_FRACTION = 0.25


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
    """Build a :class:`Site` from an already-parsed TOML document.

    Parameters
    ----------
    doc : dict
        The parsed site file.
    base_dir : str, Path or None
        Folder that relative instrument paths are resolved against.
    source : str, Path or None
        The file the document came from (named in the errors).
    check_files : bool
        Also require the instrument files to exist.

    Returns
    -------
    Site
        The site (angles in degrees, elevation in metres, overheads in minutes).

    Raises
    ------
    ConfigError
        With every problem found, each naming the dotted key.
    """
    from rhofollow.planning.site_validation import validate_site_document

    site, problems = validate_site_document(doc, Path(base_dir) if base_dir is not None else None, check_files,
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

    Returns
    -------
    Site
        The site (angles in degrees, elevation in metres, overheads in minutes).

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
    """Problems in a site file (and its instrument files) as sentences naming the file and key.

    Parameters
    ----------
    path : str or Path
        The site file.
    check_files : bool
        Also require the instrument files to exist and read them.

    Returns
    -------
    list of str
        One sentence per problem; empty if the file is valid.
    """
    path = Path(path)
    doc, problems = _read(path)
    site = None
    if not problems:
        from rhofollow.planning.site_validation import validate_site_document

        site, problems = validate_site_document(doc, path.parent, check_files, path)
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
