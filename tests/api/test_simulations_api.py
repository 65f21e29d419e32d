"""API tests of POST /v1/simulations (Flask test client; responses are checked against the contract)."""

from __future__ import annotations

import json

import numpy as np
import pytest
from lagwise.api import create_app
from lagwise.api.settings import Settings
from lagwise.core.limits import Limits

MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 0.9, "range": 30.0}]}
GRID = {"origin": [0, 0], "spacing": [4, 4], "shape": [20, 15]}


@pytest.fixture()
def cols(rng):
    x, y = rng.uniform(0, 80, 50), rng.uniform(0, 60, 50)
    return {"x": x.tolist(), "y": y.tolist(), "values": np.exp(np.sin(x / 15) + rng.normal(0, 0.3, 50)).tolist()}


def body(cols, **extra):
    return {"samples": cols, "model": MODEL, "grid": GRID, "realisations": 16, **extra}


def test_simulation_summaries_and_defaults(client, cols):
    r = client.post("/v1/simulations", json=body(cols, thresholds=[1.5], blocks={"size": [20, 12]}))
    assert r.status_code == 200, r.json
    doc = r.json
    assert doc["grid"]["shape"] == [20, 15] and doc["grid"]["order"] == "x fastest"
    assert len(doc["mean"]) == len(doc["variance"]) == 300
    assert set(doc["quantiles"]) == {"p10", "p50", "p90"}
    q = {k: np.array(v) for k, v in doc["quantiles"].items()}
    assert np.all(q["p10"] <= q["p50"]) and np.all(q["p50"] <= q["p90"])
    assert doc["exceedance"][0]["threshold"] == 1.5 and len(doc["exceedance"][0]["probability"]) == 300
    assert doc["blocks"]["grid"]["shape"] == [4, 5] and doc["blocks"]["grid"]["spacing"] == [20, 12]
    assert len(doc["blocks"]["exceedance"][0]["probability"]) == 20
    fraction = doc["above"][0]["fraction"]
    assert 0 <= fraction["p10"] <= fraction["p50"] <= fraction["p90"] <= 1
    assert "realisations" not in doc
    parameters = doc["parameters"]
    assert parameters["transform"]["kind"] == "normal_score"
    assert parameters["kriging"]["type"] == "simple" and abs(parameters["kriging"]["mean"]) < 0.3
    assert parameters["seed"] == 1 and parameters["realisations"] == 16
    assert "circulant embedding" in doc["method"]["unconditional"]


def test_realisations_are_returned_x_fastest_and_reproducible(client, cols):
    first = client.post("/v1/simulations", json=body(cols, return_realisations=True, seed=5)).json
    again = client.post("/v1/simulations", json=body(cols, return_realisations=True, seed=5)).json
    other = client.post("/v1/simulations", json=body(cols, return_realisations=True, seed=6)).json
    fields = np.array(first["realisations"])
    assert fields.shape == (16, 300)
    assert first["realisations"] == again["realisations"] and first["mean"] == again["mean"]
    assert first["realisations"] != other["realisations"]
    np.testing.assert_allclose(first["mean"], fields.mean(axis=0), rtol=1e-12)


@pytest.mark.parametrize(
    ("extra", "pointer"),
    [
        ({"realisations": 0}, "/realisations"),
        ({"realisations": -2}, "/realisations"),
        ({"thresholds": ["high"]}, "/thresholds/0"),
        ({"blocks": {"size": [12, 12]}}, "/blocks/size/0"),
        ({"blocks": {"size": [20, 6]}}, "/blocks/size/1"),
        ({"kriging": {"type": "universal"}}, "/kriging/type"),
        ({"grid": {"origin": [0, 0, 0], "spacing": [1, 1, 1], "shape": [2, 2, 2]}}, "/grid/origin"),
        ({"seed": -1}, "/seed"),
    ],
)
def test_bad_input_is_a_problem_naming_the_field(client, cols, extra, pointer):
    r = client.post("/v1/simulations", json=body(cols, **extra))
    assert r.status_code == 422, r.json
    assert r.mimetype == "application/problem+json"
    assert pointer in [e["pointer"] for e in r.json["errors"]]


def test_overflowing_threshold_is_refused(client, cols):
    text = json.dumps(body(cols, thresholds=[1.0])).replace('"thresholds": [1.0]', '"thresholds": [1e400]')
    r = client.post("/v1/simulations", data=text, content_type="application/json")
    assert r.status_code == 422
    assert "/thresholds/0" in [e["pointer"] for e in r.json["errors"]]


def test_over_limit_work_is_refused_naming_the_limit(cols):
    app = create_app({"TESTING": True}, settings=Settings(limits=Limits(max_simulation_values=10_000)))
    r = app.test_client().post("/v1/simulations", json=body(cols))
    assert r.status_code == 422
    assert r.json["limit"] == "LAGWISE_MAX_SIMULATION_VALUES"
    assert r.json["type"] == "/problems/limit-exceeded"


def test_model_far_from_the_normal_score_variance_is_warned_about(client, cols):
    wide = {"nugget": 1.0, "structures": [{"family": "spherical", "partial_sill": 9.0, "range": 30.0}]}
    r = client.post("/v1/simulations", json={**body(cols), "model": wide})
    assert r.status_code == 200
    assert any("transformed units" in w for w in r.json["warnings"])


def test_geographic_samples_are_refused(client):
    samples = {"x": [5.0, 5.01, 5.02], "y": [50.0, 50.01, 50.02], "values": [1.0, 2.0, 3.0]}
    r = client.post(
        "/v1/simulations",
        json={"samples": samples, "coordinates": "geographic", "model": MODEL, "grid": GRID, "realisations": 2},
    )
    assert r.status_code == 422
    assert "/coordinates" in [e["pointer"] for e in r.json["errors"]]
