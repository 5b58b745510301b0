"""The adaptive sampler's proposal: a piecewise-constant density on a grid over the unit cube.

Cell edges follow the weighted marginal quantiles of the points the proposal is fitted to (as in
VEGAS, Lepage 1978), cell masses the weighted joint histogram; the grid is mixed with the uniform
density (defensive mixture, Hesterberg 1995). Used by
:func:`rhofollow.physics.sampling.adaptive_importance_sample`.
"""
from __future__ import annotations

import numpy as np

__all__ = ["grid_bins"]

_BINS = {1: (128,), 2: (40, 40), 3: (20, 20, 10), 4: (12, 12, 8, 8)}
_SLICES = 4096  # slices of [0, 1] in the proposal's cell look-up table


def _slice_table(edges):
    """Cell of the left end of each of ``_SLICES`` equal slices of [0, 1], or None when two edges may
    share a slice (then one comparison per point would not finish the look-up)."""
    if not np.min(np.diff(edges)) > 1.0 / _SLICES:
        return None
    return np.searchsorted(edges, np.arange(_SLICES) / _SLICES, side="right") - 1


class _GridProposal:
    """Piecewise-constant density on a rectilinear grid over the unit cube, mixed with the uniform one.

    Cell edges per dimension follow the weighted marginal quantiles of the points it is fitted to
    (blended with uniform edges), so cells are small where the posterior mass is (as in VEGAS,
    Lepage 1978); cell masses come from the weighted joint histogram, smoothed to the neighbours.
    """

    def __init__(self, u, w, d, defensive=0.15):
        bins = grid_bins(d)
        self.bins = bins
        self.d = d
        w = np.asarray(w, dtype=float)
        w = w / w.sum()
        self.edges, self._tables = [], []
        idx = []
        fine = 1024
        probs_fine = np.linspace(0, 1, fine + 1)
        for j in range(d):
            nb = bins[j]
            # weighted marginal CDF on a fine uniform grid (O(n), no sort)
            hist = np.bincount(np.minimum((u[:, j] * fine).astype(int), fine - 1), weights=w, minlength=fine)
            cdf = np.concatenate([[0.0], np.cumsum(hist)])
            cdf /= cdf[-1]
            probs = np.linspace(0, 1, nb + 1)
            q = np.interp(probs, cdf, probs_fine)
            edges = 0.7 * q + 0.3 * probs
            edges[0], edges[-1] = 0.0, 1.0
            edges = np.maximum.accumulate(edges)
            self.edges.append(edges)
            self._tables.append(_slice_table(edges))
            idx.append(self._cells(j, u[:, j]))
        flat = np.ravel_multi_index(tuple(idx), bins)
        ncell = int(np.prod(bins))
        m = np.bincount(flat, weights=w, minlength=ncell).reshape(bins)
        sm = m.copy()
        for ax in range(d):
            sm = sm + 0.25 * (np.roll(m, 1, axis=ax) + np.roll(m, -1, axis=ax))
        sm = sm.ravel()
        sm = sm / sm.sum()
        widths = [np.diff(e) for e in self.edges]
        vol = widths[0]
        for wd in widths[1:]:
            vol = np.multiply.outer(vol, wd)
        self.vol = np.asarray(vol).ravel()
        self.mass = sm
        self.cdf = np.cumsum(sm)
        self.cdf[-1] = 1.0
        self._cdf_table = np.searchsorted(self.cdf, np.arange(_SLICES) / _SLICES)
        self.defensive = defensive

    def _cells(self, j, x):
        """Cell index of x along dimension j: searchsorted(edges, x, "right") - 1, clipped to the cells.

        A table over 4096 equal slices of [0, 1] gives the cell of each slice's left end; one
        comparison with the next edge finishes it, which is exact because no two edges lie within
        one slice (the edges are at least 0.3 / bins apart: 30 % uniform blend). Falls back to the
        search when that does not hold or x leaves [0, 1].
        """
        edges, nb = self.edges[j], self.bins[j]
        table = self._tables[j]
        if table is None or not (x.size == 0 or (x.min() >= 0.0 and x.max() <= 1.0)):
            return np.clip(np.searchsorted(edges, x, side="right") - 1, 0, nb - 1)
        idx = table[np.minimum((x * _SLICES).astype(np.intp), _SLICES - 1)]
        idx += x >= edges[idx + 1]
        return np.minimum(idx, nb - 1, out=idx)

    def log_density(self, u):
        """Log density (natural log, per unit volume of the unit cube) of the mixture at points u (n, d).

        Parameters
        ----------
        u : ndarray (n, d)
            Points of the unit cube (dimensionless).

        Returns
        -------
        ndarray (n,)
            Log density.
        """
        idx = [self._cells(j, u[:, j]) for j in range(self.d)]
        flat = np.ravel_multi_index(tuple(idx), self.bins)
        return np.log((1 - self.defensive) * self.mass[flat] / self.vol[flat] + self.defensive)

    def _cell_of_mass(self, r):
        """searchsorted(cdf, r) for r in [0, 1): the first cell of each r's slice from a table, then
        steps over the few cumulative masses inside that slice (the search for any still short)."""
        cdf = self.cdf
        idx = self._cdf_table[(r * _SLICES).astype(np.intp)]
        for _ in range(4):
            step = cdf[idx] < r          # cdf[-1] = 1 > r, so idx stays a valid index
            if not step.any():
                return idx
            idx += step
        step = cdf[idx] < r
        if step.any():
            idx[step] = np.searchsorted(cdf, r[step])
        return idx

    def sample(self, rng, n):
        """Draw n points from the mixture.

        Parameters
        ----------
        rng : numpy.random.Generator
            Source of the draws.
        n : int
            Number of points.

        Returns
        -------
        (ndarray (n, d), ndarray (n,))
            Points of the unit cube (dimensionless) and their log density (per unit volume).
        """
        cells = self._cell_of_mass(rng.random(n))
        cells = np.minimum(cells, len(self.cdf) - 1)
        idx = np.unravel_index(cells, self.bins)
        u = np.empty((n, self.d))
        r = rng.random((n, self.d))
        for j in range(self.d):
            lo = self.edges[j][idx[j]]
            hi = self.edges[j][idx[j] + 1]
            u[:, j] = lo + (hi - lo) * r[:, j]
        uniform = rng.random(n) < self.defensive
        if uniform.any():
            u[uniform] = rng.random((int(uniform.sum()), self.d))
        return u, self.log_density(u)


def grid_bins(d: int) -> tuple:
    """Cells per dimension of the adaptive proposal grid for d dimensions.

    Parameters
    ----------
    d : int
        Number of adapted dimensions.

    Returns
    -------
    tuple of int
        Cells along each dimension.
    """
    return _BINS.get(d, (6,) * d)
