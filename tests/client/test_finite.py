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


def test_listing_stops_at_twenty_counts_the_rest_and_escapes_keys():
    errors, total = non_finite_errors({"a/b": np.full((3, 10), np.nan), "c": [1, float("nan")]})
    assert len(errors) == 20 and total == 31
    assert errors[0]["pointer"] == "/a~1b/0/0" and errors[10]["pointer"] == "/a~1b/1/0"
    assert non_finite_errors({"n": np.arange(5), "v": np.float64(3.0), "s": "nan"}) == ([], 0)
    assert non_finite_errors({"v": np.float64(np.inf)}) == ([{"pointer": "/v", "detail": "not a finite number"}], 1)


def test_many_non_finite_values_counted_in_errors_omitted():
    values = np.full(150_000, np.nan)
    with pytest.raises(ValidationError) as caught:
        Lagwise(OFFLINE, arrow_above=None).experimental_variogram(x=np.arange(150_000.0), values=values)
    assert len(caught.value.errors) == 20 and caught.value.problem["errors_omitted"] == 149_980
    assert "150000 values (/samples/values/0, /samples/values/1, /samples/values/2, ...)" in str(caught.value)


@pytest.mark.parametrize("force", [True, False])
def test_the_arrow_form_refuses_nan_and_infinity_before_sending(force):
    # Above arrow_above the samples go as an Arrow stream: the same refusal, the same pointers and count.
    pytest.importorskip("pyarrow")
    n = 30_000
    values = np.ones(n)
    values[[4, 7]] = np.nan
    x = np.arange(float(n))
    x[-1] = np.inf
    client = Lagwise(OFFLINE, arrow_above=100) if force else Lagwise(OFFLINE)
    with pytest.raises(ValidationError) as caught:
        client.experimental_variogram(x=x, values=values, lags={"width": float("nan"), "count": 3})
    pointers = ["/samples/x/29999", "/samples/values/4", "/samples/values/7", "/lags/width"]
    assert sorted(e["pointer"] for e in caught.value.errors) == sorted(pointers)
    assert all(e["detail"] == "not a finite number" for e in caught.value.errors)
    assert caught.value.status is None and "4 values (" in str(caught.value)


def test_the_arrow_form_lists_twenty_and_counts_every_one():
    pytest.importorskip("pyarrow")
    values = np.full(150_000, np.inf)
    with pytest.raises(ValidationError) as caught:
        Lagwise(OFFLINE, arrow_above=100).experimental_variogram(x=np.arange(150_000.0), values=values)
    assert [e["pointer"] for e in caught.value.errors] == [f"/samples/values/{i}" for i in range(20)]
    assert caught.value.problem["errors_omitted"] == 149_980
    assert "150000 values (/samples/values/0, /samples/values/1, /samples/values/2, ...)" in str(caught.value)


def test_missing_detection_limits_are_not_refused_in_the_arrow_form():
    # None (null) marks a missing value, not a non-finite one: the request is sent (and fails to connect).
    pytest.importorskip("pyarrow")
    from lagwise_client import TransportError

    n = 200
    limits = [None] * n
    with pytest.raises(TransportError):
        Lagwise(OFFLINE, arrow_above=100, retries=0).experimental_variogram(
            x=np.arange(float(n)), values=np.ones(n), censored=[False] * n, detection_limits=limits
        )


def test_booleans_among_numbers_and_numbers_as_flags_go_as_json():
    # pyarrow would read True as 1.0 and 1 as True; the JSON form refuses both, naming the entry,
    # so such columns are not put into an Arrow stream (None: the request goes as JSON).
    pytest.importorskip("pyarrow")
    from lagwise_client import columnar

    x = np.arange(4.0)
    assert columnar.samples_table({"x": x, "values": [1.0, True, 2.0, 3.0]}) is None
    assert columnar.samples_table({"x": x, "values": np.array([True, False, True, True])}) is None
    assert columnar.samples_table({"x": x, "values": x, "censored": np.array([1, 0, 0, 0])}) is None
    assert columnar.raster_table([1.0, None, False, 2.0]) is None
    kept = columnar.samples_table({"x": x, "values": [1, 2.0, 3, 4], "censored": np.array([True, False] * 2)})
    assert kept is not None and kept.column("values").to_pylist() == [1.0, 2.0, 3.0, 4.0]
    assert columnar.raster_table(np.array([1.0, np.nan, 2.0])) is not None
