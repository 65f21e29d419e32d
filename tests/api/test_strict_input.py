"""Hostile input: values of the wrong JSON type, mixed forms, repeated members are refused by name."""

from __future__ import annotations

import pytest

from tests.api.test_bad_input import assert_problem

VARIOGRAMS = "/v1/experimental-variograms"


def columns(**extra):
    return {"x": [0, 1, 2, 3], "y": [0, 1, 0, 1], "values": [1, 2, 3, 4], **extra}


@pytest.mark.parametrize(
    "body, pointer, detail",
    [
        ({"samples": columns(), "lags": {"width": "12", "count": 3}}, "/lags/width", "must be a number, not a string"),
        ({"samples": columns(), "lags": {"width": 1, "count": "3"}}, "/lags/count", "must be an integer, not a string"),
        ({"samples": columns(), "lags": {"width": 1, "count": 2.5}}, "/lags/count", "not a number with a fraction"),
        ({"samples": columns(), "lags": {"width": True, "count": 3}}, "/lags/width", "not a boolean"),
        ({"samples": columns(), "min_pairs": "30"}, "/min_pairs", "must be an integer, not a string"),
        ({"samples": columns(), "directions": [{"azimuth": "45"}]}, "/directions/0/azimuth", "not a string"),
        ({"samples": columns(), "lags": {"edges": [0, "1", 2]}}, "/lags/edges/1", "must be a number, not a string"),
        (
            {"samples": columns(censored=["yes", False, False, False], detection_limits=[0.5, None, None, None])},
            "/samples/censored/0",
            "must be true or false, not a string",
        ),
        (
            {"samples": columns(censored=[1, False, False, False], detection_limits=[0.5, None, None, None])},
            "/samples/censored/0",
            "must be true or false, not a number",
        ),
        (
            {"samples": columns(censored=[True, False, False, False], detection_limits=["0.5", None, None, None])},
            "/samples/detection_limits/0",
            "must be a number, not a string",
        ),
        ({"samples": columns(x=[0, "1", 2, 3])}, "/samples/x/1", "not a number"),
        ({"samples": columns(values=[1, 2, "3", 4])}, "/samples/values/2", "not a number"),
    ],
)
def test_numbers_and_booleans_are_not_read_from_strings(client, body, pointer, detail):
    doc = assert_problem(client.post(VARIOGRAMS, json=body), 422, "invalid-input", [pointer])
    assert detail in doc["errors"][0]["detail"]
    assert doc["detail"].startswith(pointer + ": ")


def test_analysis_boolean_option_is_strict(client):
    body = {"samples": columns(), "fit": {"compare": "false"}}
    doc = assert_problem(client.post("/v1/analyses", json=body), 422, "invalid-input", ["/fit/compare"])
    assert doc["errors"][0]["detail"] == "must be true or false, not a string"


def test_true_numbers_and_booleans_still_load(client):
    body = {
        "samples": columns(censored=[True, False, False, False], detection_limits=[0.5, None, None, None]),
        "lags": {"width": 1, "count": 2},
    }
    assert client.post(VARIOGRAMS, json=body).status_code == 200


@pytest.mark.parametrize(
    "lags, given",
    [
        ({"width": 1, "count": 3, "auto": "equal_width"}, ("width", "count", "auto")),
        ({"edges": [0, 1, 2], "width": 1}, ("edges", "width")),
        ({"auto": "equal_pairs", "edges": [0, 1]}, ("auto", "edges")),
    ],
)
def test_mixed_lag_forms_are_refused_naming_the_forms(client, lags, given):
    doc = assert_problem(client.post(VARIOGRAMS, json={"samples": columns(), "lags": lags}), 422, "invalid-input")
    assert [e["pointer"] for e in doc["errors"]] == ["/lags"]
    detail = doc["errors"][0]["detail"]
    assert "width and count, edges, or auto" in detail and "cannot be mixed" in detail
    assert set(detail.split("(got ")[1].rstrip(")").split(", ")) == set(given)
    assert "Unknown field" not in doc["detail"]


def test_mixed_sample_forms_are_refused_naming_the_forms(client):
    raster = {"origin": [0, 0], "spacing": [1, 1], "shape": [2, 2], "values": [1, 2, 3, 4]}
    doc = assert_problem(
        client.post(VARIOGRAMS, json={"samples": {"raster": raster, "x": [0, 1]}}), 422, "invalid-input", ["/samples"]
    )
    assert "or a raster" in doc["errors"][0]["detail"] and "cannot be mixed" in doc["errors"][0]["detail"]


def test_a_misspelt_lag_member_is_still_unknown(client):
    doc = assert_problem(
        client.post(VARIOGRAMS, json={"samples": columns(), "lags": {"widht": 1}}), 422, "invalid-input"
    )
    assert [e["pointer"] for e in doc["errors"]] == ["/lags/widht"]
