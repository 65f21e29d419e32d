"""Unit tests of lagwise.core.data.censoring through build_sample_set."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.errors import InvalidInput

X = [0.0, 1.0, 2.0, 3.0]


@pytest.mark.parametrize("policy, expected", [("half_limit", 0.25), ("limit", 0.5), ("zero", 0.0)])
def test_policies(policy, expected):
    samples = build_sample_set(
        [1.0, 2.0, 999.0, 4.0],
        X,
        censored=[False, False, True, False],
        detection_limits=[np.nan, np.nan, 0.5, np.nan],
        censoring=policy,
    )
    assert samples.values[2] == expected and samples.censored == 1
    assert policy in samples.warnings[0]


def test_reject_names_the_samples():
    with pytest.raises(InvalidInput) as info:
        build_sample_set(
            [1.0, 2.0, 3.0, 4.0],
            X,
            censored=[False, True, False, True],
            detection_limits=[0, 0.5, 0, 0.5],
            censoring="reject",
        )
    assert [i.pointer for i in info.value.issues] == ["/samples/censored/1", "/samples/censored/3"]


def test_flags_without_limits():
    with pytest.raises(InvalidInput) as info:
        build_sample_set([1.0, 2.0, 3.0, 4.0], X, censored=[False, True, False, False])
    assert info.value.issues[0].pointer == "/samples/detection_limits"
    with pytest.raises(InvalidInput) as info:
        build_sample_set([1.0, 2.0, 3.0, 4.0], X, censored=[False, True, False, False], detection_limits=[np.nan] * 4)
    assert info.value.issues[0].pointer == "/samples/detection_limits/1"


def test_limits_without_flags():
    with pytest.raises(InvalidInput, match="censored flags"):
        build_sample_set([1.0, 2.0, 3.0, 4.0], X, detection_limits=[0.5] * 4)
