"""Rasters: validation, points, summary, limits and deadlines of the FFT path."""

from __future__ import annotations

import hashlib
import time

import numpy as np
import pytest
from lagwise.core.data.raster import build_raster, raster_points, raster_summary
from lagwise.core.deadline import DeadlineExceeded, deadline
from lagwise.core.errors import InvalidInput, LimitExceeded
from lagwise.core.limits import Limits
from lagwise.core.variography.experimental import experimental_variogram, raster_variogram
from lagwise.core.variography.fft import fft_bytes
from lagwise.core.variography.lags import LagRequest
from lagwise.core.variography.maps import raster_map
from scipy.spatial.distance import pdist


def _values(rng, nx=20, ny=15, missing=0.3):
    values = rng.normal(1.0, 1.0, nx * ny)
    values[rng.random(nx * ny) < missing] = np.nan
    return values


@pytest.mark.parametrize(
    ("origin", "spacing", "shape", "pointer"),
    [
        ((0, 0), (0.0, 1.0), (20, 15), "/samples/raster/spacing/0"),
        ((0, 0), (1.0, -1.0), (20, 15), "/samples/raster/spacing/1"),
        ((0, 0), (1.0, 1.0), (0, 15), "/samples/raster/shape/0"),
        ((0, 0), (1.0, 1.0), (21, 15), "/samples/raster/values"),
        ((0, np.inf), (1.0, 1.0), (20, 15), "/samples/raster/origin"),
    ],
)
def test_bad_rasters_name_the_field(rng, origin, spacing, shape, pointer):
    with pytest.raises(InvalidInput) as info:
        build_raster(origin, spacing, shape, _values(rng))
    assert pointer in [issue.pointer for issue in info.value.issues]


def test_all_missing_refused(rng):
    with pytest.raises(InvalidInput, match="at least 2 cells"):
        build_raster((0, 0), (1, 1), (3, 2), [np.nan] * 5 + [1.0])


def test_points_summary_and_hash(rng):
    values = _values(rng)
    raster = build_raster((10.0, 20.0), (2.0, 0.5), (20, 15), values)
    points = raster_points(raster)
    present = ~np.isnan(values)
    assert points.size == present.sum() == raster.size
    i = np.flatnonzero(present)
    # Node (column, row) of cell i + nx j sits at origin + (column dx, row dy), x fastest.
    expected = np.column_stack([10.0 + (i % 20) * 2.0, 20.0 + (i // 20) * 0.5])
    order = np.lexsort((expected[:, 1], expected[:, 0]))
    got = np.lexsort((points.coords[:, 1], points.coords[:, 0]))
    np.testing.assert_allclose(points.coords[got], expected[order])
    summary = raster_summary(raster)
    # Largest separation against scipy pdist over every present cell.
    assert summary.max_distance == pytest.approx(pdist(expected).max(), rel=1e-12)
    assert summary.mean == pytest.approx(values[present].mean()) and summary.samples == present.sum()
    digest = hashlib.sha256(
        np.concatenate([[10.0, 20.0], [2.0, 0.5], [20.0, 15.0], values]).astype("<f8").tobytes()
    ).hexdigest()
    assert raster.input_hash == digest == points.input_hash


def test_points_respect_the_sample_limit(rng):
    raster = build_raster((0, 0), (1, 1), (20, 15), _values(rng))
    with pytest.raises(LimitExceeded, match="LAGWISE_MAX_SAMPLES"):
        raster_points(raster, Limits(max_samples=50))


def test_memory_budget_checked_before_work(rng):
    raster = build_raster((0, 0), (1, 1), (20, 15), _values(rng))
    with pytest.raises(LimitExceeded) as info:
        raster_variogram(raster, lags=LagRequest(width=2, count=5), limits=Limits(memory_budget_bytes=10_000))
    assert info.value.limit == "LAGWISE_MEMORY_BUDGET_BYTES"
    with pytest.raises(LimitExceeded):
        raster_map(raster, cell_size=1.0, cells=4, limits=Limits(memory_budget_bytes=10_000))


@pytest.mark.parametrize("statistic", ["semivariance", "covariance"])
def test_a_rasters_budget_counts_what_its_transforms_hold(rng, statistic):
    """No node arrays of its own, and two spectra fewer without the first moments: a raster's request fits
    a budget equal to its estimate and is refused one byte under it."""
    raster = build_raster((0, 0), (1, 1), (20, 15), _values(rng))
    need = fft_bytes((15, 20), (10, 10), first_moments=statistic != "semivariance", node_arrays=0)
    assert need < fft_bytes((15, 20), (10, 10))  # the binned grids' estimate holds three node arrays more
    lags = LagRequest(width=2, count=5)
    result = raster_variogram(raster, lags=lags, statistic=statistic, limits=Limits(memory_budget_bytes=need))
    assert result.grid.memory_bytes == need
    with pytest.raises(LimitExceeded):
        raster_variogram(raster, lags=lags, statistic=statistic, limits=Limits(memory_budget_bytes=need - 1))


def test_deadline_is_honoured(rng):
    raster = build_raster((0, 0), (1, 1), (20, 15), _values(rng))
    with pytest.raises(DeadlineExceeded), deadline(1e-9):
        time.sleep(0.01)
        raster_variogram(raster, lags=LagRequest(width=2, count=5))


@pytest.mark.parametrize("statistic", ["madogram", "semivariance_robust", "semivariance_median", "pairwise_relative"])
def test_statistics_the_fft_cannot_give_are_refused(rng, statistic):
    raster = build_raster((0, 0), (1, 1), (20, 15), np.abs(_values(rng)) + 1)
    with pytest.raises(InvalidInput) as info:
        raster_variogram(raster, statistic=statistic)
    assert info.value.issues[0].pointer == "/statistic"


def test_automatic_classes_and_grid_echo(rng):
    raster = build_raster((0, 0), (1, 1), (20, 15), _values(rng, missing=0.1))
    result = raster_variogram(raster, min_pairs=30)
    classes = result.directions[0].classes
    assert result.method == "grid" and result.grid.source == "raster" and result.spacing == 1.0
    assert all(row.pairs >= 30 for row in classes) and classes[-1].upper == pytest.approx(
        0.5 * result.summary.max_distance
    )
    assert all(0.0 < row.error_bound < 1e-9 for row in classes)  # rounding estimate of the FFT sums, relative


def test_unknown_method_refused(rng):
    raster = build_raster((0, 0), (1, 1), (20, 15), _values(rng))
    with pytest.raises(InvalidInput) as info:
        experimental_variogram(raster_points(raster), method="fast")
    assert info.value.issues[0].pointer == "/method"
