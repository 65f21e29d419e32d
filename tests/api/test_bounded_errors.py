"""Floods of bad list elements: short problem documents with a count of what was left out, bounded memory."""

from __future__ import annotations

import json
import tracemalloc

import pytest
from lagwise.api.problems import MAX_LISTED_ERRORS, Problem

SAMPLES = {"x": [0, 1, 2, 3], "y": [0, 1, 0, 1], "values": [1, 2, 3, 4]}


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
def test_element_errors_stop_early_with_a_count(client, url, document, pointer):
    r = _post(client, url, document)
    assert r.status_code == 422
    doc = r.json
    assert doc["errors"][0]["pointer"] == pointer and len(doc["errors"]) == 20
    assert doc["errors_omitted"] == 200_000 - 20


def test_problem_lists_are_capped():
    problem = Problem("invalid-input", "many", [{"pointer": f"/x/{i}", "detail": "bad"} for i in range(250)])
    assert len(problem.errors) == MAX_LISTED_ERRORS and problem.omitted == 150
