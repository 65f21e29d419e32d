"""Unit tests of exceedance probabilities (lagwise.core.kriging.exceedance)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from lagwise.core.data.transforms import fit_transform
from lagwise.core.errors import InvalidInput
from lagwise.core.kriging.exceedance import exceedance, transformed_threshold, validate_thresholds
from scipy.stats import norm


def test_probabilities_are_normal_tails():
    est, var = np.array([0.0, 1.0, 2.0, np.nan]), np.array([1.0, 4.0, 0.25, np.nan])
    found = exceedance(est, var, (1.5,), fit_transform("none", np.array([1.0, 2.0])))
    # scipy.stats.norm.sf((t - estimate) / sd)
    np.testing.assert_allclose(found.probability[0, :3], norm.sf((1.5 - est[:3]) / np.sqrt(var[:3])), rtol=1e-14)
    assert math.isnan(found.probability[0, 3])


def test_zero_variance_is_certain():
    found = exceedance(np.array([1.0, 3.0, 2.0]), np.zeros(3), (2.0,), fit_transform("none", np.ones(2)))
    assert found.probability.tolist() == [[0.0, 1.0, 0.0]]


def test_log_thresholds_are_read_in_log_space():
    values = np.array([1.0, 2.0, 4.0])
    found = exceedance(np.array([0.5]), np.array([0.2]), (3.0,), fit_transform("log", values))
    # scipy.stats.norm.sf of the logarithm of the threshold
    assert found.probability[0, 0] == pytest.approx(norm.sf((math.log(3.0) - 0.5) / math.sqrt(0.2)), rel=1e-14)
    assert found.transformed == (pytest.approx(math.log(3.0)),)


def test_normal_score_thresholds_follow_the_score_table():
    values = np.array([5.0, 1.0, 3.0, 2.0, 4.0])
    t = fit_transform("normal_score", values)
    # Hazen positions (r - 1/2)/n: 3.0 is the middle value, score 0; 3.5 lies half way to the score of 4.0.
    assert transformed_threshold(t, 3.0) == pytest.approx(0.0, abs=1e-15)
    assert transformed_threshold(t, 3.5) == pytest.approx(norm.ppf(0.7) / 2, rel=1e-12)
    assert transformed_threshold(t, 5.0) == math.inf and transformed_threshold(t, 0.5) == -math.inf
    found = exceedance(np.array([0.0, 0.0]), np.array([1.0, 1.0]), (5.0, 0.5, 3.0), t)
    assert found.probability[:, 0].tolist() == [0.0, 1.0, 0.5]


@pytest.mark.parametrize(
    ("thresholds", "kind", "pointer"),
    [([1.0, float("nan")], "none", "/thresholds/1"), ([float("inf")], "none", "/thresholds/0"),
     ([2.0, 0.0], "log", "/thresholds/1"), (["1"], "none", "/thresholds/0")],
)  # fmt: skip
def test_bad_thresholds(thresholds, kind, pointer):
    with pytest.raises(InvalidInput) as caught:
        validate_thresholds(thresholds, kind)
    assert caught.value.issues[0].pointer == pointer


def test_too_many_thresholds():
    with pytest.raises(InvalidInput):
        validate_thresholds([1.0] * 21, "none")
