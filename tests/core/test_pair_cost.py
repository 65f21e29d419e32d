"""Pair work: the sweep's visits count against LAGWISE_MAX_PAIRS, kernels run in ranges of rows under the deadline."""

from __future__ import annotations

import time

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.deadline import DeadlineExceeded, deadline
from lagwise.core.errors import LimitExceeded
from lagwise.core.limits import Limits
from lagwise.core.variography import pairs
from lagwise.core.variography.experimental import ScatterRequest, experimental_variogram
from lagwise.core.variography.lags import LagRequest
from lagwise.core.variography.maps import variogram_map


def _line(n, along, seed=1):
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0, 1000, n))
    other = rng.uniform(0, 1e-3, n)
    x, y = (t, other) if along == "x" else (other, t)
    return build_sample_set(rng.normal(size=n), x, y)


def test_visits_are_counted_exactly():
    xs = np.sort(np.random.default_rng(0).uniform(0, 10, 300))
    brute = sum(int(np.sum((xs[i + 1 :] - xs[i]) <= 1.5)) for i in range(xs.size))
    assert int(pairs.sweep_visits(xs, 1.5).sum()) == brute


def test_samples_along_y_cost_the_pairs_the_sweep_visits():
    # Same geometry turned by 90 degrees: as many pairs within 10 units, but along y
    # every pair lies within 10 units along x, so the sweep visits all n(n-1)/2 of them.
    lags = LagRequest(width=2.0, count=5)
    limits = Limits(max_pairs=200_000)
    along_x = experimental_variogram(_line(2000, "x"), lags=lags, limits=limits)
    assert sum(c.pairs for c in along_x.directions[0].classes) > 10_000
    with pytest.raises(LimitExceeded) as info:
        experimental_variogram(_line(2000, "y"), lags=lags, limits=limits)
    assert info.value.limit == "LAGWISE_MAX_PAIRS" and info.value.requested >= 2000 * 1999 // 2
    assert "visited" in info.value.advice


def test_median_and_scattergram_passes_are_counted():
    samples = _line(600, "x")
    lags = LagRequest(width=20.0, count=5)
    plain = experimental_variogram(samples, lags=lags, limits=Limits(max_pairs=10**9))
    within = sum(c.pairs for c in plain.directions[0].classes)
    # One pass fits, three (statistic, median differences, scattergram) do not.
    limits = Limits(max_pairs=int(2.2 * within))
    experimental_variogram(samples, lags=lags, limits=limits)
    with pytest.raises(LimitExceeded):
        experimental_variogram(
            samples,
            lags=lags,
            statistic="semivariance_median",
            pairs_for_class=ScatterRequest(0, 1, 50),
            limits=limits,
        )


def test_ranges_of_rows_give_the_same_tables(monkeypatch):
    rng = np.random.default_rng(5)
    xyz = rng.uniform(0, 50, (700, 3))
    samples = build_sample_set(rng.normal(size=700), *xyz.T)
    kwargs = dict(
        lags=LagRequest(width=5.0, count=6), statistic="semivariance_median", pairs_for_class=ScatterRequest(0, 2, 40)
    )
    whole = experimental_variogram(samples, **kwargs)
    whole_map = variogram_map(samples, cell_size=4.0, cells=5, statistic="semivariance_median")
    monkeypatch.setattr(pairs, "CHUNK_VISITS", 997)
    assert len(pairs.row_chunks(pairs.sweep_visits(np.sort(xyz[:, 0]), 30.0), 997)) > 5
    parts = experimental_variogram(samples, **kwargs)
    parts_map = variogram_map(samples, cell_size=4.0, cells=5, statistic="semivariance_median")
    for a, b in zip(whole.directions[0].classes, parts.directions[0].classes, strict=True):
        assert a.pairs == b.pairs and a.value == pytest.approx(b.value, rel=1e-12)
    np.testing.assert_array_equal(whole.scattergram.tail, parts.scattergram.tail)
    np.testing.assert_array_equal(whole_map.pairs, parts_map.pairs)
    assert whole_map.values == parts_map.values


def test_the_deadline_is_honoured_inside_a_pass(monkeypatch):
    monkeypatch.setattr(pairs, "CHUNK_VISITS", 100_000)
    lags = LagRequest(width=2.0, count=5)
    experimental_variogram(_line(200, "y"), lags=lags)  # the passes compiled before the clock starts
    samples = _line(20_000, "y")
    start = time.perf_counter()
    with pytest.raises(DeadlineExceeded), deadline(0.3):
        experimental_variogram(samples, lags=lags, limits=Limits(max_pairs=10**12))
    assert time.perf_counter() - start < 3.0
