"""The span kernel (candidates binned in SIMD loops, equal-width classes by floor division,
several-direction pairs apart) against brute-force enumeration.

Reference: every pair from ``scipy.spatial.distance.pdist`` (scipy), classes by
``numpy.searchsorted`` and direction membership by explicit angles (``tests/reference/brute.py``);
counts must be equal and sums of squared differences agree to 1e-9 (relative).
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.variography import kernels as K
from lagwise.core.variography.directions import DirectionClass
from lagwise.core.variography.experimental import experimental_variogram
from lagwise.core.variography.pairs import MAX_LOOKUP_CELLS, accumulate, layout, prepare

from .brute import class_statistics, members, pair_table


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


def _near_duplicates(rng, length, width, clusters=200):
    """Clusters of three samples along a strip: two 1e-4 apart, the third within half a unit."""
    base = np.column_stack([rng.uniform(0.0, length, clusters), rng.uniform(0.0, width, clusters)])
    twin = base + 1e-4 * rng.normal(size=(clusters, 2))
    third = base + np.column_stack([rng.normal(0.0, 0.05, clusters), rng.uniform(-0.5, 0.5, clusters)])
    return np.concatenate([base, twin, third])


def test_classes_narrower_than_a_lookup_cell():
    """Five classes of 1e-3 under a search radius of 1000: more than MAX_LOOKUP_CELLS cells would be
    needed for cells narrower than a class, so the lookup table cannot resolve them; every pair
    still lands in its own class, as scipy.spatial.distance.pdist and numpy.searchsorted say."""
    rng = np.random.default_rng(6)
    coords = rng.uniform(0.0, 1000.0, (600, 2))
    coords[1::2] = coords[0::2] + rng.uniform(-0.004, 0.004, (300, 2))
    values = rng.normal(size=600)
    edges = np.array([0.0, 0.001, 0.002, 0.003, 0.004, 0.005, 1000.0])
    assert 2.0 * edges[-1] / 0.001 > MAX_LOOKUP_CELLS
    _check(coords, values, [DirectionClass()], [edges])
    fan = [DirectionClass(a, 15.0) for a in (0.0, 30.0, 60.0, 90.0, 120.0, 150.0)]
    _check(coords, values, fan, [edges] * len(fan))


@pytest.mark.parametrize("statistic", ["semivariance", "covariance"])
def test_automatic_classes_of_an_elongated_survey(statistic):
    """A strip 5000 long and 1 wide with near-duplicate samples: automatic classes across the strip
    are a few thousandths wide while those along it reach 2500, so the directions' classes differ in
    width by far more than the lookup table resolves. Counts and sums against brute-force enumeration
    (scipy.spatial.distance.pdist, explicit angle tests, tests/reference/brute.py)."""
    coords = _near_duplicates(np.random.default_rng(5), 5000.0, 1.0)
    values = np.random.default_rng(7).normal(size=coords.shape[0])
    samples = build_sample_set(values, coords[:, 0], coords[:, 1])
    fan = [DirectionClass(a, 15.0) for a in (0.0, 30.0, 60.0, 90.0, 120.0, 150.0)]
    result = experimental_variogram(samples, directions=fan, statistic=statistic, min_pairs=1)
    edges = [np.array([row.lower for row in d.classes] + [d.classes[-1].upper]) for d in result.directions]
    radius = max(e[-1] for e in edges)
    assert 2.0 * radius / min(np.diff(e).min() for e in edges) > MAX_LOOKUP_CELLS
    i, j, h, d = pair_table(coords, values)
    for k, direction in enumerate(fan):
        ok, klass, sign = members(h, d, edges[k], direction.azimuth, direction.tolerance)
        expected = class_statistics(statistic, values, i, j, ok, klass, sign, len(edges[k]) - 1)
        rows = result.directions[k].classes
        assert [row.pairs for row in rows] == [n for n, _ in expected], f"direction {direction.azimuth}"
        for row, (n, value) in zip(rows, expected, strict=True):
            if n:
                assert row.value == pytest.approx(value, rel=1e-9, abs=1e-12)


@pytest.mark.parametrize("seed", [4, 5])
def test_columns_thinner_than_the_radius_with_a_line_along_y(seed):
    """The column sweep: a cluster cut into about 30 columns narrower than the search radius, a line
    of samples sharing one x (one column, sorted along y), repeated locations; omnidirectional and
    four sectors of 22.5 degrees (the four-direction loop), equal-width and irregular classes."""
    rng = np.random.default_rng(seed)
    cluster = rng.uniform(0.0, 100.0, (1700, 2))
    line = np.column_stack([np.full(300, 50.0), rng.uniform(0.0, 100.0, 300)])
    coords = np.vstack([cluster, line, cluster[:5]])
    values = rng.normal(size=coords.shape[0])
    fan = [DirectionClass(a, 22.5) for a in (0.0, 45.0, 90.0, 135.0)]
    for edges in (np.linspace(0.0, 20.25, 10), np.array([0.0, 0.5, 3.0, 7.5, 12.0, 20.25])):
        _check(coords, values, [DirectionClass()], [edges])
        _check(coords, values, fan, [edges] * 4)
