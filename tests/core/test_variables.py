"""Unit tests of lagwise.core.data.variables: several variables at one set of samples."""

from __future__ import annotations

import hashlib

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.data.variables import (
    MAX_VARIABLES,
    VariableInput,
    build_multi_sample_set,
    variables_from_mapping,
)
from lagwise.core.errors import InvalidInput

NAN = np.nan
X = np.arange(6.0)
Y = np.array([0.0, 1.0, 0.0, 1.0, 0.0, 1.0])


def pointers(exc: InvalidInput) -> list[str]:
    return [issue.pointer for issue in exc.issues]


def two_variables(**kwargs):
    return build_multi_sample_set(
        [
            VariableInput("lead", [1.0, 2.0, None, 4.0, 5.0, 6.0], unit="mg/kg"),
            VariableInput("zinc", [None, 3.0, 4.0, None, 7.0, 1.0]),
        ],
        X,
        Y,
        **kwargs,
    )


def test_table_holds_nan_where_not_measured():
    samples = two_variables()
    assert samples.names == ("lead", "zinc") and samples.units == ("mg/kg", None)
    assert samples.values.shape == (6, 2) and samples.size == 6 and samples.count == 2
    assert samples.measured.sum(axis=0).tolist() == [5, 4]
    assert np.isnan(samples.values[2, 0]) and np.isnan(samples.values[0, 1])


def test_one_variable_equals_the_single_variable_set():
    samples = two_variables()
    zinc = samples.variable("zinc")
    alone = build_sample_set([3.0, 4.0, 7.0, 1.0], X[[1, 2, 4, 5]], Y[[1, 2, 4, 5]], ids=["1", "2", "4", "5"])
    np.testing.assert_array_equal(zinc.values, alone.values)
    np.testing.assert_array_equal(zinc.coords, alone.coords)
    assert zinc.ids == alone.ids
    assert zinc.input_hash == samples.input_hash


def test_input_hash_covers_coordinates_then_each_column():
    """SHA-256 (hashlib) over little-endian float64 bytes, NaN where not measured."""
    samples = two_variables()
    digest = hashlib.sha256()
    for column in (X, Y, [1, 2, NAN, 4, 5, 6], [NAN, 3, 4, NAN, 7, 1]):
        digest.update(np.asarray(column, dtype="<f8").tobytes())
    assert samples.input_hash == digest.hexdigest()


@pytest.mark.parametrize(
    "variables, pointer",
    [
        ([VariableInput("lead", [1.0, 2.0, 3.0])], "/samples/variables/lead"),
        ([VariableInput("lead", [1.0, None, None, None, None, None])], "/samples/variables/lead"),
        ([VariableInput("lead", [None] * 6)], "/samples/variables/lead"),
        ([VariableInput("lead", [1.0, 2.0, 3.0, np.inf, 5.0, 6.0])], "/samples/variables/lead/3"),
        ([VariableInput("a/b", [1.0, 2.0, 3.0])], "/samples/variables/a~1b"),
        ([VariableInput("lead", [1.0] * 6), VariableInput("lead", [2.0] * 6)], "/samples/variables/lead"),
        ([], "/samples/variables"),
        ([VariableInput(f"v{k}", [1.0] * 6) for k in range(MAX_VARIABLES + 1)], "/samples/variables"),
    ],
)
def test_bad_variables_name_the_variable_and_index(variables, pointer):
    with pytest.raises(InvalidInput) as info:
        build_multi_sample_set(variables, X, Y)
    assert pointers(info.value) == [pointer]


def test_messages_say_what_is_wrong():
    with pytest.raises(InvalidInput, match="every entry is null"):
        build_multi_sample_set([VariableInput("lead", [None] * 6)], X, Y)
    with pytest.raises(InvalidInput, match="at least 2 measured values, got 1"):
        build_multi_sample_set([VariableInput("lead", [1.0] + [None] * 5)], X, Y)
    with pytest.raises(InvalidInput, match="has 3 entries but x has 6"):
        build_multi_sample_set([VariableInput("lead", [1.0, 2.0, 3.0])], X, Y)


def test_censoring_per_variable():
    samples = build_multi_sample_set(
        [
            VariableInput("lead", [1.0, 2.0, 3.0, 4.0, 5.0, 6.0]),
            VariableInput(
                "zinc",
                [None, None, 4.0, 2.0, 7.0, 1.0],
                censored=[False, True, False, False, False, False],
                detection_limits=[None, 0.5, None, None, None, None],
            ),
        ],
        X,
        Y,
    )
    assert samples.censored == (0, 1)
    assert samples.values[1, 1] == 0.25 and np.isnan(samples.values[0, 1])
    assert any("'zinc'" in w for w in samples.warnings)
    assert samples.variable("zinc").censored == 1 and samples.variable("lead").censored == 0


def test_censored_without_limit_names_the_variable():
    with pytest.raises(InvalidInput) as info:
        build_multi_sample_set(
            [VariableInput("zinc", [1.0, 2.0, 3.0, 4.0, 5.0, 6.0], censored=[True] + [False] * 5)], X, Y
        )
    assert pointers(info.value) == ["/samples/detection_limits/zinc"]


def test_duplicates_average_each_variable_over_its_measured_values():
    x = np.array([0.0, 0.0, 1.0, 2.0])
    samples = build_multi_sample_set(
        [VariableInput("a", [1.0, 3.0, 3.0, 4.0]), VariableInput("b", [None, 2.0, 5.0, 6.0])], x, np.zeros(4)
    )
    np.testing.assert_array_equal(samples.values, [[2.0, 2.0], [3.0, 5.0], [4.0, 6.0]])
    assert samples.duplicates.locations == 1 and samples.duplicates.removed == 1


def test_duplicates_first_takes_the_first_measured_value():
    x = np.array([0.0, 0.0, 1.0, 2.0])
    samples = build_multi_sample_set(
        [VariableInput("a", [1.0, 3.0, 3.0, 4.0]), VariableInput("b", [None, 2.0, 5.0, 6.0])],
        x,
        np.zeros(4),
        duplicates="first",
    )
    np.testing.assert_array_equal(samples.values, [[1.0, 2.0], [3.0, 5.0], [4.0, 6.0]])


def test_duplicates_that_leave_one_location_are_refused():
    x = np.array([0.0, 0.0, 1.0, 2.0])
    with pytest.raises(InvalidInput, match="only one location") as info:
        build_multi_sample_set(
            [VariableInput("a", [1.0, 3.0, 3.0, 4.0]), VariableInput("b", [1.0, 2.0, None, None])], x, np.zeros(4)
        )
    assert pointers(info.value) == ["/samples/variables/b"]


def test_samples_with_nothing_measured_are_reported():
    samples = build_multi_sample_set(
        [VariableInput("a", [1.0, None, 3.0, 4.0, 5.0, 6.0]), VariableInput("b", [1.0, None, 3.0, 4.0, 5.0, 6.0])],
        X,
        Y,
    )
    assert any("no measured variable" in w for w in samples.warnings)


def test_mapping_with_censoring_for_an_unknown_variable_is_refused():
    with pytest.raises(InvalidInput) as info:
        variables_from_mapping({"lead": [1.0, 2.0]}, censored={"tin": [False, False]})
    assert pointers(info.value) == ["/samples/censored/tin"]


def test_unknown_variable_is_a_key_error():
    with pytest.raises(KeyError):
        two_variables().variable("tin")
