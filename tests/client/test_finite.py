"""NaN and Infinity are refused before sending, each named by its JSON pointer (RFC 6901)."""

import numpy as np
import pytest

from lagwise_client import Lagwise
from lagwise_client.errors import ValidationError
from lagwise_client.finite import non_finite_errors

# Nothing listens here: every request below must be refused before it is sent.
OFFLINE = "http://127.0.0.1:9"


def test_nan_in_numpy_values_named_by_pointer():
    values = np.array([1.0, np.nan, 2.0, 3.0, 4.0, 5.0])
    with pytest.raises(ValidationError) as caught:
        Lagwise(OFFLINE).experimental_variogram(x=np.arange(6.0), y=np.zeros(6), values=values)
    assert caught.value.status is None
    assert caught.value.errors == [{"pointer": "/samples/values/1", "detail": "not a finite number"}]
    assert "/samples/values/1" in str(caught.value)


def test_infinity_in_list_coordinates_and_nan_nugget():
    with pytest.raises(ValidationError) as caught:
        Lagwise(OFFLINE).experimental_variogram(x=[0.0, 1.0, float("inf")], values=[1.0, 2.0, 3.0])
    assert [e["pointer"] for e in caught.value.errors] == ["/samples/x/2"]
    model = {"structures": [{"family": "spherical", "sill": 1.0, "range": 2.0}], "nugget": float("nan")}
    with pytest.raises(ValidationError) as caught:
        Lagwise(OFFLINE).predict(x=[0.0, 1.0], values=[1.0, 2.0], model=model, targets={"x": [0.5]})
    assert [e["pointer"] for e in caught.value.errors] == ["/model/nugget"]


def test_listing_stops_at_twenty_and_escapes_keys():
    errors = non_finite_errors({"a/b": np.full((3, 10), np.nan), "c": [1, 2]})
    assert len(errors) == 20
    assert errors[0]["pointer"] == "/a~1b/0/0" and errors[10]["pointer"] == "/a~1b/1/0"
    assert non_finite_errors({"n": np.arange(5), "v": np.float64(3.0), "s": "nan"}) == []
    assert non_finite_errors({"v": np.float64(np.inf)}) == [{"pointer": "/v", "detail": "not a finite number"}]
