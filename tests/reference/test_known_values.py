"""Known values: regular transects, hand-computed sequences, published estimator formulas."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.variography.experimental import experimental_variogram
from lagwise.core.variography.lags import LagRequest


def _transect(values):
    return build_sample_set(np.asarray(values, dtype=float), np.arange(len(values), dtype=float))


def test_regular_transect_pair_counts():
    """On a regular transect of n = 16 samples at unit spacing, class h holds n - h pairs (common practice)."""
    samples = _transect(np.arange(16.0) ** 1.5)
    result = experimental_variogram(samples, lags=LagRequest(edges=tuple(np.arange(0.5, 16.0, 1.0))))
    assert [row.pairs for row in result.directions[0].classes] == [16 - h for h in range(1, 16)]
    assert [row.mean_distance for row in result.directions[0].classes] == [float(h) for h in range(1, 16)]


def test_hand_computed_semivariance():
    """Sequence 1, 3, 2, 5, 4 (hand computation): gamma(1) = (4 + 1 + 9 + 1) / 8 = 1.875,
    gamma(2) = (1 + 4 + 4) / 6 = 1.5, gamma(3) = (16 + 1) / 4 = 4.25, gamma(4) = 9 / 2 = 4.5."""
    samples = _transect([1.0, 3.0, 2.0, 5.0, 4.0])
    result = experimental_variogram(samples, lags=LagRequest(edges=(0.5, 1.5, 2.5, 3.5, 4.5)), min_pairs=1)
    assert [row.value for row in result.directions[0].classes] == pytest.approx([1.875, 1.5, 4.25, 4.5], rel=1e-14)


def test_cressie_hawkins_hand_example():
    """Cressie & Hawkins (1980), Math. Geology 12(2): 2 gamma = [(1/N) sum |d|^(1/2)]^4 / (0.457 + 0.494/N).
    Differences at lag 1 of 0, 4, 0, 9, 1 (values 0, 0, 4, 4, 13, 12) are |d| = 0, 4, 0, 9, 1:
    mean root = (0 + 2 + 0 + 3 + 1) / 5 = 1.2; 1.2^4 = 2.0736; gamma = 2.0736 / (2 (0.457 + 0.0988))."""
    samples = _transect([0.0, 0.0, 4.0, 4.0, 13.0, 12.0])
    result = experimental_variogram(
        samples, lags=LagRequest(edges=(0.5, 1.5)), statistic="semivariance_robust", min_pairs=1
    )
    assert result.directions[0].classes[0].value == pytest.approx(2.0736 / (2 * (0.457 + 0.494 / 5)), rel=1e-14)


def test_dowd_median_hand_example():
    """Dowd (1984): 2 gamma = 2.198 median(|d|)^2. Same differences, median |d| = 1: gamma = 1.099."""
    samples = _transect([0.0, 0.0, 4.0, 4.0, 13.0, 12.0])
    result = experimental_variogram(
        samples, lags=LagRequest(edges=(0.5, 1.5)), statistic="semivariance_median", min_pairs=1
    )
    assert result.directions[0].classes[0].value == pytest.approx(1.099, rel=1e-14)


def test_robust_estimators_close_to_classical_on_gaussian_data():
    """For Gaussian increments the robust estimators target the same gamma as the classical one
    (Cressie & Hawkins 1980; Dowd 1984): white noise of variance 4 has gamma = 4 at every lag."""
    rng = np.random.default_rng(3)
    x = rng.uniform(0, 1000, 3000)
    y = rng.uniform(0, 1000, 3000)
    samples = build_sample_set(rng.normal(0, 2.0, 3000), x, y)
    lags = LagRequest(width=50.0, count=4)
    for statistic in ("semivariance", "semivariance_robust", "semivariance_median"):
        values = [
            row.value for row in experimental_variogram(samples, lags=lags, statistic=statistic).directions[0].classes
        ]
        assert values == pytest.approx([4.0] * 4, rel=0.06), statistic


def test_semivariance_equals_sill_minus_covariance():
    """gamma(h) = C(0) - C(h) for a second-order stationary field (standard identity), within sampling
    tolerance, on a Gaussian field simulated by Cholesky factorisation (scipy.linalg.cholesky)."""
    from scipy.linalg import cholesky
    from scipy.spatial.distance import cdist

    rng = np.random.default_rng(11)
    n = 900
    coords = rng.uniform(0, 100, (n, 2))
    cov = np.exp(-3.0 * cdist(coords, coords) / 30.0) + 1e-10 * np.eye(n)
    field = cholesky(cov, lower=True) @ rng.standard_normal(n)
    samples = build_sample_set(field, coords[:, 0], coords[:, 1])
    lags = LagRequest(width=5.0, count=8)
    gamma = experimental_variogram(samples, lags=lags, statistic="semivariance").directions[0].classes
    cov_rows = experimental_variogram(samples, lags=lags, statistic="covariance").directions[0].classes
    variance = samples.values.var()
    for g, c in zip(gamma, cov_rows, strict=False):
        assert g.value == pytest.approx(variance - c.value, abs=0.08 * variance)


def test_centred_covariance_is_product_moment_covariance(rng):
    """The class covariance equals numpy.cov(tail, head, bias=True)[0, 1] (divisor N, as DESIGN fixes)."""
    from .brute import members, pair_table

    coords = rng.uniform(0, 50, (120, 2))
    values = rng.normal(5, 1, 120) + 1e6  # a large offset: centring must keep the precision
    samples = build_sample_set(values, coords[:, 0], coords[:, 1])
    edges = np.array([0.0, 5.0, 10.0, 20.0])
    result = experimental_variogram(samples, lags=LagRequest(edges=tuple(edges)), statistic="covariance", min_pairs=1)
    i, j, h, d = pair_table(coords, values)
    ok, klass, sign = members(h, d, edges)
    for c, row in enumerate(result.directions[0].classes):
        m = ok & (klass == c)
        tail = np.where(sign > 0, values[i], values[j])[m]
        head = np.where(sign > 0, values[j], values[i])[m]
        assert row.value == pytest.approx(np.cov(tail, head, bias=True)[0, 1], rel=1e-7)
        assert row.tail_mean == pytest.approx(tail.mean(), rel=1e-14)
        assert row.head_sd == pytest.approx(head.std(), rel=1e-7)
