"""Unit tests of distance classes (lagwise.core.variography.lags) and direction classes (lagwise.core.variography.directions)."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.data.spacing import typical_spacing
from lagwise.core.errors import InvalidInput
from lagwise.core.variography.directions import DirectionClass, validate_direction
from lagwise.core.variography.experimental import experimental_variogram
from lagwise.core.variography.lags import (
    LagRequest,
    merge_sparse,
    quantile_edges,
    spacing_edges,
    validate_lags,
)
from scipy.spatial.distance import pdist, squareform


def test_width_count_edges():
    assert validate_lags(LagRequest(width=2.0, count=3)).tolist() == [0.0, 2.0, 4.0, 6.0]


@pytest.mark.parametrize(
    "request_, pointer",
    [
        (LagRequest(width=0.0, count=3), "/lags/width"),
        (LagRequest(width=-1.0, count=3), "/lags/width"),
        (LagRequest(width=1.0, count=0), "/lags/count"),
        (LagRequest(edges=(0.0, 2.0, 1.0)), "/lags/edges/2"),
        (LagRequest(edges=(0.0, 1.0, 1.0)), "/lags/edges/2"),
        (LagRequest(edges=(-1.0, 1.0)), "/lags/edges/0"),
        (LagRequest(edges=(1.0,)), "/lags/edges"),
        (LagRequest(auto="sideways"), "/lags/auto"),
        (LagRequest(width=1.0, count=2, edges=(0.0, 1.0)), "/lags"),
    ],
)
def test_bad_lags(request_, pointer):
    with pytest.raises(InvalidInput) as info:
        validate_lags(request_)
    assert info.value.issues[0].pointer == pointer


def test_spacing_edges_centre_classes_on_multiples_of_the_width():
    """Edges 0, w/2, 3w/2, ...; a last part shorter than w/2 joins its neighbour (hand-computed)."""
    assert spacing_edges(100.0, 20.0).tolist() == [0.0, 10.0, 30.0, 50.0, 70.0, 90.0, 100.0]
    assert spacing_edges(95.0, 20.0).tolist() == [0.0, 10.0, 30.0, 50.0, 70.0, 95.0]
    assert spacing_edges(8.0, 20.0).tolist() == [0.0, 8.0]


def test_merge_sparse_keeps_min_pairs():
    """Sparse classes join the next; a sparse last class joins the one before (hand-computed)."""
    edges = np.array([0.0, 10.0, 30.0, 50.0, 70.0, 100.0])
    assert merge_sparse(edges, np.array([0, 40, 10, 25, 12]), 30).tolist() == [0.0, 30.0, 100.0]
    assert merge_sparse(edges, np.array([35, 40, 50, 60, 70]), 30).tolist() == edges.tolist()
    assert merge_sparse(edges, np.array([1, 2, 3, 4, 5]), 30).tolist() == [0.0, 100.0]


def test_typical_spacing_is_the_median_nearest_neighbour_distance():
    """Median nearest-neighbour distance against a brute-force scipy.spatial.distance.pdist matrix."""
    rng = np.random.default_rng(4)
    coords = rng.uniform(0, 100, (200, 2))
    d = squareform(pdist(coords))
    np.fill_diagonal(d, np.inf)
    assert typical_spacing(coords) == pytest.approx(np.median(d.min(axis=1)))
    doubled = np.vstack([coords, coords[:10]])  # co-located copies look further for a distinct neighbour
    assert typical_spacing(doubled) > 0


def test_default_classes_see_a_60_m_structure_on_a_20_m_design():
    """On a 20 m grid a spherical structure of range 60 m (Cholesky simulation, scipy) shows in the classes.

    The first class must end below 60 m and the semivariance must rise through the
    classes below 60 m and level off beyond (spherical model: gamma(h) = sill at h >= range).
    """
    from tests.reference.simulate import isotropic, simulate

    gx, gy = np.meshgrid(np.arange(24) * 20.0, np.arange(24) * 20.0)
    coords = np.column_stack([gx.ravel(), gy.ravel()])
    model = isotropic("spherical", 1.0, 60.0, nugget=0.05)
    rng = np.random.default_rng(11)
    short, long = [], []
    for _ in range(4):
        values = simulate(model, coords, rng)
        result = experimental_variogram(build_sample_set(values, coords[:, 0], coords[:, 1]))
        classes = result.directions[0].classes
        assert result.spacing == pytest.approx(20.0)
        assert classes[0].upper < 60.0
        assert all(row.pairs >= 30 for row in classes)
        below = [row for row in classes if row.upper <= 60.0]
        assert len(below) >= 2
        short.append(below[0].value / result.summary.variance)
        long.append(np.mean([row.value for row in classes if row.lower >= 90.0]) / result.summary.variance)
    # Model: gamma(20 m .. 28 m) / sill is about 0.5; beyond the range it is 1.
    assert np.mean(short) < 0.7
    assert np.mean(long) > 0.85


def test_auto_equal_pairs_balances_counts():
    fine = np.linspace(1, 50, 300)  # more pairs at long distances
    edges = quantile_edges(300.0, fine, 30)
    cumulative = np.concatenate([[0], np.cumsum(fine)])
    per_class = np.diff(np.interp(edges, np.linspace(0, 300, 301), cumulative))
    assert per_class.max() / per_class.min() < 1.05


def test_auto_half_extent_rule():
    """Omnidirectional auto classes end at half the largest separation (rule of thumb of the trade)."""
    rng = np.random.default_rng(2)
    x, y = rng.uniform(0, 400, 300), rng.uniform(0, 100, 300)
    samples = build_sample_set(rng.normal(size=300), x, y)
    result = experimental_variogram(samples)
    top = result.directions[0].classes[-1].upper
    assert top == pytest.approx(result.summary.max_distance / 2)
    assert all(row.pairs >= 30 for row in result.directions[0].classes)
    along_y = experimental_variogram(samples, directions=[DirectionClass(0.0, 22.5)])
    assert along_y.directions[0].classes[-1].upper == pytest.approx(np.ptp(y) / 2)


@pytest.mark.parametrize(
    "direction, field",
    [
        (DirectionClass(azimuth=360.0), "azimuth"),
        (DirectionClass(azimuth=-1.0), "azimuth"),
        (DirectionClass(tolerance=0.0), "tolerance"),
        (DirectionClass(tolerance=91.0), "tolerance"),
        (DirectionClass(bandwidth=0.0), "bandwidth"),
        (DirectionClass(dip=95.0), "dip"),
        (DirectionClass(dip_tolerance=0.0), "dip_tolerance"),
        (DirectionClass(vertical_bandwidth=-2.0), "vertical_bandwidth"),
    ],
)
def test_bad_directions(direction, field):
    with pytest.raises(InvalidInput) as info:
        validate_direction(direction, 2, 3)
    assert info.value.issues[0].pointer == f"/directions/2/{field}"


def test_azimuth_folds_and_dip_ignored_in_2d():
    resolved, warnings = validate_direction(DirectionClass(azimuth=250.0, tolerance=20.0, dip=30.0), 0, 2)
    assert resolved.azimuth == 70.0 and resolved.dip == 0.0
    assert "3-D samples only" in warnings[0]
