"""The site's frame on the rotating Earth and the unit-vector helpers of the visibility engine.

With L the Earth rotation angle (ERFA ``era00``) plus the site's longitude, the zenith is
Z = (cos phi cos L, cos phi sin L, sin phi) in CIRS; east and north follow. Pure numpy and ERFA, no
astropy; angles in radians, positions in au.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["SiteFrame", "unit_vectors", "radec_to_unit"]


def unit_vectors(v):
    """Vectors normalised along their last axis.

    Parameters
    ----------
    v : ndarray (..., 3)
        Vectors (any length unit, e.g. au).

    Returns
    -------
    ndarray (..., 3)
        Unit vectors (dimensionless).
    """
    return v / np.linalg.norm(v, axis=-1, keepdims=True)


def radec_to_unit(ra_rad, dec_rad):
    """Unit vectors of directions given by right ascension and declination.

    Parameters
    ----------
    ra_rad, dec_rad : float or array
        Right ascension and declination (radians), broadcast against each other.

    Returns
    -------
    ndarray (..., 3)
        Unit vectors (dimensionless) in the frame of the coordinates.
    """
    c = np.cos(dec_rad)
    return np.stack([c * np.cos(ra_rad), c * np.sin(ra_rad), np.sin(dec_rad)], axis=-1)


@dataclass(frozen=True)
class SiteFrame:
    """The site on the rotating Earth: latitude and longitude (radians) and its geocentric
    position (au): distance from the rotation axis ``rho_xy`` and height above the equator ``geo_z``."""

    lat: float
    lon: float
    rho_xy: float
    geo_z: float

    def frame(self, t, dut1: float):
        """Zenith, east, north unit vectors and the site's geocentric position (au) in CIRS.

        Parameters
        ----------
        t : ndarray (T,)
            Times, JD UTC (days).
        dut1 : float
            UT1 - UTC of the night, days.

        Returns
        -------
        z, east, north, obs : ndarray (T, 3)
            Zenith, east and north unit vectors (dimensionless) and the site's geocentric
            position (au). Polar motion is neglected (< 0.5 arcsec).
        """
        import erfa

        L = erfa.era00(t + dut1, 0.0) + self.lon
        cl, sl = np.cos(L), np.sin(L)
        cp, sp = math.cos(self.lat), math.sin(self.lat)
        zero = np.zeros_like(L)
        z = np.stack([cp * cl, cp * sl, np.full_like(L, sp)], axis=-1)
        east = np.stack([-sl, cl, zero], axis=-1)
        north = np.stack([-sp * cl, -sp * sl, np.full_like(L, cp)], axis=-1)
        obs = np.stack([self.rho_xy * cl, self.rho_xy * sl, np.full_like(L, self.geo_z)], axis=-1)
        return z, east, north, obs

    def zenith(self, t_ut1):
        """Zenith unit vector and the site's geocentric position in CIRS.

        Parameters
        ----------
        t_ut1 : float or array
            Times, JD UT1 (days), any shape.

        Returns
        -------
        z, obs : ndarray (..., 3)
            Zenith unit vector (dimensionless) and geocentric position (au).
        """
        import erfa

        L = erfa.era00(t_ut1, 0.0) + self.lon
        cp, sp = math.cos(self.lat), math.sin(self.lat)
        cl, sl = np.cos(L), np.sin(L)
        z = np.stack([cp * cl, cp * sl, np.full(np.shape(L), sp)], axis=-1)
        obs = np.stack([self.rho_xy * cl, self.rho_xy * sl, np.full(np.shape(L), self.geo_z)], -1)
        return z, obs
