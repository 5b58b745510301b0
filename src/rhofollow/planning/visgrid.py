"""The visibility grid the observing tasks read: targets x times, observability and airmass.

Plain arrays on a regular UTC grid (Julian Dates), filled by :func:`rhofollow.planning.night.night_visibility`
from the visibility engine or built by hand in tests; no astropy here.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["VisGrid"]


@dataclass
class VisGrid:
    """Observability of targets on a regular time grid of one night (or any span).

    Attributes
    ----------
    t_jd : array (N,)
        Grid times, Julian Date UTC, regularly spaced.
    names : list of str (T,)
        Target names, rows of the arrays.
    observable : bool array (T, N)
        True where every constraint (altitude / airmass, night, Moon, horizon) holds.
    airmass : float array (T, N)
        Airmass (inf or nan below the horizon).
    """

    t_jd: np.ndarray
    names: list
    observable: np.ndarray
    airmass: np.ndarray

    def __post_init__(self):
        self.t_jd = np.asarray(self.t_jd, dtype=float)
        self.observable = np.atleast_2d(np.asarray(self.observable, dtype=bool))
        self.airmass = np.atleast_2d(np.asarray(self.airmass, dtype=float))
        shape = (len(self.names), self.t_jd.size)
        if self.observable.shape != shape or self.airmass.shape != shape:
            raise ValueError(f"visibility arrays must have shape {shape} (targets, times)")
        self._row = {n: i for i, n in enumerate(self.names)}

    @property
    def step_h(self) -> float:
        """Grid spacing in hours."""
        return float((self.t_jd[1] - self.t_jd[0]) * 24.0) if self.t_jd.size > 1 else 0.0

    def hours(self, jd) -> np.ndarray:
        """Hours since the first grid time.

        Parameters
        ----------
        jd : float or array
            Times (Julian Date, UTC).

        Returns
        -------
        ndarray
            Hours since ``t_jd[0]`` (negative before it).
        """
        return (np.asarray(jd, dtype=float) - self.t_jd[0]) * 24.0

    def row(self, name: str) -> int:
        """Row of a target in the visibility arrays.

        Parameters
        ----------
        name : str
            Target name (one of ``names``).

        Returns
        -------
        int
            Row index; KeyError with the name if the target is absent.
        """
        return self._row[name]

    def fraction_observable(self, name: str, jd0: float, jd1: float) -> float:
        """Fraction of the grid points bracketing [jd0, jd1] where the target is observable.

        The grid points used run from the last one at or before ``jd0`` to the first one at or
        after ``jd1`` (conservative: both ends of the interval are bracketed).

        Parameters
        ----------
        name : str
            Target name.
        jd0, jd1 : float
            Interval limits (Julian Date, UTC).

        Returns
        -------
        float
            Fraction (0..1) of those grid points where the target is observable; 0 when the
            interval lies outside the grid.
        """
        t = self.t_jd
        if t.size == 0 or jd1 < t[0] - 1e-9 or jd0 > t[-1] + 1e-9:
            return 0.0
        i0 = max(int(np.searchsorted(t, jd0 + 1e-9, side="right")) - 1, 0)
        i1 = min(int(np.searchsorted(t, jd1 - 1e-9, side="left")), t.size - 1)
        return float(self.observable[self.row(name), i0:i1 + 1].mean())

    def airmass_max(self, name: str, jd0, jd1, n: int = 9) -> np.ndarray:
        """Highest airmass over [jd0, jd1], by linear interpolation of the grid at ``n`` points.

        Parameters
        ----------
        name : str
            Target name.
        jd0, jd1 : float or array
            Interval limits (Julian Date, UTC); arrays broadcast against each other.
        n : int
            Number of evenly spaced points sampled in each interval, ends included.

        Returns
        -------
        ndarray
            Highest airmass (dimensionless, sec z) per interval; grid points below the horizon
            count as airmass 1000.
        """
        jd0, jd1 = np.broadcast_arrays(np.asarray(jd0, float), np.asarray(jd1, float))
        f = np.linspace(0.0, 1.0, n)
        pts = jd0[..., None] + (jd1 - jd0)[..., None] * f
        x = self.airmass[self.row(name)]
        x = np.where(np.isfinite(x), x, 1e3)
        return np.interp(pts, self.t_jd, x).max(axis=-1)
