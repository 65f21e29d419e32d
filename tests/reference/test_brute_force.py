"""Every statistic and pair count against brute-force enumeration.

Reference: ``scipy.spatial.distance.pdist`` for distances, explicit atan2 angle
tests for direction membership, and the published estimator formulas
(Matheron 1962; Cressie & Hawkins 1980, Math. Geology 12(2); Dowd 1984).
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.variography.directions import DirectionClass
from lagwise.core.variography.experimental import experimental_variogram
from lagwise.core.variography.lags import LagRequest
from lagwise.core.variography.statistics import STATISTICS

from .brute import class_statistics, members, pair_table

CONFIGURATIONS = {
    "1d": (1, None),
    "2d-omni": (2, None),
    "2d-directions": (2, [DirectionClass(30.0, 22.5), DirectionClass(120.0, 22.5), DirectionClass(75.0, 60.0)]),
    "2d-bandwidth": (2, [DirectionClass(45.0, 30.0, 8.0), DirectionClass(170.0, 15.0, 20.0)]),
    "3d-omni": (3, None),
    "3d-dip": (3, [DirectionClass(60.0, 30.0, None, 20.0, 25.0, 6.0), DirectionClass(0.0, 90.0, None, -45.0, 30.0)]),
}


def _samples(dim, rng, n=150):
    coords = rng.uniform(0, 60, (n, dim))
    values = rng.lognormal(2.0, 0.5, n)  # positive, for pairwise_relative
    return coords, values


@pytest.mark.parametrize("statistic", STATISTICS)
@pytest.mark.parametrize("name", list(CONFIGURATIONS))
def test_matches_brute_force(name, statistic, rng):
    dim, directions = CONFIGURATIONS[name]
    coords, values = _samples(dim, rng)
    cols = [coords[:, a] for a in range(dim)] + [None] * (3 - dim)
    samples = build_sample_set(values, *cols)
    edges = np.array([0.0, 3.0, 7.5, 12.0, 20.0, 26.5, 30.0])
    result = experimental_variogram(
        samples, lags=LagRequest(edges=tuple(edges)), directions=directions, statistic=statistic, min_pairs=1
    )
    i, j, h, d = pair_table(coords, values)
    for k, direction in enumerate(directions or [DirectionClass(0.0, 90.0)]):
        ok, klass, sign = members(h, d, edges, **direction.__dict__)
        expected = class_statistics(statistic, values, i, j, ok, klass, sign, len(edges) - 1)
        got = result.directions[k].classes
        assert [row.pairs for row in got] == [n for n, _ in expected]
        for row, (n, value) in zip(got, expected, strict=False):
            if n == 0:
                assert row.value is None and row.mean_distance is None
                continue
            assert row.value == pytest.approx(value, rel=1e-9, abs=1e-12)
            assert row.mean_distance == pytest.approx(float(np.mean(d[ok & (klass == got.index(row))])), rel=1e-12)


def test_width_count_classes_match_histogram(rng):
    """Counts with {width, count} equal numpy.histogram of pdist distances (half-open classes)."""
    coords, values = _samples(2, rng, n=300)
    samples = build_sample_set(values, coords[:, 0], coords[:, 1])
    result = experimental_variogram(samples, lags=LagRequest(width=2.5, count=12))
    _, _, _, d = pair_table(coords, values)
    edges = 2.5 * np.arange(13)
    expected = np.bincount(np.searchsorted(edges, d[d < edges[-1]], side="right") - 1, minlength=12)
    assert [row.pairs for row in result.directions[0].classes] == expected.tolist()


def test_bandwidth_and_tolerance_partition(rng):
    """Four 45-degree classes of tolerance 22.5 hold every pair once (pairs on a boundary aside)."""
    coords, values = _samples(2, rng, n=200)
    samples = build_sample_set(values, coords[:, 0], coords[:, 1])
    fan = [DirectionClass(a, 22.5) for a in (0.0, 45.0, 90.0, 135.0)]
    result = experimental_variogram(samples, lags=LagRequest(width=5.0, count=6), directions=fan)
    omni = experimental_variogram(samples, lags=LagRequest(width=5.0, count=6))
    total = sum(row.pairs for d in result.directions for row in d.classes)
    assert total == sum(row.pairs for row in omni.directions[0].classes)


@pytest.mark.parametrize("statistic", ["semivariance", "covariance"])
def test_directions_with_their_own_classes_match_brute_force(statistic, rng):
    """Automatic classes per direction (each direction has its own edges, the first the shortest).

    Reference: ``scipy.spatial.distance.pdist`` and explicit angle tests (tests/reference/brute.py);
    every pair within a direction's own last edge is counted, whatever the first direction's edges.
    """
    coords = rng.uniform(0, 1, (400, 2)) * [1000.0, 600.0]
    values = rng.lognormal(2.0, 0.5, 400)
    samples = build_sample_set(values, coords[:, 0], coords[:, 1])
    directions = [DirectionClass(azimuth, 22.5) for azimuth in (0.0, 30.0, 60.0, 90.0, 120.0, 150.0)]
    result = experimental_variogram(samples, directions=directions, statistic=statistic, min_pairs=1)
    edges_of = [[row.lower for row in d.classes] for d in result.directions]
    assert len({tuple(e) for e in edges_of}) > 1, "the directions should have different classes"
    i, j, h, d = pair_table(coords, values)
    for k, direction in enumerate(directions):
        rows = result.directions[k].classes
        edges = np.array([row.lower for row in rows] + [rows[-1].upper])
        ok, klass, sign = members(h, d, edges, **direction.__dict__)
        expected = class_statistics(statistic, values, i, j, ok, klass, sign, len(edges) - 1)
        assert [row.pairs for row in rows] == [n for n, _ in expected], f"direction {direction.azimuth}"
        for row, (n, value) in zip(rows, expected, strict=True):
            if n:
                assert row.value == pytest.approx(value, rel=1e-9, abs=1e-12)
