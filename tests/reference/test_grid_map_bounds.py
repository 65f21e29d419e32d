"""Variogram maps by the grid method hold their stated bounds against the exact map.

References: the exact map (pair enumeration by the map kernel, itself checked against
``scipy.spatial.distance.pdist``-style brute force in test_map_brute_force.py) on the
same samples, several seeds, fields and cell layouts; and, for a raster given as
scattered points on its own nodes, the raster's FFT map (checked against explicit
shifts in test_fft_raster_brute_force.py), which the grid method must reproduce
exactly when its grid cells divide the raster's spacing. The pair-count bound is
rigorous (derivation in lagwise.core.variography.bounds, "Map cells").
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.raster import build_raster, raster_points
from lagwise.core.limits import Limits
from lagwise.core.variography.maps import raster_map, variogram_map

from .simulate import smooth_scattered

LIMITS = Limits(max_pairs=10**13)
# (cell_size, cells): None, None is the automatic rule (about 17 a cell, 40 cells, on a 1000 square).
LAYOUTS = [(None, None), (25.0, 8), (6.0, 12)]


def _array(values):
    return np.array([[np.nan if v is None else v for v in row] for row in values])


def _check(samples, cell_size, cells, statistic="semivariance"):
    grid = variogram_map(samples, cell_size=cell_size, cells=cells, method="grid", statistic=statistic, limits=LIMITS)
    exact = variogram_map(samples, cell_size=grid.cell_size, cells=grid.cells, statistic=statistic, limits=LIMITS)
    assert grid.method == "grid" and grid.grid is not None and grid.grid.source == "binned"
    assert exact.method == "exact" and exact.error_bound is None
    assert np.all(np.abs(grid.pairs - exact.pairs) <= grid.pair_bound)
    g, e = _array(grid.values), _array(exact.values)
    both = np.isfinite(g) & np.isfinite(e) & np.isfinite(grid.error_bound)
    assert both.sum() > 0.5 * g.size
    assert np.all(np.abs(g - e)[both] <= grid.error_bound[both] * np.abs(g[both]) + 1e-12)
    assert np.array_equal(grid.bound_exceeded[both], grid.error_bound[both] > grid.grid.tolerance)
    assert grid.grid.flagged == int(grid.bound_exceeded.sum())
    # The grid method leaves out only pairs within one grid cell (each counted as h and -h).
    assert exact.pairs.sum() - grid.pairs.sum() <= grid.pair_bound.sum()
    return grid, exact


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("layout", range(len(LAYOUTS)))
def test_map_bounds_hold_on_20000_samples(seed, layout):
    cell_size, cells = LAYOUTS[layout]
    _check(smooth_scattered(20_000, seed, clustered=seed == 3), cell_size, cells)


def test_map_bounds_hold_for_the_noncentred_covariance():
    _check(smooth_scattered(20_000, 4), 25.0, 8, statistic="covariance_noncentered")


def test_counts_add_up_to_the_pairs_within_reach():
    """Common practice: a map counts each pair twice (h and -h); every pair binned in two different
    grid cells is counted, so the grid's total is the exact total less the within-cell pairs at most."""
    samples = smooth_scattered(3_000, 6)
    grid, exact = _check(samples, 400.0, 2)  # the map covers every separation of the 1000 square
    n = samples.size
    assert exact.pairs.sum() == n * (n - 1)
    assert grid.pairs.sum() == n * (n - 1) - 2 * grid.grid.within_cell_pairs


def test_raster_as_points_gives_the_raster_map_exactly(rng):
    """A raster's nodes as scattered samples: map cells of 31/8 take grid cells of 1/8 the spacing
    (31 grid cells a map cell; a power of two, so every node sits exactly on a grid corner), which
    make each lag vector the nodes' own offset."""
    nx, ny = 48, 40
    x, y = np.meshgrid(np.arange(nx, dtype=np.float64), np.arange(ny, dtype=np.float64))
    values = np.sin(x.ravel() / 6.0) + np.cos(y.ravel() / 9.0) + 0.3 * rng.normal(size=nx * ny)
    values[rng.random(nx * ny) < 0.2] = np.nan
    values[0] = 1.0  # the corner node present: the grid starts on the raster's origin
    raster = build_raster((0.0, 0.0), (1.0, 1.0), (nx, ny), values)
    reference = raster_map(raster, cell_size=31 / 8, cells=6)
    points = raster_points(raster, LIMITS)
    found = variogram_map(points, cell_size=31 / 8, cells=6, method="grid", limits=LIMITS)
    assert found.grid.spacing == (0.125, 0.125)
    assert np.array_equal(found.pairs, reference.pairs)
    assert found.grid.within_cell_pairs == 0
    np.testing.assert_allclose(_array(found.values), _array(reference.values), rtol=1e-9, atol=1e-12)


def test_flags_follow_the_tolerance():
    samples = smooth_scattered(5_000, 5)
    strict = variogram_map(samples, cell_size=25.0, cells=6, method="grid", tolerance=1e-6, limits=LIMITS)
    loose = variogram_map(samples, cell_size=25.0, cells=6, method="grid", tolerance=0.99, limits=LIMITS)
    assert strict.grid.flagged == int(strict.bound_exceeded.sum()) > loose.grid.flagged
    assert any("error bound above" in w for w in strict.warnings)


@pytest.mark.slow
@pytest.mark.parametrize("layout", [(10.0, 10), (3.0, 16)])
def test_map_bounds_hold_on_200000_samples(layout):
    # Maps reaching about 100 and 50: some 1e9 and 2.5e8 pairs for the exact map.
    _check(smooth_scattered(200_000, 7), *layout)
