"""Bad input: every refusal is an RFC 9457 problem naming the field (and sample index)."""

from __future__ import annotations

import pytest

URL = "/v1/experimental-variograms"
PROBLEM = "application/problem+json"


def post_raw(client, data, content_type="application/json"):
    return client.post(URL, data=data, content_type=content_type)


def assert_problem(r, status, kind, pointers=None):
    assert r.status_code == status, r.data[:500]
    assert r.mimetype == PROBLEM
    doc = r.json
    assert doc["type"] == f"/problems/{kind}" and doc["status"] == status and doc["title"] and doc["detail"]
    if pointers is not None:
        assert [e["pointer"] for e in doc.get("errors", [])] == pointers
    return doc


def good(**extra):
    return {"samples": {"x": [0, 1, 2, 3], "y": [0, 1, 0, 1], "values": [1, 2, 3, 4]}, **extra}


@pytest.mark.parametrize("literal", [b"NaN", b"Infinity", b"-Infinity"])
def test_nan_and_infinity_literals_are_malformed(client, literal):
    body = b'{"samples": {"x": [0, 1], "values": [1, ' + literal + b"]}}"
    response = post_raw(client, body)
    assert_problem(response, 400, "malformed-json")
    assert f"{literal.decode()} at character" in response.get_json()["detail"]


def test_overflowing_number_is_invalid(client):
    body = b'{"samples": {"x": [0, 1, 2], "values": [1, 2, 1e400]}}'
    assert_problem(post_raw(client, body), 422, "invalid-input", ["/samples/values/2"])


def test_overflowing_scalar_is_invalid(client):
    body = b'{"samples": {"x": [0, 1, 2], "values": [1, 2, 3]}, "lags": {"width": 1e400, "count": 2}}'
    assert_problem(post_raw(client, body), 422, "invalid-input", ["/lags/width"])


def test_deep_nesting_is_malformed_not_a_crash(client):
    """Default Flask answers a 200,000-deep nested array with a 500 (RecursionError)."""
    body = b"[" * 200_000 + b"]" * 200_000
    assert_problem(post_raw(client, body), 400, "malformed-json")
    deep_overflow = b'{"a": ' + b"[" * 5000 + b"1e400" + b"]" * 5000 + b"}"
    assert_problem(post_raw(client, deep_overflow), 400, "malformed-json")


def test_invalid_utf8(client):
    assert_problem(post_raw(client, b'{"samples": "\xff"}'), 400, "malformed-json")


def test_not_an_object(client):
    assert_problem(post_raw(client, b"[1, 2]"), 422, "invalid-input", [""])


def test_wrong_media_type(client):
    assert_problem(post_raw(client, b"{}", "text/csv"), 415, "unsupported-media-type")


def test_body_over_limit_refused_from_content_length(small_limits_client):
    r = small_limits_client.post(URL, data=b"{" + b" " * 10_000 + b"}", content_type="application/json")
    assert_problem(r, 413, "body-too-large")


@pytest.mark.parametrize(
    "body, pointers",
    [
        ({"samples": {"x": [0], "values": [1]}}, ["/samples/values"]),
        ({"samples": {"x": [0, 1, 2], "values": [1, 2]}}, ["/samples/x"]),
        ({"samples": {"x": [0, 1, 2], "values": [1, "a", None]}}, ["/samples/values/1", "/samples/values/2"]),
        ({"samples": {"x": [0, 1, 2], "values": [1, True, 3]}}, ["/samples/values/1"]),
        ({"samples": {"values": [1, 2]}}, ["/samples/x"]),
        (good(lags={"width": 0, "count": 3}), ["/lags/width"]),
        (good(lags={"width": -2, "count": 3}), ["/lags/width"]),
        (good(lags={"edges": [0, 2, 1]}), ["/lags/edges/2"]),
        (good(lags={"edges": [0, 1, 1]}), ["/lags/edges/2"]),
        (good(directions=[{"tolerance": 0}]), ["/directions/0/tolerance"]),
        (good(directions=[{"tolerance": 95}]), ["/directions/0/tolerance"]),
        (good(directions=[{"azimuth": 10}, {"azimuth": 360}]), ["/directions/1/azimuth"]),
        (good(directions=[{"azimuth": -5}]), ["/directions/0/azimuth"]),
        (good(statistic="pairwise_relative", samples={"x": [0, 1, 2], "values": [1, 0, 2]}), ["/samples/values/1"]),
        (good(statistic="variance"), ["/statistic"]),
        (good(colour="blue"), ["/colour"]),
        (good(samples={"x": [0, 1], "y": [0, 91], "values": [1, 2]}, coordinates="geographic"), ["/samples/y/1"]),
        ({"samples": {"x": [3, 3, 3], "y": [1, 1, 1], "values": [1, 2, 3]}}, ["/samples/x"]),
        (good(pairs_for_class={"class": 99}), ["/pairs_for_class/class"]),
        (good(min_pairs=0), ["/min_pairs"]),
    ],
)
def test_invalid_fields_are_named(client, body, pointers):
    r = client.post(URL, json=body)
    doc = assert_problem(r, 422, "invalid-input", pointers)
    assert all(e["detail"] for e in doc["errors"])


def test_sample_limit_refused_before_work(small_limits_client):
    body = {"samples": {"x": list(range(60)), "values": [1.0] * 60}}
    doc = assert_problem(small_limits_client.post(URL, json=body), 422, "limit-exceeded")
    assert doc["limit"] == "LAGWISE_MAX_SAMPLES" and doc["allowed"] == 50 and doc["requested"] == 60


def test_pair_limit_refused_before_work(small_limits_client):
    body = {"samples": {"x": list(range(45)), "values": [float(i % 7) for i in range(45)]}}
    doc = assert_problem(small_limits_client.post(URL, json=body), 422, "limit-exceeded")
    assert doc["limit"] == "LAGWISE_MAX_PAIRS" and "fewer direction classes" in doc["detail"]


def test_map_cells_limit(small_limits_client):
    body = {"samples": {"x": [0, 1, 2], "y": [0, 1, 2], "values": [1, 2, 3]}, "cell_size": 1, "cells": 50}
    assert_problem(small_limits_client.post("/v1/variogram-maps", json=body), 422, "invalid-input", ["/cells"])


def test_unknown_path_and_method(client):
    assert_problem(client.get("/v2/nothing"), 404, "not-found")
    assert_problem(client.get(URL), 405, "method-not-allowed")
