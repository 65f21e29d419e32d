"""API tests of transforms and thresholds on POST /v1/predictions, /v1/cross-validations and /v1/model-fits."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.api import create_app
from lagwise.api.settings import Settings
from lagwise.core.limits import Limits
from scipy.stats import norm

MODEL = {"nugget": 0.05, "structures": [{"family": "spherical", "partial_sill": 0.5, "range": 40.0}]}
GRID = {"origin": [0, 0], "spacing": [20, 25], "shape": [6, 5]}


@pytest.fixture()
def cols(rng):
    x, y = rng.uniform(0, 100, 70), rng.uniform(0, 100, 70)
    values = np.exp(np.sin(x / 15) + np.cos(y / 20) + rng.normal(0, 0.3, 70))
    return {"x": x.tolist(), "y": y.tolist(), "values": values.tolist()}


def _post(client, path, body, status=200):
    r = client.post(path, json=body)
    assert r.status_code == status, r.json
    return r.json


def test_log_prediction_back_transforms_and_reads_probabilities_in_log_space(client, cols):
    body = {"samples": cols, "model": MODEL, "grid": GRID, "transform": "log", "thresholds": [2.0, 5.0]}
    doc = _post(client, "/v1/predictions", body)
    logs = {**cols, "values": np.log(cols["values"]).tolist()}
    plain = _post(client, "/v1/predictions", {"samples": logs, "model": MODEL, "grid": GRID})
    y, s2 = np.array(plain["estimate"]), np.array(plain["variance"])
    # Lognormal moments (Aitchison & Brown 1957): mean exp(y + s^2/2), variance exp(2y + s^2)(exp(s^2) - 1).
    np.testing.assert_allclose(doc["estimate"], np.exp(y + s2 / 2), rtol=1e-12)
    np.testing.assert_allclose(doc["variance"], np.exp(2 * y + s2) * np.expm1(s2), rtol=1e-12)
    assert [e["threshold"] for e in doc["exceedance"]] == [2.0, 5.0]
    for entry in doc["exceedance"]:
        # scipy.stats.norm.sf at the log of the threshold
        expected = norm.sf((np.log(entry["threshold"]) - y) / np.sqrt(s2))
        np.testing.assert_allclose(entry["probability"], expected, rtol=1e-10, atol=1e-14)
    assert doc["support"] == "point"
    assert doc["parameters"]["transform"]["kind"] == "log"
    assert "exp(y + s^2/2)" in doc["parameters"]["transform"]["method"]
    reading = doc["parameters"]["exceedance"]
    assert "multi-Gaussian" in reading["reading"] and "approximation" in reading["assumption"]
    np.testing.assert_allclose(reading["transformed_thresholds"], np.log([2.0, 5.0]))


def test_untransformed_probabilities_are_normal_tails(client, cols):
    body = {"samples": cols, "model": {**MODEL, "structures": [{**MODEL["structures"][0], "partial_sill": 3.0}]}}
    body.update(targets={"x": [10.0, 50.0, cols["x"][0]], "y": [10.0, 50.0, cols["y"][0]]}, thresholds=[3.0])
    body["kriging"] = {"type": "simple", "mean": 2.5}
    doc = _post(client, "/v1/predictions", body)
    est, var = np.array(doc["estimate"]), np.array(doc["variance"])
    p = np.array(doc["exceedance"][0]["probability"])
    # scipy.stats.norm.sf((t - estimate) / sd); the third target is a sample: known exactly (variance 0)
    np.testing.assert_allclose(p[:2], norm.sf((3.0 - est[:2]) / np.sqrt(var[:2])), rtol=1e-10)
    assert var[2] == 0 and p[2] == float(cols["values"][0] > 3.0)
    assert "exact" in doc["parameters"]["exceedance"]["assumption"]
    assert "exceedance" not in _post(client, "/v1/predictions", {**body, "thresholds": []})


def test_normal_score_prediction_and_thresholds_outside_the_data(client, cols):
    model = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 0.9, "range": 40.0}]}
    top = max(cols["values"])
    body = {"samples": cols, "model": model, "grid": GRID, "transform": "normal_score", "thresholds": [2.0, top + 1]}
    doc = _post(client, "/v1/predictions", body)
    assert doc["exceedance"][1]["probability"] == [0.0] * 30
    p = np.array(doc["exceedance"][0]["probability"])
    assert np.all((p > 0) & (p < 1))
    assert any("outside the data's range" in w for w in doc["warnings"])
    assert min(doc["estimate"]) >= min(cols["values"]) and max(doc["estimate"]) <= top


def test_model_fit_echoes_its_transform_and_a_replay_back_transforms(client, cols):
    fit = _post(client, "/v1/model-fits", {"samples": cols, "transform": "log", "families": ["spherical"]})
    assert fit["model"]["transform"] == "log" and fit["parameters"]["transform"] == "log"
    replay = _post(client, "/v1/predictions", {"samples": cols, "model": fit["model"], "grid": GRID})
    assert replay["parameters"]["transform"]["kind"] == "log"
    explicit = _post(
        client, "/v1/predictions", {"samples": cols, "model": fit["model"], "grid": GRID, "transform": "log"}
    )
    assert replay["estimate"] == explicit["estimate"]
    clash = {"samples": cols, "model": fit["model"], "grid": GRID, "transform": "none"}
    problem = _post(client, "/v1/predictions", clash, 422)
    assert problem["errors"][0]["pointer"] == "/transform"


def test_model_in_the_wrong_units_is_warned_about(client, cols):
    raw = {"nugget": 0.5, "structures": [{"family": "spherical", "partial_sill": 30.0, "range": 40.0}]}
    doc = _post(client, "/v1/predictions", {"samples": cols, "model": raw, "grid": GRID, "transform": "log"})
    assert any("far from the variance of the logarithms" in w for w in doc["warnings"])
    far = {**raw, "structures": [{**raw["structures"][0], "partial_sill": 3000.0}]}
    problem = _post(client, "/v1/predictions", {"samples": cols, "model": far, "grid": GRID, "transform": "log"}, 422)
    assert problem["errors"][0]["pointer"] == "/model" and "overflow" in problem["errors"][0]["detail"]
    doc = _post(client, "/v1/predictions", {"samples": cols, "model": MODEL, "grid": GRID, "transform": "log"})
    assert not any("transformed units" in w for w in doc["warnings"])


@pytest.mark.parametrize(
    ("thresholds", "transform", "pointer"),
    [
        ([1.0, "high"], "none", "/thresholds/1"),
        ([1.0, 2.0, -1.0], "log", "/thresholds/2"),
        ([0.0], "log", "/thresholds/0"),
        ([True], "none", "/thresholds/0"),
    ],
)
def test_bad_thresholds_name_the_index(client, cols, thresholds, transform, pointer):
    body = {"samples": cols, "model": MODEL, "grid": GRID, "transform": transform, "thresholds": thresholds}
    problem = _post(client, "/v1/predictions", body, 422)
    assert pointer in [e["pointer"] for e in problem["errors"]]


def test_non_finite_threshold_is_refused(client, cols):
    raw = b'{"samples": {"x": [0, 1, 2], "y": [0, 1, 0], "values": [1, 2, 3]}, "model": {"nugget": 1},'
    r = client.post("/v1/predictions", data=raw + b' "targets": {"x": [0], "y": [0]}, "thresholds": [1e400]}',
                    content_type="application/json")  # fmt: skip
    assert r.status_code == 422 and r.json["errors"][0]["pointer"] == "/thresholds/0"


def test_log_cross_validation_reports_original_units(client, cols):
    body = {"samples": cols, "model": MODEL, "transform": "log"}
    doc = _post(client, "/v1/cross-validations", body)
    logs = {**cols, "values": np.log(cols["values"]).tolist()}
    inner = _post(client, "/v1/cross-validations", {"samples": logs, "model": MODEL})
    y, sd = np.array(inner["samples"]["estimate"]), np.array(inner["samples"]["standard_deviation"])
    np.testing.assert_allclose(doc["samples"]["observed"], cols["values"])
    np.testing.assert_allclose(doc["samples"]["estimate"], np.exp(y + sd**2 / 2), rtol=1e-12)
    np.testing.assert_allclose(doc["samples"]["standardized_error"], inner["samples"]["standardized_error"])
    s, t = doc["statistics"], inner["statistics"]
    assert s["root_mean_square_standardized_error"] == t["root_mean_square_standardized_error"]
    errors = np.array(doc["samples"]["estimate"]) - np.array(cols["values"])
    assert s["root_mean_square_error"] == pytest.approx(np.sqrt(np.mean(errors**2)), rel=1e-12)
    assert doc["parameters"]["transform"]["kind"] == "log" and "transformed space" in doc["parameters"]["units"]


def test_analysis_model_echoes_its_transform_and_replays(client, cols):
    body = {"samples": cols, "transform": "log", "fit": {"compare": False}}
    analysis = _post(client, "/v1/analyses", body)
    model = analysis["fit"]["model"]
    assert model["transform"] == "log"
    doc = _post(client, "/v1/predictions", {"samples": cols, "model": model, "grid": GRID, "thresholds": [3.0]})
    assert doc["parameters"]["transform"]["kind"] == "log" and len(doc["exceedance"][0]["probability"]) == 30


# ---- blocks --------------------------------------------------------------------------

BLOCKS = {"size": [20.0, 25.0], "discretisation": [4, 5]}


def test_block_predictions_and_their_exceedance(client, cols):
    logs = {**cols, "values": np.log(cols["values"]).tolist()}
    body = {"samples": logs, "model": MODEL, "grid": GRID, "blocks": BLOCKS, "thresholds": [0.5]}
    doc = _post(client, "/v1/predictions", body)
    points = _post(client, "/v1/predictions", {"samples": logs, "model": MODEL, "grid": GRID})
    assert doc["support"] == "block" and doc["parameters"]["blocks"]["points"] == 20
    est, var = np.array(doc["estimate"]), np.array(doc["variance"])
    # The block average varies less than the point value (the nugget averages out and the structure partly).
    assert np.all(var < np.array(points["variance"]))
    # scipy.stats.norm.sf of the block estimate and block variance
    np.testing.assert_allclose(doc["exceedance"][0]["probability"], norm.sf((0.5 - est) / np.sqrt(var)), rtol=1e-10)
    assert "block average" in doc["parameters"]["exceedance"]["variance"]
    default = _post(client, "/v1/predictions", {**body, "blocks": {"size": [20.0, 25.0]}})
    assert default["parameters"]["blocks"]["discretisation"] == [4, 4]


def test_blocks_with_a_transform_point_to_simulations(client, cols):
    body = {"samples": cols, "model": MODEL, "grid": GRID, "blocks": BLOCKS, "transform": "log"}
    problem = _post(client, "/v1/predictions", body, 422)
    assert problem["errors"][0]["pointer"] == "/blocks" and "/v1/simulations" in problem["errors"][0]["detail"]
    fitted = {**MODEL, "transform": "normal_score"}
    body.pop("transform")
    problem = _post(client, "/v1/predictions", {**body, "model": fitted}, 422)
    assert problem["errors"][0]["pointer"] == "/blocks"


@pytest.mark.parametrize(
    ("blocks", "pointer"),
    [
        ({"size": [20.0, 25.0], "discretisation": [0, 4]}, "/blocks/discretisation/0"),
        ({"size": [20.0, 25.0], "discretisation": [4, 2.5]}, "/blocks/discretisation/1"),
        ({"size": [20.0, 0.0], "discretisation": [4, 4]}, "/blocks/size/1"),
        ({"size": [20.0], "discretisation": [4]}, "/blocks/size"),
        ({"size": [20.0, 25.0], "discretisation": [4, 4, 4]}, "/blocks/discretisation"),
        ({"discretisation": [4, 4]}, "/blocks/size"),
    ],
)
def test_bad_blocks_name_the_field(client, cols, blocks, pointer):
    problem = _post(client, "/v1/predictions", {"samples": cols, "model": MODEL, "grid": GRID, "blocks": blocks}, 422)
    assert pointer in [e["pointer"] for e in problem["errors"]], problem


def test_discretisation_counts_in_the_cost_limit(cols):
    limits = Limits(max_kriging_flops=5_000_000_000)
    client = create_app({"TESTING": True}, settings=Settings(limits=limits)).test_client()
    grid = {"origin": [0, 0], "spacing": [1, 1], "shape": [100, 100]}
    body = {"samples": cols, "model": MODEL, "grid": grid}
    assert _post(client, "/v1/predictions", body)["support"] == "point"
    blocks = {"size": [1.0, 1.0], "discretisation": [32, 32]}
    problem = _post(client, "/v1/predictions", {**body, "blocks": blocks}, 422)
    assert problem["limit"] == "LAGWISE_MAX_KRIGING_FLOPS" and problem["requested"] > 1e11
