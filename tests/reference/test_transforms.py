"""Transforms against outside references: scipy.stats.norm.ppf of Hazen plotting positions,
lognormal moments from scipy.stats.lognorm, and quadrature against a fine trapezoid rule."""

from __future__ import annotations

import math

import numpy as np
import pytest
from lagwise.core.data.transforms import fit_transform
from lagwise.core.errors import InvalidInput
from scipy import stats


def test_normal_scores_are_quantiles_of_hazen_positions():
    """Hazen (1914) plotting positions p = (r - 1/2)/n; tied values share the mean rank."""
    values = np.array([4.0, 1.0, 9.0, 4.0, 2.5, 16.0, 4.0])
    t = fit_transform("normal_score", values)
    ranks = stats.rankdata(values, method="average")
    np.testing.assert_allclose(t.forward(values), stats.norm.ppf((ranks - 0.5) / values.size), rtol=1e-12)
    np.testing.assert_allclose(t.backward(t.forward(values)), values, rtol=1e-12)


def test_normal_score_tails_hold_the_extremes():
    t = fit_transform("normal_score", np.array([1.0, 2.0, 3.0]))
    assert t.backward(np.array([-9.0, 9.0])).tolist() == [1.0, 3.0]


def test_log_back_transform_is_the_lognormal_mean_and_variance():
    """exp(mu + s^2/2) and exp(2 mu + s^2)(exp(s^2) - 1): scipy.stats.lognorm(s, scale=exp(mu)) moments."""
    t = fit_transform("log", np.array([1.0, 2.0]))
    mu, var = np.array([0.3, 2.0, -1.0]), np.array([0.2, 1.1, 0.0])
    mean, variance = t.back_estimate(mu, var)
    for m, s2, got_mean, got_var in zip(mu, var, mean, variance, strict=True):
        reference = stats.lognorm(s=math.sqrt(s2) if s2 > 0 else 1e-300, scale=math.exp(m))
        assert got_mean == pytest.approx(reference.mean(), rel=1e-12)
        assert got_var == pytest.approx(reference.var() if s2 > 0 else 0.0, rel=1e-9, abs=1e-300)


def test_normal_score_back_transform_of_estimates_integrates_the_gaussian():
    """E[g(Y)] for Y ~ N(y, s^2) by equal-probability points against a fine trapezoid rule
    (numpy.trapezoid on 400,001 points over +-10 standard deviations, scipy.stats.norm density)."""
    rng = np.random.default_rng(4)
    t = fit_transform("normal_score", rng.lognormal(1.0, 0.7, 200))
    for y, s2 in ((0.2, 0.5), (-1.0, 0.1), (1.5, 0.8)):
        mean, variance = t.back_estimate(np.array([y]), np.array([s2]))
        u = np.linspace(y - 10 * math.sqrt(s2), y + 10 * math.sqrt(s2), 400_001)
        weight = stats.norm(y, math.sqrt(s2)).pdf(u)
        g = t.backward(u)
        ref_mean = np.trapezoid(g * weight, u)
        ref_second = np.trapezoid(g * g * weight, u)
        assert mean[0] == pytest.approx(ref_mean, rel=2e-3)
        assert variance[0] == pytest.approx(ref_second - ref_mean**2, rel=3e-2)


def test_log_needs_positive_values():
    with pytest.raises(InvalidInput) as info:
        fit_transform("log", np.array([1.0, 0.0, -2.0]), np.array([0, 5, 9]))
    assert [i.pointer for i in info.value.issues] == ["/samples/values/5", "/samples/values/9"]
