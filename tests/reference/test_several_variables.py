"""Several variables in one pass against a brute-force enumeration of every pair.

References: distances by ``scipy.spatial.distance.pdist`` (through tests/reference/brute.py,
whose direction membership uses explicit angles); the cross-semivariance
(1/2N) sum (a_j - a_i)(b_j - b_i) and the cross-covariance (1/N) sum a_tail b_head -
m_tail m_head as defined by Journel & Huijbregts (1978, Mining Geostatistics, ch. II) and
Wackernagel (2003, Multivariate Geostatistics, ch. 20), each over the pairs where what it
needs is measured.
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.variables import VariableInput, build_multi_sample_set
from lagwise.core.variography.directions import DirectionClass
from lagwise.core.variography.experimental import experimental_variogram
from lagwise.core.variography.lags import LagRequest
from lagwise.core.variography.several import several_variograms

from tests.reference.brute import members, pair_table

EDGES = np.array([0.0, 8.0, 16.0, 24.0, 32.0, 40.0])
LAGS = LagRequest(edges=tuple(EDGES))
DIRECTIONS = [DirectionClass(0.0, 90.0), DirectionClass(30.0, 22.5), DirectionClass(120.0, 22.5, bandwidth=15.0)]


def heterotopic(n=260, seed=5):
    """Three correlated invented variables, two with missing values, one 3-D-free field."""
    rng = np.random.default_rng(seed)
    coords = rng.uniform(0, 100, (n, 2))
    base = np.sin(coords[:, 0] / 15.0) + np.cos(coords[:, 1] / 20.0)
    a = base + 0.3 * rng.normal(size=n)
    b = 2.0 - 0.8 * base + 0.5 * rng.normal(size=n) + 50.0
    c = rng.normal(size=n) * 3.0
    a[rng.random(n) < 0.3] = np.nan
    b[rng.random(n) < 0.45] = np.nan
    columns = {"a": a, "b": b, "c": c}
    samples = build_multi_sample_set([VariableInput(k, v) for k, v in columns.items()], coords[:, 0], coords[:, 1])
    return samples, coords, columns


def brute_cross(coords, a, b, statistic, direction: DirectionClass):
    """(pairs, value, mean distance) per class by enumeration of every pair with pdist."""
    i, j, h, d = pair_table(coords, a)
    ok, klass, sign = members(h, d, EDGES, direction.azimuth, direction.tolerance, direction.bandwidth)
    tail_a, head_a = np.where(sign > 0, a[i], a[j]), np.where(sign > 0, a[j], a[i])
    tail_b, head_b = np.where(sign > 0, b[i], b[j]), np.where(sign > 0, b[j], b[i])
    out = []
    for k in range(len(EDGES) - 1):
        m = ok & (klass == k)
        if statistic == "semivariance":
            m &= ~np.isnan(a[i]) & ~np.isnan(a[j]) & ~np.isnan(b[i]) & ~np.isnan(b[j])
            value = np.sum((head_a[m] - tail_a[m]) * (head_b[m] - tail_b[m])) / (2 * m.sum())
        else:
            m &= ~np.isnan(tail_a) & ~np.isnan(head_b)
            t, hd = tail_a[m], head_b[m]
            value = np.mean(t * hd) - t.mean() * hd.mean()
            if statistic == "correlogram":
                value /= t.std() * hd.std()
        out.append((int(m.sum()), float(value), float(d[m].mean())))
    return out


@pytest.mark.parametrize("statistic", ["semivariance", "covariance", "correlogram"])
def test_cross_statistics_and_counts_equal_brute_force(statistic):
    samples, coords, columns = heterotopic()
    result = several_variograms(samples, lags=LAGS, directions=DIRECTIONS, statistic=statistic, min_pairs=1)
    assert [c.names for c in result.cross] == [("a", "b"), ("a", "c"), ("b", "c")]
    for cross in result.cross:
        a, b = columns[cross.names[0]], columns[cross.names[1]]
        for direction, computed in zip(DIRECTIONS, cross.directions, strict=True):
            expected = brute_cross(coords, a, b, statistic, direction)
            for row, (pairs, value, distance) in zip(computed.classes, expected, strict=True):
                assert row.pairs == pairs
                assert row.value == pytest.approx(value, rel=1e-9, abs=1e-12)
                assert row.mean_distance == pytest.approx(distance, rel=1e-12)


@pytest.mark.parametrize("statistic", ["semivariance", "covariance", "madogram", "semivariance_robust"])
def test_each_direct_result_equals_the_single_variable_request(statistic):
    samples, _, _ = heterotopic()
    result = several_variograms(samples, lags=LAGS, directions=DIRECTIONS, statistic=statistic)
    for variable in result.variables:
        alone = experimental_variogram(
            samples.variable(variable.name), lags=LAGS, directions=DIRECTIONS, statistic=statistic
        )
        assert variable.result.summary.mean == pytest.approx(alone.summary.mean, rel=1e-14)
        for ours, theirs in zip(variable.result.directions, alone.directions, strict=True):
            for row, single in zip(ours.classes, theirs.classes, strict=True):
                assert row.pairs == single.pairs
                assert row.value == pytest.approx(single.value, rel=1e-9, abs=1e-12)
                assert row.mean_distance == pytest.approx(single.mean_distance, rel=1e-12)


def test_cross_semivariance_with_itself_is_the_semivariance():
    """gamma_aa(h) = gamma_a(h) by definition (Wackernagel 2003, ch. 20)."""
    samples, coords, columns = heterotopic()
    twin = build_multi_sample_set(
        [VariableInput("a", columns["a"]), VariableInput("a_again", columns["a"].copy())], coords[:, 0], coords[:, 1]
    )
    result = several_variograms(twin, lags=LAGS, directions=DIRECTIONS)
    (cross,) = result.cross
    for direct, crossed in zip(result.variables[0].result.directions, cross.directions, strict=True):
        for row, other in zip(direct.classes, crossed.classes, strict=True):
            assert other.pairs == row.pairs
            assert other.value == pytest.approx(row.value, rel=1e-10)


def test_swapping_two_variables_leaves_the_cross_semivariance_unchanged():
    samples, coords, columns = heterotopic()
    swapped = build_multi_sample_set(
        [VariableInput(k, columns[k]) for k in ("c", "b", "a")], coords[:, 0], coords[:, 1]
    )
    ours = {c.names: c for c in several_variograms(samples, lags=LAGS, directions=DIRECTIONS).cross}
    theirs = {c.names: c for c in several_variograms(swapped, lags=LAGS, directions=DIRECTIONS).cross}
    for (a, b), cross in ours.items():
        other = theirs[(b, a)]
        for d1, d2 in zip(cross.directions, other.directions, strict=True):
            for r1, r2 in zip(d1.classes, d2.classes, strict=True):
                assert r1.pairs == r2.pairs
                assert r1.value == pytest.approx(r2.value, rel=1e-10)


def test_the_kernel_that_adds_every_pair_of_variables_per_pair_agrees():
    """The fallback kernel (used when the per-sample counts would not fit the memory budget)."""
    from lagwise.core.limits import Limits

    samples, coords, columns = heterotopic(n=150)
    fast = several_variograms(samples, lags=LAGS, directions=DIRECTIONS)
    slow = several_variograms(samples, lags=LAGS, directions=DIRECTIONS, limits=Limits(memory_budget_bytes=1))
    for c1, c2 in zip(fast.cross, slow.cross, strict=True):
        for d1, d2 in zip(c1.directions, c2.directions, strict=True):
            for r1, r2 in zip(d1.classes, d2.classes, strict=True):
                assert r1.pairs == r2.pairs and r1.mean_distance == pytest.approx(r2.mean_distance, rel=1e-12)
                assert r1.value == pytest.approx(r2.value, rel=1e-9)
