"""Unit tests of lagwise.core.variography.experimental, maps, summary and limits."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.data.summary import largest_separation, summarise
from lagwise.core.errors import InvalidInput, LimitExceeded
from lagwise.core.limits import Limits
from lagwise.core.variography.experimental import ScatterRequest, experimental_variogram
from lagwise.core.variography.lags import LagRequest
from lagwise.core.variography.maps import variogram_map
from scipy.spatial.distance import pdist


def _set(rng, n=200, values=None):
    x, y = rng.uniform(0, 100, n), rng.uniform(0, 100, n)
    return build_sample_set(rng.normal(size=n) if values is None else values, x, y)


def test_constant_values_give_zero_and_null_correlogram(rng):
    samples = _set(rng, values=np.full(200, 7.25))
    gamma = experimental_variogram(samples, lags=LagRequest(width=10, count=3))
    assert [row.value for row in gamma.directions[0].classes] == [0.0, 0.0, 0.0]
    rho = experimental_variogram(samples, lags=LagRequest(width=10, count=3), statistic="correlogram")
    for row in rho.directions[0].classes:
        assert row.value is None and "constant" in row.reason
    assert any("all values are equal" in w for w in rho.warnings)


def test_pairwise_relative_needs_positive_values(rng):
    values = rng.uniform(1, 2, 200)
    values[[3, 17]] = [0.0, -1.0]
    with pytest.raises(InvalidInput) as info:
        experimental_variogram(_set(rng, values=values), statistic="pairwise_relative")
    assert [i.pointer for i in info.value.issues] == ["/samples/values/3", "/samples/values/17"]


def test_sparse_flag_and_empty_class(rng):
    samples = _set(rng, n=30)
    result = experimental_variogram(samples, lags=LagRequest(edges=(0.0, 0.001, 50.0)), min_pairs=100)
    empty, full = result.directions[0].classes
    assert empty.pairs == 0 and empty.value is None and empty.reason == "no pairs in this class" and empty.sparse
    assert full.sparse == (full.pairs < 100)


def test_scattergram_returns_class_pairs(rng):
    samples = _set(rng, n=100)
    lags = LagRequest(width=5.0, count=4)
    result = experimental_variogram(samples, lags=lags, pairs_for_class=ScatterRequest(0, 2, 10_000))
    scatter = result.scattergram
    row = result.directions[0].classes[2]
    assert scatter.pairs_in_class == row.pairs == len(scatter.tail) and scatter.stride == 1
    # The semivariance of the returned pairs is the class value.
    assert np.mean((scatter.head - scatter.tail) ** 2) / 2 == pytest.approx(row.value, rel=1e-9)
    thinned = experimental_variogram(samples, lags=lags, pairs_for_class=ScatterRequest(0, 2, 7)).scattergram
    assert len(thinned.tail) <= 7 and thinned.stride == -(-row.pairs // 7)


def test_scattergram_bad_indexes(rng):
    samples = _set(rng, n=50)
    with pytest.raises(InvalidInput, match="from 0 to 3"):
        experimental_variogram(samples, lags=LagRequest(width=5.0, count=4), pairs_for_class=ScatterRequest(0, 4))


def test_limits_checked_before_work(rng):
    samples = _set(rng, n=300)
    with pytest.raises(LimitExceeded) as info:
        experimental_variogram(samples, limits=Limits(max_pairs=1000))
    assert info.value.limit == "LAGWISE_MAX_PAIRS"
    with pytest.raises(LimitExceeded):
        experimental_variogram(samples, limits=Limits(max_samples=10))
    with pytest.raises(LimitExceeded, match="median"):
        experimental_variogram(samples, statistic="semivariance_median", limits=Limits(max_median_pairs=100))


def test_largest_separation_through_hull(rng):
    """Exact largest separation through the convex hull equals the pdist maximum (scipy)."""
    for coords in (
        rng.uniform(0, 10, (5000, 2)),
        rng.uniform(0, 10, (4000, 3)),
        np.column_stack([np.arange(4000.0), 2 * np.arange(4000.0)]),
    ):
        assert largest_separation(coords) == pytest.approx(pdist(coords).max(), rel=1e-12)


def test_summary_divisor_n(rng):
    summary = summarise(np.zeros((4, 1)) + np.arange(4)[:, None], np.array([1.0, 2.0, 3.0, 4.0]))
    assert summary.variance == 1.25 and summary.max_distance == 3.0


def test_map_needs_two_dimensions():
    with pytest.raises(InvalidInput) as info:
        variogram_map(build_sample_set([1.0, 2.0, 3.0], [0.0, 1.0, 2.0]), cell_size=1.0, cells=2)
    assert info.value.issues[0].pointer == "/samples/y"


def test_core_does_not_import_web_framework():
    """House style: lagwise.core imports no web framework (checked in a fresh process)."""
    code = "import sys, lagwise.core.variography.experimental, lagwise.core.variography.maps, lagwise.core.warmup; print('flask' in sys.modules, 'marshmallow' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.split() == ["False", "False"]


def test_client_does_not_import_numpy():
    """The SDK installs and imports with requests alone (checked in a fresh process)."""
    code = "import sys, lagwise_client; print('numpy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"
