"""POST /v1/analyses: the chain equals the separate endpoints; figures; transforms; refusals."""

from __future__ import annotations

import base64
import struct
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from lagwise.demo import elmsworth_samples

URL = "/v1/analyses"


@pytest.fixture(scope="module")
def demo():
    return elmsworth_samples()


@pytest.mark.parametrize("transform", ["none", "log"])
def test_analysis_equals_the_separate_endpoints(client, demo, transform):
    """With one strategy (no comparison), the analysis equals the separate endpoint calls (same numbers)."""
    single = {"fit": {"compare": False, "anisotropy": "none"}, "cross_validation": {"kriging": {"type": "ordinary"}}}
    doc = client.post(URL, json={"samples": demo, "transform": transform, **single}).json
    values = np.log(demo["values"]).tolist() if transform == "log" else demo["values"]
    samples = {**demo, "values": values}
    experimental = client.post("/v1/experimental-variograms", json={"samples": samples}).json
    assert (
        doc["experimental"]["omnidirectional"]["directions"][0]["classes"] == experimental["directions"][0]["classes"]
    )
    fit = client.post("/v1/model-fits", json={"experimental": experimental}).json
    echoed = dict(doc["fit"]["model"])
    assert echoed.pop("transform") == transform
    assert echoed == fit["model"] and doc["fit"]["candidates"] == fit["candidates"]
    cv = client.post("/v1/cross-validations", json={"samples": samples, "model": fit["model"]}).json
    assert doc["cross_validation"]["statistics"] == cv["statistics"]
    assert doc["parameters"]["transform"]["kind"] == transform


def test_predictions_are_back_transformed(client, demo):
    grid = {"origin": [10, 10], "spacing": [100, 100], "shape": [8, 5]}
    doc = client.post(URL, json={"samples": demo, "transform": "log", "prediction": {"grid": grid}}).json
    log_doc = client.post(
        URL, json={"samples": {**demo, "values": np.log(demo["values"]).tolist()}, "prediction": {"grid": grid}}
    ).json
    mu, var = np.array(log_doc["prediction"]["estimate"]), np.array(log_doc["prediction"]["variance"])
    np.testing.assert_allclose(doc["prediction"]["estimate"], np.exp(mu + var / 2), rtol=1e-9)
    assert doc["parameters"]["prediction_units"].startswith("original units")


def _png_size(data: bytes) -> tuple[int, int]:
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    return struct.unpack(">II", data[16:24])


def test_figures(client, demo):
    doc = client.post(
        URL,
        json={
            "samples": demo,
            "figures": ["variogram", "variogram_map", "cross_validation"],
            "fit": {"anisotropy": "none"},
            "prediction": {"grid": {"origin": [0, 0], "spacing": [100, 100], "shape": [9, 6]}},
        },
    ).json
    svg = ET.fromstring(doc["figures"]["variogram"])
    group = next(e for e in svg.iter() if e.get("id") == "experimental-points-0")
    markers = [e for e in group.iter() if e.tag.endswith("path")]
    non_empty = [c for c in doc["experimental"]["omnidirectional"]["directions"][0]["classes"] if c["pairs"] > 0]
    assert len(markers) == len(non_empty)
    for name in ("variogram_map", "cross_validation"):
        ET.fromstring(doc["figures"][name])
    png = client.post(
        URL,
        json={
            "samples": demo,
            "figures": ["variogram", "prediction_map"],
            "figure_format": "png",
            "figure_size": [640, 400],
            "prediction": {"grid": {"origin": [0, 0], "spacing": [100, 100], "shape": [9, 6]}},
        },
    ).json
    for name in ("variogram", "prediction_map"):
        assert _png_size(base64.b64decode(png["figures"][name])) == (640, 400)


def test_normal_score_and_censored_values(client, demo):
    censored = [i % 25 == 0 for i in range(len(demo["values"]))]
    body = {
        "samples": {**demo, "censored": censored, "detection_limits": [10.0 if c else None for c in censored]},
        "transform": "normal_score",
    }
    doc = client.post(URL, json=body).json
    assert doc["parameters"]["censored_samples"] == sum(censored) and doc["parameters"]["censoring"] == "half_limit"
    assert any("detection limit" in w for w in doc["warnings"])
    assert doc["transformed_summary"]["mean"] == pytest.approx(0.0, abs=0.05)


def test_geojson_less_than_qualifier(client):
    features = [
        {
            "type": "Feature",
            "geometry": {"type": "Point", "coordinates": [i * 10.0, (i % 7) * 10.0]},
            "properties": {"pb": "<5" if i % 9 == 0 else 10.0 + i % 5},
        }
        for i in range(60)
    ]
    doc = client.post(
        URL,
        json={
            "samples": {"geojson": {"type": "FeatureCollection", "features": features}, "value_property": "pb"},
            "coordinates": "planar",
        },
    ).json
    assert doc["parameters"]["censored_samples"] == 7


@pytest.mark.parametrize(
    "body, pointer",
    [
        ({"transform": "log", "samples": {"x": [0, 1, 2, 3], "values": [1.0, -2.0, 3.0, 0.0]}}, "/samples/values/1"),
        (
            {"samples": {"x": [0, 1, 2, 3], "values": [1.0, 2.0, 3.0, 4.0], "censored": [False, True, False, False]}},
            "/samples/detection_limits",
        ),
        ({"figure_format": "gif"}, "/figure_format"),
        ({"figures": ["pie_chart"]}, "/figures/0"),
        ({"variogram": {"directions": "sideways"}}, "/variogram/directions"),
    ],
)
def test_bad_analysis_requests(client, demo, body, pointer):
    r = client.post(URL, json={"samples": demo, **body})
    assert r.status_code == 422
    assert r.json["errors"][0]["pointer"] == pointer


def test_grid_too_large(small_limits_client):
    cols = {"x": list(range(40)), "y": [i % 3 for i in range(40)], "values": [float(i % 5) for i in range(40)]}
    r = small_limits_client.post(
        URL,
        json={"samples": cols, "prediction": {"grid": {"origin": [0, 0], "spacing": [1, 1], "shape": [3000, 3000]}}},
    )
    assert r.status_code == 422 and r.json["type"] in ("/problems/limit-exceeded", "/problems/invalid-input")


def test_one_dimensional_analysis_reports_an_unusable_model_instead_of_failing(client):
    """A gaussian structure without nugget on a dense transect makes the kriging matrix singular:
    the analysis still reports the variogram and the fit, with a warning and no cross-validation
    when it was asked to use that model alone, and falls back to the null otherwise."""
    rng = np.random.default_rng(1)
    x = rng.uniform(0, 100, 80)
    values = np.sin(x / 10) + rng.normal(0, 0.2, 80)
    doc = client.post(
        URL,
        json={
            "samples": {"x": x.tolist(), "values": values.tolist()},
            "fit": {"families": ["gaussian"], "nugget": "none", "compare": False},
        },
    ).json
    assert doc["fit"]["model"]["structures"][0]["family"] == "gaussian"
    assert doc["cross_validation"] is None and doc["selection"] is None
    assert any("refused" in w and "condition" in w for w in doc["warnings"])
    assert doc["verdict"]["level"] == "review" and not doc["verdict"]["usable"]
    compared = client.post(
        URL,
        json={
            "samples": {"x": x.tolist(), "values": values.tolist()},
            "fit": {"families": ["gaussian"], "nugget": "none"},
        },
    ).json
    strategies = {s["name"]: s for s in compared["selection"]["strategies"]}
    assert strategies["isotropic"]["why"].startswith("refused") and strategies["pure_nugget"]["selected"]
    assert compared["verdict"]["level"] == "review"


def test_sectors_need_two_dimensions(client):
    body = {
        "samples": {"x": [0, 1, 2, 3, 4, 5], "values": [1, 2, 1, 3, 2, 4]},
        "model": {"structures": [{"family": "spherical", "partial_sill": 1, "range": 3}]},
        "neighbourhood": {"max_points": 4, "sectors": 2},
    }
    r = client.post("/v1/cross-validations", json=body)
    assert r.status_code == 422 and r.json["errors"][0]["pointer"] == "/neighbourhood/sectors"


def test_constant_values_get_a_plain_verdict(client):
    cols = {"x": list(range(30)), "y": [i % 4 for i in range(30)], "values": [2.0] * 30}
    doc = client.post(URL, json={"samples": cols, "figures": ["variogram"]}).json
    assert doc["verdict"] == {
        "usable": False,
        "level": "no_structure",
        "text": "All values are equal: there is no variation to model or map.",
    }
    assert doc["fit"]["model"] == {"nugget": 0.0, "structures": [], "transform": "none"}
