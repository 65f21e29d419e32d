"""Floods of bad list elements: short problem documents with a count of what was left out, bounded memory."""

from __future__ import annotations

import json
import tracemalloc

import pytest
from lagwise.api.fields import CappedList, StrictFloat
from lagwise.api.problems import MAX_LISTED_ERRORS, Problem
from marshmallow import ValidationError, fields

SAMPLES = {"x": [0, 1, 2, 3], "y": [0, 1, 0, 1], "values": [1, 2, 3, 4]}
VARIOGRAMS = "/v1/experimental-variograms"


def _post(client, url, document):
    return client.post(url, data=json.dumps(document), content_type="application/json")


def test_repeated_families_are_refused_in_one_entry(client):
    r = _post(client, "/v1/model-fits", {"samples": SAMPLES, "families": ["spherical", "exponential", "spherical"]})
    assert r.status_code == 422
    assert [e["pointer"] for e in r.json["errors"]] == ["/families/2"] and "once" in r.json["errors"][0]["detail"]


def test_a_million_families_cost_little(client):
    body = json.dumps({"samples": SAMPLES, "families": ["a"] * 1_000_000})
    tracemalloc.start()
    try:
        r = client.post("/v1/model-fits", data=body, content_type="application/json")
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert r.status_code == 422 and len(r.data) < 2000
    assert peak < 200 * 2**20  # the parsed body itself takes about 60 MB of Python strings


@pytest.mark.parametrize(
    "url, document, pointer",
    [
        ("/v1/experimental-variograms", {"samples": {**SAMPLES, "ids": [1] * 200_000}}, "/samples/ids/0"),
        (
            "/v1/predictions",
            {
                "samples": SAMPLES,
                "model": {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 1, "range": 3}]},
                "targets": {"x": [0.5], "y": [0.5]},
                "return_weights": ["a"] * 200_000,
            },
            "/return_weights/0",
        ),
    ],
)
def test_element_errors_list_twenty_and_count_all(client, url, document, pointer):
    r = _post(client, url, document)
    assert r.status_code == 422
    doc = r.json
    assert doc["errors"][0]["pointer"] == pointer and len(doc["errors"]) == 20
    assert doc["errors_omitted"] == 200_000 - 20
    assert doc["detail"] == "200000 fields are invalid (the first 20 listed)"


MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 1, "range": 3}]}


@pytest.mark.parametrize(
    "url, document, column, bad, good",
    [
        (VARIOGRAMS, {"samples": SAMPLES}, "/samples/ids", 7, "s"),
        (VARIOGRAMS, {"samples": SAMPLES}, "/samples/censored", "yes", False),
        (VARIOGRAMS, {"samples": SAMPLES}, "/samples/detection_limits", "<1", 0.5),
        pytest.param(VARIOGRAMS, {"samples": SAMPLES}, "/samples/detection_limits", 10**400, 1, id="huge-integer"),
        (
            "/v1/predictions",
            {"samples": SAMPLES, "model": MODEL, "targets": {"x": [0.5], "y": [0.5]}},
            "/return_weights",
            "a",
            0,
        ),
    ],
)
def test_every_invalid_list_element_is_counted_past_the_twentieth(client, url, document, column, bad, good):
    # 1000 elements, every third invalid: 334 invalid, of which the first 20 are listed.
    elements = [bad if i % 3 == 0 else good for i in range(1000)]
    *parents, name = column.strip("/").split("/")
    document = json.loads(json.dumps(document))
    target = document
    for parent in parents:
        target = target[parent]
    target[name] = elements
    r = _post(client, url, document)
    assert r.status_code == 422
    doc = r.json
    assert doc["detail"] == "334 fields are invalid (the first 20 listed)"
    assert [e["pointer"] for e in doc["errors"]] == [f"{column}/{3 * i}" for i in range(20)]
    assert doc["errors_omitted"] == 314


def test_plain_lists_load_as_before():
    field = CappedList(StrictFloat(allow_none=True, allow_nan=False))
    loaded = field.deserialize([1, 2.5, None])
    assert loaded == [1.0, 2.5, None] and type(loaded[0]) is float
    assert CappedList(fields.String()).deserialize(["a", "b"]) == ["a", "b"]
    with pytest.raises(ValidationError):
        CappedList(fields.String()).deserialize([None])
    assert CappedList(fields.String(allow_none=True)).deserialize([None]) == [None]


def test_problem_lists_are_capped():
    problem = Problem("invalid-input", "many", [{"pointer": f"/x/{i}", "detail": "bad"} for i in range(250)])
    assert len(problem.errors) == MAX_LISTED_ERRORS and problem.omitted == 150
