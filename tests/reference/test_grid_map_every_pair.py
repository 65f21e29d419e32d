"""The grid map against direct enumeration of every pair, and the measured offset spread.

References: every pair of samples enumerated with numpy (the brute-force reading of
``scipy.spatial.distance.pdist``, keeping the separation vector); the map cell of a pair
by floor(h / S + 1/2) per axis, as the exact map kernel does (common practice for
variogram maps).
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.limits import Limits
from lagwise.core.variography.gridded import binned_nodes, grid_summary
from lagwise.core.variography.maps import variogram_map

from .simulate import smooth_scattered

LIMITS = Limits(max_pairs=10**13)


def test_offset_spread_covers_every_pair_of_offsets():
    """The spread is the widest difference of two samples' offsets within their cells, plus a margin."""
    samples = smooth_scattered(3_000, 4)
    cell = 37.0 / 31
    grid = binned_nodes(samples.coords, samples.values, cell, grid_summary(samples))
    ny, nx = grid.nodes.count.shape
    xy = samples.coords
    ix = np.minimum(((xy[:, 0] - grid.origin[0]) / cell).astype(np.int64), nx - 1)
    iy = np.minimum(((xy[:, 1] - grid.origin[1]) / cell).astype(np.int64), ny - 1)
    for axis, index, origin in ((0, ix, grid.origin[0]), (1, iy, grid.origin[1])):
        u = xy[:, axis] - origin - index * cell
        widest = float(u.max() - u.min())
        assert widest <= grid.spread[axis] <= widest + 1e-6 * cell
        assert grid.spread[axis] < cell


def _numpy_map(samples, size, cells):
    """Semivariance map and pair counts (each pair as h and -h) by numpy over every ordered pair."""
    xy, z = samples.coords, samples.values
    width = 2 * cells + 1
    total, count = np.zeros(width * width), np.zeros(width * width)
    for start in range(0, len(z), 500):
        a = np.arange(start, min(start + 500, len(z)))
        hx = xy[None, :, 0] - xy[a, None, 0]
        hy = xy[None, :, 1] - xy[a, None, 1]
        i = np.floor(hx / size + 0.5).astype(np.int64)
        j = np.floor(hy / size + 0.5).astype(np.int64)
        keep = (np.abs(i) <= cells) & (np.abs(j) <= cells) & ((hx != 0) | (hy != 0))
        cell = ((j + cells) * width + (i + cells))[keep]
        square = ((z[None, :] - z[a, None]) ** 2 / 2.0)[keep]
        total += np.bincount(cell, weights=square, minlength=width * width)
        count += np.bincount(cell, minlength=width * width)
    with np.errstate(invalid="ignore", divide="ignore"):
        return (total / count).reshape(width, width), count.reshape(width, width)


@pytest.mark.parametrize("seed, size, cells", [(1, 60.0, 6), (2, 35.0, 10), (3, 120.0, 3)])
def test_map_within_bounds_against_every_pair(seed, size, cells):
    samples = smooth_scattered(4_000, seed, clustered=seed == 3)
    grid = variogram_map(samples, cell_size=size, cells=cells, method="grid", limits=LIMITS)
    value, count = _numpy_map(samples, size, cells)
    assert np.all(np.abs(grid.pairs - count) <= grid.pair_bound)
    g = np.array([[np.nan if v is None else v for v in row] for row in grid.values])
    both = np.isfinite(g) & np.isfinite(value) & np.isfinite(grid.error_bound)
    assert both.sum() > 0.5 * g.size
    assert np.all(np.abs(g - value)[both] <= grid.error_bound[both] * np.abs(g[both]) + 1e-12)
