"""The grid method's stated error bounds hold against the exact pair engine.

Reference: the exact path (pair enumeration, itself checked against scipy pdist in
test_brute_force.py) on the same samples; several seeds, fields and class layouts.
The pair-count bound is rigorous: misclassified pairs lie in the boundary lag
vectors (derivation in lagwise.core.variography.bounds).
"""

from __future__ import annotations

import pytest
from lagwise.core.limits import Limits
from lagwise.core.variography.directions import DirectionClass
from lagwise.core.variography.experimental import experimental_variogram
from lagwise.core.variography.lags import LagRequest

from .simulate import smooth_scattered

LIMITS = Limits(max_pairs=10**13)
LAYOUTS = [
    (LagRequest(width=25.0, count=12), [DirectionClass()]),
    (
        LagRequest(width=30.0, count=10),
        [DirectionClass()] + [DirectionClass(a, 22.5) for a in (0.0, 45.0, 90.0, 135.0)],
    ),
    (LagRequest(edges=(0.0, 15.0, 40.0, 80.0, 150.0, 260.0)), [DirectionClass(30.0, 30.0, bandwidth=60.0)]),
]


def _check(samples, lags, directions, statistic="semivariance"):
    grid = experimental_variogram(
        samples, lags=lags, directions=directions, method="grid", statistic=statistic, limits=LIMITS
    )
    exact = experimental_variogram(samples, lags=lags, directions=directions, statistic=statistic, limits=LIMITS)
    assert grid.method == "grid" and grid.grid is not None and grid.grid.source == "binned"
    checked = 0
    for d_grid, d_exact in zip(grid.directions, exact.directions, strict=True):
        for a, b in zip(d_grid.classes, d_exact.classes, strict=True):
            assert abs(a.pairs - b.pairs) <= a.pair_bound
            if b.value is None or a.value is None or a.error_bound is None:
                continue
            assert abs(a.value - b.value) <= a.error_bound * abs(a.value) + 1e-12, (a, b)
            assert a.bound_exceeded == (a.error_bound > grid.grid.tolerance)
            checked += 1
    assert checked > 0
    return grid


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("layout", range(len(LAYOUTS)))
def test_bounds_hold_on_20000_samples(seed, layout):
    lags, directions = LAYOUTS[layout]
    _check(smooth_scattered(20_000, seed, clustered=seed == 3), lags, directions)


def test_bounds_hold_for_the_noncentred_covariance():
    lags, directions = LAYOUTS[1]
    _check(smooth_scattered(20_000, 4), lags, directions, statistic="covariance_noncentered")


def test_flags_follow_the_tolerance():
    lags, directions = LAYOUTS[0]
    samples = smooth_scattered(5_000, 5)
    strict = experimental_variogram(samples, lags=lags, directions=directions, method="grid", tolerance=1e-6)
    assert strict.grid.flagged == sum(row.bound_exceeded for row in strict.directions[0].classes) > 0
    assert any("error bound above" in w for w in strict.warnings)


@pytest.mark.slow
@pytest.mark.parametrize("layout", [1, 2])
def test_bounds_hold_on_200000_samples(layout):
    lags, directions = LAYOUTS[layout]
    _check(smooth_scattered(200_000, 7), lags, directions)
