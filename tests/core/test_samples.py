"""Unit tests of lagwise.core.data.samples: validation, duplicates, hashing."""

from __future__ import annotations

import hashlib

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.errors import InvalidInput


def pointers(exc: InvalidInput) -> list[str]:
    return [issue.pointer for issue in exc.issues]


def test_dimensions():
    assert build_sample_set([1, 2], [0, 1]).dimension == 1
    assert build_sample_set([1, 2], [0, 1], [0, 0]).dimension == 2
    assert build_sample_set([1, 2], [0, 1], [0, 0], [5, 6]).dimension == 3


@pytest.mark.parametrize(
    "kwargs, pointer",
    [
        (dict(values=[1.0], x=[0.0]), "/samples/values"),
        (dict(values=[1.0, 2.0], x=[0.0, 1.0, 2.0]), "/samples/x"),
        (dict(values=[1.0, np.nan], x=[0.0, 1.0]), "/samples/values/1"),
        (dict(values=[1.0, 2.0], x=[0.0, np.inf]), "/samples/x/1"),
        (dict(values=[1.0, 2.0], x=[0.0, 1.0], z=[0.0, 1.0]), "/samples/y"),
        (dict(values=[1.0, 2.0], x=[0.0, 1.0], y=[0.0, 95.0], coordinates="geographic"), "/samples/y/1"),
        (dict(values=[1.0, 2.0], x=[0.0, 1.0], y=[3.0, 3.0], ids=["a"]), "/samples/ids"),
    ],
)
def test_invalid_columns_name_field_and_index(kwargs, pointer):
    with pytest.raises(InvalidInput) as info:
        build_sample_set(**kwargs)
    assert pointer in pointers(info.value)


def test_duplicates_average_first_reject():
    x, y, v = [0.0, 1.0, 0.0, 2.0], [0.0, 0.0, 0.0, 0.0], [1.0, 5.0, 3.0, 7.0]
    averaged = build_sample_set(v, x, y, ids=["a", "b", "c", "d"])
    assert averaged.values.tolist() == [2.0, 5.0, 7.0]
    assert averaged.ids == ("a", "b", "d")
    assert averaged.duplicates.removed == 1 and "averaged" in averaged.warnings[0]
    first = build_sample_set(v, x, y, duplicates="first")
    assert first.values.tolist() == [1.0, 5.0, 7.0]
    with pytest.raises(InvalidInput) as info:
        build_sample_set(v, x, y, duplicates="reject")
    assert pointers(info.value) == ["/samples/x/2"]
    assert "same location as sample 0" in info.value.issues[0].detail


def test_all_at_one_location():
    with pytest.raises(InvalidInput, match="one location"):
        build_sample_set([1.0, 2.0, 3.0], [5.0, 5.0, 5.0], [1.0, 1.0, 1.0])


def test_input_hash_is_sha256_of_float64_columns():
    """DESIGN: SHA-256 over little-endian float64 bytes of x, y, z (present) and values, before duplicates."""
    x, y, v = [0.0, 1.0, 0.0], [2.0, 3.0, 2.0], [4.0, 5.0, 6.0]
    expected = hashlib.sha256(np.array(x + y + v, dtype="<f8").tobytes()).hexdigest()
    assert build_sample_set(v, x, y).input_hash == expected


def test_geographic_wide_span_warns():
    samples = build_sample_set([1.0, 2.0, 3.0], [0.0, 5.0, 10.0], [0.0, 0.0, 1.0], coordinates="geographic")
    assert any("loses accuracy" in w for w in samples.warnings)


def test_coordinates_too_close_for_their_squares_are_refused():
    """Squared distances under about 1e-308 underflow to 0 in float64 (IEEE 754 binary64, common
    practice): coordinates whose widest axis spans less than MIN_SPREAD are refused by name; a
    narrow axis beside a wide one is fine."""
    from lagwise.core.data.raster import build_raster
    from lagwise.core.data.samples import MIN_SPREAD

    tiny = [0.0, 1e-200, 2e-200, 3e-200]
    with pytest.raises(InvalidInput) as refused:
        build_sample_set(np.arange(4.0), np.array(tiny))
    assert refused.value.issues[0].pointer == "/samples/x" and "underflow" in refused.value.issues[0].detail
    assert build_sample_set(np.arange(4.0), np.arange(4.0), np.array(tiny)).size == 4
    with pytest.raises(InvalidInput) as refused:
        build_raster((0.0, 0.0), (MIN_SPREAD / 10, MIN_SPREAD / 10), (2, 2), np.arange(4.0))
    assert refused.value.issues[0].pointer == "/samples/raster/spacing"
