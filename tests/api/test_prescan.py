"""Huge bodies refused from counts taken before parsing, and the sample limit counted as sent."""

from __future__ import annotations

import json
import tracemalloc

import pytest
from lagwise.api import create_app
from lagwise.api.settings import Settings
from lagwise.core.limits import Limits


@pytest.fixture()
def small():
    limits = Limits(max_samples=100, memory_budget_bytes=48 * 20_000)
    return create_app({"TESTING": True}, settings=Settings(limits=limits)).test_client()


def _post(client, body: bytes, url: str = "/v1/experimental-variograms"):
    return client.post(url, data=body, content_type="application/json")


def _features(n: int, places: int) -> dict:
    features = [
        {
            "type": "Feature",
            "geometry": {"type": "Point", "coordinates": [i % places, i % places * 2]},
            "properties": {"v": i % 3},
        }
        for i in range(n)
    ]
    return {"samples": {"geojson": {"type": "FeatureCollection", "features": features}, "value_property": "v"}}


def test_geojson_points_over_the_sample_limit_are_refused_before_parsing(small):
    r = _post(small, json.dumps(_features(150, 10)).encode())
    assert r.status_code == 422 and r.json["limit"] == "LAGWISE_MAX_SAMPLES" and r.json["requested"] == 150
    assert r.json["errors"][0]["pointer"] == "/samples/geojson/features"
    assert "before parsing" in r.json["detail"]


def test_escaped_point_names_are_counted_after_parsing(small):
    body = json.dumps(_features(150, 10)).replace('"Point"', '"\\u0050oint"').encode()
    r = _post(small, body)
    assert r.status_code == 422 and r.json["limit"] == "LAGWISE_MAX_SAMPLES"
    assert r.json["errors"][0]["pointer"] == "/samples/geojson/features"


def test_the_sample_limit_counts_samples_before_duplicates_are_merged(small):
    # 150 samples on 10 places: 10 remain after averaging, but 150 were sent.
    x = [i % 10 for i in range(150)]
    body = {"samples": {"x": x, "y": x, "values": [float(i % 3) for i in range(150)]}, "duplicates": "average"}
    r = _post(small, json.dumps(body).encode())
    assert r.status_code == 422 and r.json["requested"] == 150 and r.json["errors"][0]["pointer"] == "/samples/x"
    assert _post(small, json.dumps(_features(90, 10)).encode()).status_code == 200


def test_a_body_of_too_many_values_is_refused_before_it_is_held(small):
    body = b'{"samples": {"x": [0, 1, 2], "values": [1, 2, 3]}, "families": [' + b'"a",' * 30_000 + b'"a"]}'
    _post(small, b'{"samples": {"x": [0, 1, 2], "values": [1, 2, 3]}, "families": ["a"]}', "/v1/model-fits")
    tracemalloc.start()  # after a first request, whose imports and caches are no part of the body's cost
    try:
        r = _post(small, body, "/v1/model-fits")
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert r.status_code == 422 and r.json["limit"] == "LAGWISE_MEMORY_BUDGET_BYTES"
    assert r.json["requested"] >= 30_001 * 48
    assert peak < 4 * len(body)  # the body and a few copies; parsed, its strings alone would take 1.4 MB


def test_default_limits_leave_room_for_the_largest_sample_set():
    # 200,000 samples of x, y, z, values and ids: about 1e6 values, far below the default allowance.
    limits = Limits()
    assert 5 * limits.max_samples * 48 < limits.memory_budget_bytes
