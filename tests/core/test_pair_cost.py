"""Pair work: the candidates each pass's kernel visits count against LAGWISE_MAX_PAIRS, kernels run in ranges
of rows under the deadline."""

from __future__ import annotations

import time

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.deadline import DeadlineExceeded, deadline
from lagwise.core.errors import LimitExceeded
from lagwise.core.limits import Limits
from lagwise.core.variography import kernels as K
from lagwise.core.variography import pairs
from lagwise.core.variography.experimental import ScatterRequest, experimental_variogram
from lagwise.core.variography.lags import LagRequest
from lagwise.core.variography.maps import variogram_map
from scipy.spatial import cKDTree


def _line(n, along, seed=1):
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(0, 1000, n))
    other = rng.uniform(0, 1e-3, n)
    x, y = (t, other) if along == "x" else (other, t)
    return build_sample_set(rng.normal(size=n), x, y)


def test_visits_are_counted_exactly():
    # Outside reference: scipy.spatial.cKDTree.query_pairs on x alone (pairs with |dx| <= reach).
    xs = np.sort(np.random.default_rng(0).uniform(0, 10, 300))
    brute = sum(int(np.sum((xs[i + 1 :] - xs[i]) <= 1.5)) for i in range(xs.size))
    assert int(pairs.sweep_visits(xs, 1.5).sum()) == brute == len(cKDTree(xs[:, None]).query_pairs(1.5))


def _layouts(n, seed=3):
    rng = np.random.default_rng(seed)
    centres = rng.uniform(0, 1000, (12, 2))
    return {
        "uniform": rng.uniform(0, 1000, (n, 2)),
        "clustered": centres[rng.integers(0, 12, n)] + rng.normal(0, 25, (n, 2)),
        "line along x": np.column_stack([rng.uniform(0, 1000, n), rng.uniform(0, 1e-3, n)]),
        "line along y": np.column_stack([rng.uniform(0, 1e-3, n), rng.uniform(0, 1000, n)]),
    }


def _enumerated(cut, radius):
    """Every (earlier, later) row pair of the column order tested against the column sweep's rule by
    brute force (numpy over all n(n-1)/2 pairs): the pair sets and their count."""
    x, y = cut.cols[0], cut.cols[1]
    col = cut.column
    a, b = np.triu_indices(x.size, 1)
    r2 = radius * radius
    margin = 1e-12 * r2
    gap = cut.lowest[col[b]] - x[a]
    h = np.sqrt(np.maximum(r2 - gap * gap, 0.0) + margin)
    same = (col[a] == col[b]) & (y[b] <= y[a] + np.sqrt(r2 + margin))
    later = (col[b] > col[a]) & (gap * gap <= r2) & (y[b] >= y[a] - h) & (y[b] <= y[a] + h)
    chosen = same | later
    # Runs: each row's own column and every later non-empty column within the radius along x.
    occupied = np.diff(cut.starts) > 0
    reached = cut.lowest[None, :] - x[:, None]
    runs = 1 + np.sum((np.arange(cut.lowest.size)[None, :] > col[:, None]) & occupied & (reached**2 <= r2), axis=1)
    return chosen, a[chosen], b[chosen], runs


@pytest.mark.parametrize("name", ["uniform", "clustered", "line along x", "line along y"])
def test_column_sweep_visits_are_the_candidates_enumerated(name):
    # The candidates counted for the column sweep against a brute-force enumeration of those of
    # accumulate_horizontal, which hold every pair within the radius once (outside reference:
    # scipy.spatial.cKDTree.query_pairs); its pair work adds RUN_WORK per run taken.
    coords = _layouts(3000)[name]
    radius = 120.0
    prepared = pairs.prepare(coords, np.zeros(coords.shape[0]))
    cut = pairs.columns(prepared, radius)
    chosen, a, b, runs = _enumerated(cut, radius)
    candidates = np.bincount(a, minlength=coords.shape[0])
    np.testing.assert_array_equal(
        K.column_candidates(cut.cols, cut.column, cut.starts, cut.lowest, radius**2, 1, 0), candidates
    )
    work = candidates + pairs.RUN_WORK * runs
    np.testing.assert_array_equal(pairs.column_visits(cut, radius), work)
    rows = cut.order  # column-order row -> x-sorted row -> input index
    visited = {tuple(sorted(p)) for p in zip(prepared.order[rows[a]], prepared.order[rows[b]], strict=True)}
    within = cKDTree(coords).query_pairs(radius)
    assert within <= visited and len(visited) == a.size
    assert pairs.pass_visits(prepared, radius, [pairs.COLUMN_SWEEP, pairs.X_SWEEP]) == [
        (pairs.COLUMN_SWEEP, int(work.sum())),
        (pairs.X_SWEEP, len(cKDTree(np.sort(coords[:, 0])[:, None]).query_pairs(radius))),
    ]


def test_column_visits_above_the_counted_rows_stay_close_to_every_row_counted():
    rng = np.random.default_rng(4)
    n = 4 * pairs.COUNTED_ROWS
    prepared = pairs.prepare(rng.uniform(0, 1000, (n, 2)), np.zeros(n))
    cut = pairs.columns(prepared, 80.0)
    every_row = int(K.column_candidates(cut.cols, cut.column, cut.starts, cut.lowest, 80.0**2, 1, pairs.RUN_WORK).sum())
    assert int(pairs.column_visits(cut, 80.0).sum()) == pytest.approx(every_row, rel=5e-3)


def test_the_limit_counts_the_kernel_each_pass_takes():
    # Samples strung out along y: every pair lies within 10 units along x, so the sweep along x
    # visits all n(n-1)/2 of them, but the column sweep only the pairs close along y. The
    # semivariance's sums take the column sweep and fit; the median's differences take the sweep
    # along x and are refused.
    lags = LagRequest(width=2.0, count=5)
    limits = Limits(max_pairs=1_000_000)
    along_y = experimental_variogram(_line(2000, "y"), lags=lags, limits=limits)
    assert sum(c.pairs for c in along_y.directions[0].classes) > 10_000
    with pytest.raises(LimitExceeded) as info:
        experimental_variogram(_line(2000, "y"), lags=lags, statistic="semivariance_median", limits=limits)
    assert info.value.limit == "LAGWISE_MAX_PAIRS" and info.value.requested >= 2000 * 1999 // 2
    assert "1 by the column sweep visiting" in info.value.advice and "1 by the sweep along x" in info.value.advice
    assert info.value.pointer == "/lags"


def test_median_and_scattergram_passes_are_counted():
    # The statistic's sums take the column sweep, the median's differences and the h-scattergram
    # the sweep along x; each pass adds the pairs within the radius (one direction class).
    samples = _line(600, "x")
    lags = LagRequest(width=20.0, count=5)
    prepared = pairs.prepare(samples.coords, samples.values)
    within = pairs.estimate_pairs_within(samples.coords, 100.0)
    (_, columns), (_, along_x) = pairs.pass_visits(prepared, 100.0, [pairs.COLUMN_SWEEP, pairs.X_SWEEP])
    experimental_variogram(samples, lags=lags, limits=Limits(max_pairs=columns + within))
    three = columns + 2 * along_x + 3 * within
    kwargs = dict(lags=lags, statistic="semivariance_median", pairs_for_class=ScatterRequest(0, 1, 50))
    experimental_variogram(samples, **kwargs, limits=Limits(max_pairs=three))
    with pytest.raises(LimitExceeded) as info:
        experimental_variogram(samples, **kwargs, limits=Limits(max_pairs=three - 1))
    assert info.value.requested == three and "2 by the sweep along x" in info.value.advice


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
    # 20,000 samples in a square of side 10: nearly every one of the 2e8 pairs lies within the
    # classes, seconds of work for any kernel.
    rng = np.random.default_rng(6)
    samples = build_sample_set(rng.normal(size=20_000), *rng.uniform(0, 10, (2, 20_000)))
    start = time.perf_counter()
    with pytest.raises(DeadlineExceeded), deadline(0.3):
        experimental_variogram(samples, lags=lags, limits=Limits(max_pairs=10**12))
    assert time.perf_counter() - start < 3.0
