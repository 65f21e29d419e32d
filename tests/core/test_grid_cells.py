"""The grid method's cell side against classes much wider or narrower than the samples' extent.

Reference: the exact pair engine on the same samples (``method="exact"``), whose class values the
grid's must lie within their stated relative error bounds.
"""

from __future__ import annotations

import numpy as np
from lagwise.core.data.samples import build_sample_set
from lagwise.core.variography.experimental import experimental_variogram
from lagwise.core.variography.gridded import MIN_GRID_SIDE
from lagwise.core.variography.lags import LagRequest


def _samples(rng, n=3000, side=100.0):
    x, y = rng.uniform(0, side, n), rng.uniform(0, side, n)
    return build_sample_set(np.sin(x / 10) + rng.normal(0, 0.1, n), x, y)


def test_a_class_wider_than_the_extent_keeps_a_fine_grid(rng):
    """One class holds every pair: the grid has MIN_GRID_SIDE cells a side, not one cell with every pair left out."""
    samples = _samples(rng)
    lags = LagRequest(width=1e6, count=2)
    grid = experimental_variogram(samples, lags=lags, method="grid")
    exact = experimental_variogram(samples, lags=lags, method="exact")
    assert max(grid.grid.shape) >= MIN_GRID_SIDE - 1
    a, b = grid.directions[0].classes[0], exact.directions[0].classes[0]
    assert abs(a.value - b.value) <= a.error_bound * abs(a.value)
    assert a.pairs + grid.grid.within_cell_pairs == b.pairs == samples.size * (samples.size - 1) // 2


def test_a_class_the_grid_cannot_see_says_how_many_pairs_it_may_hold(rng):
    samples = _samples(rng)
    result = experimental_variogram(samples, lags=LagRequest(edges=(0.0, 1e-9, 50.0)), method="grid")
    first = result.directions[0].classes[0]
    assert first.pairs == 0 and first.value is None and first.pair_bound > 0 and first.bound_exceeded
    assert f"up to {first.pair_bound} pairs of samples may lie in this class" in first.reason
