"""The span kernel (candidates binned in SIMD loops, equal-width classes by floor division,
several-direction pairs apart) against brute-force enumeration.

Reference: every pair from ``scipy.spatial.distance.pdist`` (scipy), classes by
``numpy.searchsorted`` and direction membership by explicit angles (``tests/reference/brute.py``);
counts must be equal and sums of squared differences agree to 1e-9 (relative).
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.variography import kernels as K
from lagwise.core.variography.directions import DirectionClass
from lagwise.core.variography.pairs import accumulate, layout, prepare

from .brute import members, pair_table


def _check(coords, values, directions, edges_per_direction):
    classes = layout(directions, edges_per_direction)
    assert classes.horizontal
    table, colocated = accumulate(prepare(coords, values), classes, K.MODE_SQUARE)
    i, j, h, d = pair_table(coords, values)
    square = (values[j] - values[i]) ** 2
    assert colocated == int(np.count_nonzero(d == 0.0))
    for k, (direction, edges) in enumerate(zip(directions, edges_per_direction, strict=True)):
        ok, klass, _ = members(h, d, edges, direction.azimuth, direction.tolerance)
        counts = np.bincount(klass[ok], minlength=len(edges) - 1)
        sums = np.bincount(klass[ok], weights=square[ok], minlength=len(edges) - 1)
        got = table[k, : len(edges) - 1]
        np.testing.assert_array_equal(got[:, K.COUNT], counts)
        np.testing.assert_allclose(got[:, K.SQUARE], sums, rtol=1e-9, atol=1e-9 * sums.max())
        np.testing.assert_allclose(
            got[:, K.DISTANCE], np.bincount(klass[ok], weights=d[ok], minlength=len(edges) - 1), rtol=1e-9
        )


def _grid(rows, columns, spacing):
    g = np.arange(rows * columns)
    return np.column_stack([(g % columns) * spacing, (g // columns) * spacing])


def test_equal_width_classes_with_distances_on_the_edges():
    """A grid whose spacing is the class width: many distances fall exactly on edges
    (the exact lookup's spans); a repeated location gives co-located pairs."""
    coords = _grid(30, 40, 10.0)
    coords[7] = coords[3]
    values = np.sin(np.arange(coords.shape[0]) * 0.37)
    edges = np.arange(0.0, 310.0, 10.0)
    _check(coords, values, [DirectionClass()], [edges])
    fan = [DirectionClass(a, 22.5) for a in (0.0, 45.0, 90.0, 135.0)]
    _check(coords, values, fan, [edges] * 4)


@pytest.mark.parametrize("seed", [1, 2])
def test_irregular_edges_per_direction_and_overlapping_sectors(seed):
    """Sectors of 30 degrees a side 45 degrees apart overlap (pairs admitted by two directions);
    each direction has its own edges, one of them irregular; rows have more candidates than a span."""
    rng = np.random.default_rng(seed)
    coords = rng.uniform(0.0, 100.0, (1500, 2))
    values = rng.normal(size=1500)
    directions = [DirectionClass(a, 30.0) for a in (0.0, 45.0, 90.0, 135.0)]
    edges = [
        np.linspace(0.0, 50.0, 11),
        np.array([0.0, 1.5, 7.0, 20.0, 44.0]),
        np.linspace(5.0, 30.0, 6),
        np.linspace(0.0, 50.0, 11),
    ]
    assert 1500 * 0.25 > K.SPAN
    _check(coords, values, directions, edges)


def test_three_dimensional_samples_with_horizontal_directions():
    """The elevation enters the distance, not the direction test (no dip given)."""
    rng = np.random.default_rng(3)
    coords = np.column_stack([rng.uniform(0, 100, 800), rng.uniform(0, 100, 800), rng.uniform(0, 20, 800)])
    values = rng.normal(size=800)
    edges = np.linspace(0.0, 60.0, 13)
    _check(coords, values, [DirectionClass()], [edges])
    _check(coords, values, [DirectionClass(a, 45.0) for a in (0.0, 90.0)], [edges] * 2)
