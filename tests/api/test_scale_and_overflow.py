"""Numbers at the edges of float64: refused with the field named, never a 500, a null without reason or a wrong verdict."""

from __future__ import annotations

import json

import pytest

S = {"x": [0, 1, 2, 3, 4, 5], "y": [0, 1, 0, 1, 2, 0], "values": [1, 2, 3, 4, 2, 1]}
MODEL = {"nugget": 0.1, "structures": [{"family": "cardinal_sine", "partial_sill": 1, "range": 3}]}


def _post(client, url, document):
    r = client.post(url, data=json.dumps(document), content_type="application/json")
    assert r.status_code != 500, r.data[:400]
    return r


def _refused(r, pointer):
    assert r.status_code == 422, r.data[:400]
    assert r.json["errors"][0]["pointer"] == pointer
    return r.json


@pytest.mark.parametrize("hood", [None, {"max_points": 4}])
def test_targets_at_1e300_are_refused(client, hood):
    document = {"samples": S, "model": MODEL, "targets": {"x": [0.5, 1e300], "y": [0.5, -1e300]}}
    if hood:
        document["neighbourhood"] = hood
    _refused(_post(client, "/v1/predictions", document), "/targets/x/1")


def test_a_bandwidth_of_1e308_means_no_band(client):
    wide = _post(
        client,
        "/v1/experimental-variograms",
        {"samples": S, "directions": [{"azimuth": 0, "tolerance": 45, "bandwidth": 1e308}]},
    )
    none = _post(client, "/v1/experimental-variograms", {"samples": S, "directions": [{"azimuth": 0, "tolerance": 45}]})
    assert wide.status_code == 200
    assert [c["pairs"] for c in wide.json["directions"][0]["classes"]] == [
        c["pairs"] for c in none.json["directions"][0]["classes"]
    ]


@pytest.mark.parametrize(
    "values", [[1e300, -1e300, 1e300, 5e299, -7e299, 1e300], [1e-300, 2e-300, 1.5e-300, 1.1e-300, 1.7e-300, 1.2e-300]]
)
def test_values_whose_squares_leave_float64_are_refused(client, values):
    doc = _refused(
        _post(client, "/v1/experimental-variograms", {"samples": {**S, "values": values}}),
        f"/samples/values/{values.index(max(values))}",
    )
    assert "rescale" in doc["errors"][0]["detail"] or "magnitude" in doc["errors"][0]["detail"]


def test_tiny_but_different_values_are_not_called_equal(client):
    r = _post(
        client, "/v1/analyses", {"samples": {**S, "values": [1e-300, 2e-300, 1.5e-300, 1.1e-300, 1.7e-300, 1.2e-300]}}
    )
    assert r.status_code == 422 and "equal" not in r.data.decode()


def test_huge_lag_width_and_cell_size_are_refused(client):
    _refused(
        _post(client, "/v1/experimental-variograms", {"samples": S, "lags": {"width": 1e308, "count": 3}}),
        "/lags/width",
    )
    _refused(_post(client, "/v1/variogram-maps", {"samples": S, "cell_size": 1e308, "cells": 3}), "/cell_size")


@pytest.mark.parametrize(
    "x, y",
    [
        ([180, -180, 0, 10], [10, 10, 20, 30]),
        ([0, 90, 10, 20], [90, 90, 20, 30]),
        ([-30, 120, 10, 20], [-90, -90, 20, 30]),
    ],
)
def test_one_place_with_two_longitudes_is_a_duplicate(client, x, y):
    document = {
        "samples": {"x": x, "y": y, "values": [1, 2, 3, 4]},
        "coordinates": "geographic",
        "duplicates": "reject",
    }
    _refused(_post(client, "/v1/experimental-variograms", document), "/samples/x/1")


def _experimental(value, pairs=100):
    classes = [
        {"mean_distance": d, "value": v, "pairs": p}
        for d, v, p in ((1, 0.5, 100), (2, value, pairs), (3, 1.0, 100), (4, 1.1, 100))
    ]
    return {"experimental": {"directions": [{"azimuth": 0, "classes": classes}]}}


def test_negative_semivariances_and_huge_pair_counts_are_refused(client):
    doc = _refused(_post(client, "/v1/model-fits", _experimental(-1.0)), "/experimental/directions/0/classes/1/value")
    assert "negative" in doc["errors"][0]["detail"]
    _refused(_post(client, "/v1/model-fits", _experimental(0.8, 1e30)), "/experimental/directions/0/classes/1/pairs")
    assert _post(client, "/v1/model-fits", _experimental(0.8)).status_code == 200
