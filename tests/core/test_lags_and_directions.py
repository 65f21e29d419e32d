"""Unit tests of distance classes (lagwise.core.variography.lags) and direction classes (lagwise.core.variography.directions)."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.errors import InvalidInput
from lagwise.core.variography.directions import DirectionClass, validate_direction
from lagwise.core.variography.experimental import experimental_variogram
from lagwise.core.variography.lags import AUTO_MAX_CLASSES, LagRequest, auto_edges, validate_lags


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


def test_auto_equal_width_meets_min_pairs():
    fine = np.full(300, 10.0)  # 3000 pairs spread evenly
    edges = auto_edges("equal_width", 150.0, fine, 30)
    assert len(edges) - 1 == AUTO_MAX_CLASSES
    sparse = np.zeros(300)
    sparse[:5] = 10.0  # 50 pairs, all at short distances
    edges = auto_edges("equal_width", 150.0, sparse, 30)
    assert len(edges) == 2


def test_auto_equal_pairs_balances_counts():
    fine = np.linspace(1, 50, 300)  # more pairs at long distances
    edges = auto_edges("equal_pairs", 300.0, fine, 30)
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
