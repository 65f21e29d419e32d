"""API tests of thresholds, blocks and simulation in the analyses' prediction stage."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import norm

GRID = {"origin": [5.0, 5.0], "spacing": [10.0, 10.0], "shape": [10, 10]}
SINGLE = {"fit": {"compare": False, "anisotropy": "none"}, "cross_validation": {"kriging": {"type": "ordinary"}}}


@pytest.fixture()
def cols(rng):
    x, y = rng.uniform(0, 100, 90), rng.uniform(0, 100, 90)
    values = np.exp(np.sin(x / 18) + np.cos(y / 25) + rng.normal(0, 0.25, 90))
    return {"x": x.tolist(), "y": y.tolist(), "values": values.tolist()}


def _analyse(client, body, status=200):
    r = client.post("/v1/analyses", json=body)
    assert r.status_code == status, r.json
    return r.json


def test_kriged_blocks_exceedance_and_classes(client, cols):
    stage = {"grid": GRID, "thresholds": [2.0], "blocks": {"size": [10.0, 10.0], "discretisation": [3, 3]}}
    doc = _analyse(client, {"samples": cols, **SINGLE, "prediction": stage, "figures": ["probability_map"]})
    p = doc["prediction"]
    assert p["support"] == "block" and p["simulation"] is None
    # the same blocks through /v1/predictions with the analysis's model
    replay = {"samples": cols, "model": doc["fit"]["model"], "grid": GRID, "blocks": stage["blocks"]}
    blocks = client.post("/v1/predictions", json={**replay, "thresholds": [2.0]}).json
    np.testing.assert_allclose(p["estimate"], blocks["estimate"], rtol=1e-10)
    probability = np.array(p["exceedance"][0]["probability"])
    # scipy.stats.norm.sf of the block estimate and variance (no transform)
    expected = norm.sf((2.0 - np.array(p["estimate"])) / np.sqrt(p["variance"]))
    np.testing.assert_allclose(probability, expected, rtol=1e-9, atol=1e-15)
    (table,) = p["classes"]
    counts = {row["class"]: row["count"] for row in table["classes"]}
    assert counts == {
        "below": int(np.sum(probability <= 0.1)),
        "uncertain": int(np.sum((probability > 0.1) & (probability < 0.9))),
        "above": int(np.sum(probability >= 0.9)),
    }
    assert table["classes"][0]["meaning"] == "below the limit with at least 90 % probability"
    assert table["support"] == "block" and table["method"] == "kriging"
    svg = doc["figures"]["probability_map"]
    assert 'id="probability-surface"' in svg and "exceeds 2" in svg


def test_log_analysis_with_simulated_share_and_blocks(client, cols):
    stage = {
        "grid": GRID,
        "thresholds": [2.5],
        "simulation": {"realisations": 40, "seed": 3, "blocks": {"size": [20.0, 20.0]}},
    }
    doc = _analyse(client, {"samples": cols, "transform": "log", **SINGLE, "prediction": stage})
    p = doc["prediction"]
    assert p["support"] == "point"
    (above,) = p["simulation"]["above"]
    share = above["fraction"]
    assert 0 <= share["p10"] <= share["p50"] <= share["p90"] <= 1
    # The simulated share of the grid above agrees roughly with the mean kriging probability.
    mean_probability = np.mean(p["exceedance"][0]["probability"])
    assert abs(share["mean"] - mean_probability) < 0.15
    (table,) = p["classes"]
    assert table["method"] == "simulation" and table["support"] == "block"
    assert sum(row["count"] for row in table["classes"]) == 25  # (10 / 2) x (10 / 2) blocks of 2 x 2 nodes
    assert doc["parameters"]["prediction"]["simulation"]["realisations"] == 40


@pytest.mark.parametrize(
    ("transform", "stage", "pointer"),
    [
        ("log", {"thresholds": [1.0, -2.0]}, "/prediction/thresholds/1"),
        ("log", {"thresholds": [1.0], "blocks": {"size": [10.0, 10.0]}}, "/prediction/blocks"),
        ("none", {"thresholds": [1.0], "blocks": {"size": [10.0, 10.0], "discretisation": [0, 2]}},
         "/prediction/blocks/discretisation/0"),
        ("none", {"simulation": {"realisations": 10}}, "/prediction/simulation"),
    ],
)  # fmt: skip
def test_bad_prediction_stage(client, cols, transform, stage, pointer):
    body = {"samples": cols, "transform": transform, **SINGLE, "prediction": {"grid": GRID, **stage}}
    problem = _analyse(client, body, 422)
    assert pointer in [e["pointer"] for e in problem["errors"]]
    if pointer == "/prediction/blocks":
        assert "simulation" in problem["errors"][0]["detail"]
