"""API tests of POST /v1/model-fits and GET /v1/model-families (Flask test client)."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.modelling.models import Structure, VariogramModel

from tests.reference.simulate import isotropic, simulate

URL = "/v1/model-fits"


@pytest.fixture(scope="module")
def field_samples():
    rng = np.random.default_rng(21)
    coords = rng.uniform(0, 100, (300, 2))
    values = simulate(isotropic("spherical", 1.0, 25.0, 0.1), coords, rng) + 5.0
    return {"x": coords[:, 0].tolist(), "y": coords[:, 1].tolist(), "values": values.tolist()}


def test_fit_from_samples(client, field_samples):
    r = client.post(URL, json={"samples": field_samples, "lags": {"width": 3, "count": 12}})
    assert r.status_code == 200, r.json
    doc = r.json
    assert doc["model"]["structures"] and doc["diagnostics"]["converged"]
    ranks = [c["rank"] for c in doc["candidates"]]
    assert ranks == list(range(1, len(ranks) + 1)) and len(ranks) >= 16
    criteria = [c["criterion"] for c in doc["candidates"] if c["criterion"] is not None and c["converged"]]
    assert criteria == sorted(criteria)
    classes = doc["experimental"]["directions"][0]["classes"]
    assert len(classes) == 12 and all("model_value" in c for c in classes)
    params = doc["parameters"]
    assert params["families"] == "auto" and params["weighting"] == "pairs" and params["lags"]["method"] == "width"
    assert doc["summary"]["samples"] == 300


def test_fit_from_previous_experimental_response(client, field_samples):
    experimental = client.post(
        "/v1/experimental-variograms", json={"samples": field_samples, "lags": {"width": 3, "count": 12}}
    ).json
    direct = client.post(
        URL, json={"samples": field_samples, "lags": {"width": 3, "count": 12}, "families": ["spherical"]}
    ).json
    again = client.post(URL, json={"experimental": experimental, "families": ["spherical"]}).json
    assert again["model"]["structures"][0]["range"] == pytest.approx(
        direct["model"]["structures"][0]["range"], rel=1e-9
    )
    assert again["parameters"]["dimension"] == 2


def test_sparse_classes_are_reported(client, field_samples):
    doc = client.post(
        URL,
        json={
            "samples": field_samples,
            "lags": {"edges": [0, 0.5, 5, 10, 15, 20, 25, 30, 35]},
            "families": ["exponential"],
        },
    ).json
    used = [c["used"] for c in doc["experimental"]["directions"][0]["classes"]]
    assert used[0] is False and all(used[1:])
    assert any("left out" in w for w in doc["warnings"])


def test_model_families(client):
    doc = client.get("/v1/model-families").json
    names = [f["name"] for f in doc["families"]]
    assert {"spherical", "matern", "power", "circular"} <= set(names)
    assert "95 %" in doc["conventions"]["range"]


@pytest.mark.parametrize(
    "body, pointer",
    [
        ({"families": ["blob"]}, "/families/0"),
        ({"families": "everything"}, "/families"),
        ({"nugget": -1}, "/nugget"),
        ({"weighting": "heavy"}, "/weighting"),
        ({"statistic": "madogram"}, "/statistic"),
        ({"anisotropy": "fit"}, "/anisotropy"),
    ],
)
def test_bad_fit_requests(client, field_samples, body, pointer):
    r = client.post(URL, json={"samples": field_samples, **body})
    assert r.status_code == 422
    assert r.json["errors"][0]["pointer"] == pointer


def test_circular_with_3d_samples(client, rng):
    cols = {
        "x": rng.uniform(0, 10, 50).tolist(),
        "y": rng.uniform(0, 10, 50).tolist(),
        "z": rng.uniform(0, 10, 50).tolist(),
        "values": rng.normal(size=50).tolist(),
    }
    r = client.post(URL, json={"samples": cols, "families": ["circular"]})
    assert r.status_code == 422 and "up to 2-D" in r.json["errors"][0]["detail"]


def test_too_few_classes(client, field_samples):
    r = client.post(URL, json={"samples": field_samples, "lags": {"width": 10, "count": 2}, "families": ["spherical"]})
    assert r.status_code == 422 and "at least 4 are needed" in r.json["detail"]


def test_constant_data_gives_zero_nugget(client):
    cols = {"x": list(range(40)), "y": [i % 5 for i in range(40)], "values": [3.0] * 40}
    doc = client.post(URL, json={"samples": cols, "lags": {"width": 2, "count": 6}, "min_pairs": 1}).json
    assert doc["model"] == {"nugget": 0.0, "structures": [], "transform": "none"}
    assert any("zero pure nugget" in w for w in doc["warnings"])


def test_both_sources_refused(client, field_samples):
    r = client.post(
        URL,
        json={
            "samples": field_samples,
            "experimental": {"directions": [{"classes": [{"mean_distance": 1, "value": 1, "pairs": 40}]}]},
        },
    )
    assert r.status_code == 422 and r.json["errors"][0]["pointer"] == ""


def test_experimental_with_empty_classes(client):
    experimental = {"directions": [{"azimuth": 0, "classes": [{"mean_distance": None, "value": None, "pairs": 0}] * 5}]}
    r = client.post(URL, json={"experimental": experimental})
    assert r.status_code == 422 and r.json["errors"][0]["pointer"] == "/experimental"


def test_fitted_model_evaluates_like_the_core(client, field_samples):
    doc = client.post(URL, json={"samples": field_samples, "families": ["matern"]}).json
    s = doc["model"]["structures"][0]
    model = VariogramModel(
        doc["model"]["nugget"], (Structure("matern", s["partial_sill"], s["range"], s["smoothness"]),)
    )
    classes = doc["experimental"]["directions"][0]["classes"]
    h = np.array([c["mean_distance"] for c in classes])
    np.testing.assert_allclose([c["model_value"] for c in classes], model.semivariance(h), rtol=1e-12)


def test_inverse_variance_weighting_from_a_previous_experimental_response(client, field_samples):
    experimental = client.post("/v1/experimental-variograms", json={"samples": field_samples}).json
    assert all(row["standard_error"] for row in experimental["directions"][0]["classes"])
    body = {"experimental": experimental, "families": ["spherical"], "weighting": "inverse_variance"}
    r = client.post(URL, json=body)
    assert r.status_code == 200, r.json
    assert r.json["parameters"]["weighting"] == "inverse_variance"
    same = client.post(
        URL, json={"samples": field_samples, "families": ["spherical"], "weighting": "inverse_variance"}
    ).json
    given, recomputed = r.json["model"], same["model"]
    assert recomputed["nugget"] == pytest.approx(given["nugget"], rel=1e-6)
    assert recomputed["structures"][0]["range"] == pytest.approx(given["structures"][0]["range"], rel=1e-6)
    for row in experimental["directions"][0]["classes"]:
        row.pop("standard_error")
    refused = client.post(URL, json=body)
    assert refused.status_code == 422 and refused.json["errors"][0]["pointer"] == "/weighting"


def test_a_range_far_beyond_the_classes_is_warned_about(client):
    """A field whose variogram keeps rising past every class (a planar trend plus a little noise:
    its semivariance grows as the square of the distance, with no sill) fitted automatically
    over short classes: the answer must say the range and sill are not seen by the classes."""
    rng = np.random.default_rng(5)
    x, y = rng.uniform(0, 1000, 400), rng.uniform(0, 1000, 400)
    values = 10 + 0.01 * x + 0.005 * y + rng.normal(0, 0.05, 400)
    samples = {"x": x.tolist(), "y": y.tolist(), "values": values.tolist()}
    for lags in ({"width": 10, "count": 5}, None):
        body = {"samples": samples} | ({"lags": lags} if lags else {})
        r = client.post(URL, json=body)
        assert r.status_code == 200, r.json
        assert any("has not levelled off" in w for w in r.json["warnings"]), (lags, r.json["warnings"])
