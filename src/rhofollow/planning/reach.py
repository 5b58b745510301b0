"""Which targets can ever reach a site's altitude limit (one pass over each target's diurnal circle).

A star of declination delta seen from geodetic latitude phi moves, over one sidereal day, along
alt(H) = asin(sin phi sin delta + cos phi cos delta cos H) at azimuth
az(H) = atan2(-cos delta sin H, sin delta cos phi - cos delta sin phi cos H) (N = 0, E = 90 deg),
the standard hour-angle -> horizon transformation of spherical astronomy. A target is *unreachable*
when no point of that circle is at or above the site's required altitude at its azimuth
(``min_altitude_deg``, the airmass limit, the horizon mask): whatever the date, it can never be
observed there, so planning it is pointless.

Geometric altitudes (no refraction, as in the site file), coordinates of the catalogue (ICRS; the
precession of declination over a few decades, below 0.2 deg, is covered by ``tolerance_deg``).
"""
from __future__ import annotations

import numpy as np

__all__ = ["highest_altitude_deg", "unreachable_targets"]

_N_HA = 1441  # hour-angle grid: 0.25 deg steps, far finer than any horizon mask


def _circle(dec_deg, lat_deg):
    """Altitude and azimuth (deg) on the diurnal circle: arrays (n_targets, _N_HA)."""
    d = np.radians(np.asarray(dec_deg, dtype=float))[:, None]
    p = np.radians(float(lat_deg))
    h = np.linspace(0.0, 2.0 * np.pi, _N_HA)[None, :]
    sin_alt = np.sin(p) * np.sin(d) + np.cos(p) * np.cos(d) * np.cos(h)
    alt = np.degrees(np.arcsin(np.clip(sin_alt, -1.0, 1.0)))
    az = np.degrees(np.arctan2(-np.cos(d) * np.sin(h), np.sin(d) * np.cos(p) - np.cos(d) * np.sin(p) * np.cos(h)))
    return alt, np.mod(az, 360.0)


def highest_altitude_deg(dec_deg, lat_deg: float) -> np.ndarray:
    """Upper-culmination altitude of declinations at a latitude: 90 - |phi - delta|.

    Parameters
    ----------
    dec_deg : float or array
        Declinations (degrees).
    lat_deg : float
        Geodetic latitude of the site (degrees).

    Returns
    -------
    ndarray
        Highest geometric altitude (degrees), shaped like ``dec_deg``; negative for a star that
        never rises.
    """
    return 90.0 - np.abs(float(lat_deg) - np.asarray(dec_deg, dtype=float))


def unreachable_targets(site, targets, tolerance_deg: float = 0.2) -> dict[str, str]:
    """Targets that never reach ``site``'s required altitude: name -> one-sentence warning.

    Parameters
    ----------
    site : :class:`rhofollow.planning.site.Site`
        The site (latitude and constraints).
    targets : iterable of (name, dec_deg) pairs
        Target names and declinations (degrees; a non-finite dec is ignored).
    tolerance_deg : float
        A target this close below the limit counts as reachable (degrees).

    Returns
    -------
    dict
        Name -> one-sentence warning, for the unreachable targets only.
    """
    items = [(str(n), float(d)) for n, d in targets if d is not None and np.isfinite(float(d))]
    if not items:
        return {}
    dec = np.array([d for _, d in items])
    alt, az = _circle(dec, site.latitude_deg)
    need = site.constraints.required_altitude_deg(az)
    margin = (alt - need).max(axis=1)
    top = highest_altitude_deg(dec, site.latitude_deg)
    out = {}
    for (name, d), m, hi in zip(items, margin, top):
        if m >= -tolerance_deg:
            continue
        if hi < 0:
            out[name] = (f"never rises at {site.name} (dec {d:+.2f} deg, latitude {site.latitude_deg:+.2f} deg: "
                         f"highest altitude {hi:.1f} deg); nothing can be planned for it")
        else:
            out[name] = (f"never reaches the altitude limit of {site.name} (highest altitude {hi:.1f} deg, "
                         f"limit {site.constraints.min_altitude_deg:.1f} deg and the horizon mask); "
                         "nothing can be planned for it")
    return out
