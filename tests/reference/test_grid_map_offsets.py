"""The grid map's offset moments and crossing caps against direct enumeration of the pairs.

References: every pair of samples enumerated with numpy (the brute-force reading of
``scipy.spatial.distance.pdist``, but keeping the separation vector); the map cell of a
pair by floor(h / S + 1/2) per axis, as the exact map kernel does (common practice for
variogram maps); Cantelli's inequality (Cantelli 1928) for the crossing caps, checked here
only as "never below the share that actually crosses".
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.limits import Limits
from lagwise.core.variography import bounds
from lagwise.core.variography.binning import bin_offsets
from lagwise.core.variography.fft import offset_moments
from lagwise.core.variography.gridded import binned_nodes, grid_summary
from lagwise.core.variography.maps import variogram_map

from .simulate import smooth_scattered

LIMITS = Limits(max_pairs=10**13)


def _pairs(samples, cell):
    """Grid cells, offsets and ordered pairs (a != b) of a small sample set, by numpy."""
    summary = grid_summary(samples)
    grid = binned_nodes(samples.coords, samples.values, cell, summary)
    x0, y0 = grid.origin
    ny, nx = grid.nodes.count.shape
    xy = samples.coords
    ix = np.minimum(((xy[:, 0] - x0) / cell).astype(np.int64), nx - 1)
    iy = np.minimum(((xy[:, 1] - y0) / cell).astype(np.int64), ny - 1)
    a, b = np.nonzero(~np.eye(len(xy), dtype=bool))
    return grid, ix, iy, a, b


@pytest.mark.parametrize("seed", [1, 2])
def test_offset_moments_equal_the_pair_sums(seed):
    samples = smooth_scattered(400, seed)
    cell = 37.0
    grid, ix, iy, a, b = _pairs(samples, cell)
    ny, nx = grid.nodes.count.shape
    reach = (nx - 1, ny - 1)
    xy = samples.coords
    axes = [
        tuple(
            v.reshape(ny, nx)
            for v in bin_offsets(np.ascontiguousarray(xy), grid.origin[0], grid.origin[1], cell, nx, ny, axis)
        )
        for axis in (0, 1)
    ]
    found = offset_moments(grid.nodes.count, iter(axes), reach)
    u = np.stack([xy[:, 0] - grid.origin[0] - ix * cell, xy[:, 1] - grid.origin[1] - iy * cell], axis=1)
    row = iy[b] - iy[a] + reach[1]
    column = ix[b] - ix[a] + reach[0]
    for axis in (0, 1):
        d = u[b, axis] - u[a, axis]
        for power, got in ((1, found[axis].first), (2, found[axis].second)):
            expected = np.zeros(got.shape)
            np.add.at(expected, (row, column), d**power)
            np.testing.assert_allclose(got, expected, atol=1e-9 * cell**power * len(xy))
        assert found[axis].first_error > 0 and found[axis].second_error > 0


def test_crossing_caps_cover_the_pairs_that_cross():
    """Each boundary lag vector's cap in a neighbouring column is at least the share of its pairs there."""
    samples = smooth_scattered(1500, 3)
    size, cell = 93.0, 93.0 / 5
    grid, ix, iy, a, b = _pairs(samples, cell)
    ny, nx = grid.nodes.count.shape
    reach = (nx - 1, ny - 1)
    xy = samples.coords
    axes = [
        tuple(
            v.reshape(ny, nx)
            for v in bin_offsets(np.ascontiguousarray(xy), grid.origin[0], grid.origin[1], cell, nx, ny, axis)
        )
        for axis in (0, 1)
    ]
    moments = offset_moments(grid.nodes.count, iter(axes), reach)
    sx = ix[b] - ix[a]
    h = xy[b, 0] - xy[a, 0]
    key = (iy[b] - iy[a] + reach[1]) * (2 * reach[0] + 1) + sx + reach[0]
    lags, first = np.unique(key, return_index=True)
    counts = np.bincount(key, minlength=lags.max() + 1)[lags].astype(float)
    jj, ii = lags // (2 * reach[0] + 1), lags % (2 * reach[0] + 1)
    along = bounds._Crossing(ii - reach[0], cell, size, grid.spread[0], grid.margin, counts, moments[0], jj, ii)
    column = np.floor(h / size + 0.5).astype(np.int64)
    position = np.searchsorted(lags, key)
    checked = 0
    for step in (-1, 1):
        index = along.own + step
        cap = along.cap(index, np.arange(lags.size))
        there = np.bincount(position, weights=column == index[position], minlength=lags.size) / counts
        assert np.all(there <= cap + 1e-12)
        assert np.all(cap <= 1.0) and np.all(cap >= 0.0)
        checked += int(np.sum(there > 0))
    assert checked > 50
    assert np.median(cap[cap < 1]) < 0.6  # the columns half a grid cell from an edge: 0.4 for even spreads


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
