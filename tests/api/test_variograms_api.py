"""API tests through the Flask test client: experimental variograms and variogram maps."""

from __future__ import annotations

import hashlib

import numpy as np
import pytest
from lagwise.core.variography.statistics import STATISTICS

from tests.conftest import random_columns

URL = "/v1/experimental-variograms"


def test_experimental_round_trip(client, rng):
    cols = random_columns(rng, n=150)
    body = {
        "samples": cols,
        "lags": {"width": 10, "count": 5},
        "directions": [{"azimuth": 30}, {"azimuth": 120, "tolerance": 30, "bandwidth": 20}],
    }
    r = client.post(URL, json=body)
    assert r.status_code == 200, r.json
    doc = r.json
    assert [d["azimuth"] for d in doc["directions"]] == [30.0, 120.0]
    assert doc["directions"][0]["tolerance"] == 22.5  # default echoed
    assert len(doc["directions"][0]["classes"]) == 5
    assert doc["parameters"]["lags"] == {"method": "width", "edges": [[0.0, 10.0, 20.0, 30.0, 40.0, 50.0]] * 2}
    assert doc["parameters"]["statistic"] == "semivariance" and doc["parameters"]["min_pairs"] == 30
    prov = doc["provenance"]
    expected = hashlib.sha256(np.array(cols["x"] + cols["y"] + cols["values"], dtype="<f8").tobytes()).hexdigest()
    assert prov["input_sha256"] == expected and prov["elapsed_ms"] >= 0 and prov["numpy"] == np.__version__


def test_same_request_same_bytes_apart_from_timing(client, rng):
    body = {"samples": random_columns(rng, n=80), "statistic": "correlogram"}
    a, b = client.post(URL, json=body).json, client.post(URL, json=body).json
    a["provenance"].pop("elapsed_ms")
    b["provenance"].pop("elapsed_ms")
    assert a == b


def test_geojson_samples(client):
    features = [
        {
            "type": "Feature",
            "id": f"s{i}",
            "geometry": {"type": "Point", "coordinates": [6.0 + 0.01 * i, 46.0 + 0.005 * (i % 3)]},
            "properties": {"lead": 10.0 + i},
        }
        for i in range(12)
    ]
    body = {
        "samples": {"geojson": {"type": "FeatureCollection", "features": features}, "value_property": "lead"},
        "lags": {"width": 500, "count": 4},
    }
    r = client.post(URL, json=body)
    assert r.status_code == 200, r.json
    params = r.json["parameters"]
    assert params["coordinates"] == "geographic" and params["distance_unit"] == "metres"
    assert "centre_longitude" in params["projection"]


def test_geojson_errors_point_into_features(client):
    features = [
        {"type": "Feature", "geometry": {"type": "Point", "coordinates": [0, 0]}, "properties": {"lead": 1}},
        {"type": "Feature", "geometry": {"type": "Point", "coordinates": [1, 0]}, "properties": {"lead": "high"}},
        {
            "type": "Feature",
            "geometry": {"type": "LineString", "coordinates": [[1, 0], [2, 2]]},
            "properties": {"lead": 3},
        },
    ]
    body = {
        "samples": {"geojson": {"type": "FeatureCollection", "features": features}, "value_property": "lead"},
        "coordinates": "planar",
    }
    r = client.post(URL, json=body)
    assert r.status_code == 422
    assert [e["pointer"] for e in r.json["errors"]] == [
        "/samples/geojson/features/1/properties/lead",
        "/samples/geojson/features/2/geometry",
    ]


def test_scattergram_in_response(client, rng):
    body = {
        "samples": random_columns(rng, n=60),
        "lags": {"width": 10, "count": 3},
        "pairs_for_class": {"class": 1, "limit": 50},
    }
    doc = client.post(URL, json=body).json
    scatter = doc["pairs_for_class"]
    assert scatter["class"] == 1 and len(scatter["tail"]) == len(scatter["head"]) <= 50


def test_map_round_trip(client, rng):
    r = client.post("/v1/variogram-maps", json={"samples": random_columns(rng, n=100), "cell_size": 10, "cells": 3})
    assert r.status_code == 200, r.json
    doc = r.json
    assert len(doc["hx"]) == 7 and len(doc["values"]) == 7 and len(doc["pairs"][0]) == 7
    pairs = doc["pairs"]
    assert all(pairs[r][c] == pairs[6 - r][6 - c] for r in range(7) for c in range(7))


def test_map_from_samples_alone_follows_the_class_rule(client):
    """Omitted cell size and count: typical spacing (median nearest neighbour, scipy cKDTree) and half the extent."""
    from scipy.spatial import cKDTree
    from scipy.spatial.distance import pdist

    gx, gy = np.meshgrid(np.arange(20) * 15.0, np.arange(12) * 15.0)
    x, y = gx.ravel(), gy.ravel()
    values = np.sin(x / 40.0) + np.cos(y / 25.0)
    r = client.post(
        "/v1/variogram-maps", json={"samples": {"x": x.tolist(), "y": y.tolist(), "values": values.tolist()}}
    )
    assert r.status_code == 200, r.json
    parameters = r.json["parameters"]
    coords = np.column_stack([x, y])
    spacing = float(np.median(cKDTree(coords).query(coords, k=2)[0][:, 1]))
    assert parameters["typical_spacing"] == pytest.approx(spacing) == pytest.approx(15.0)
    # 240 samples over a 285 x 165 hull: sqrt(30 * area) / n is about 1.0 m, below the spacing.
    assert parameters["cell_size"] == pytest.approx(15.0)
    reach = pdist(coords).max() / 2
    assert parameters["cells"] == round(reach / 15.0 - 0.5)
    assert len(r.json["hx"]) == 2 * parameters["cells"] + 1
    sized = client.post(
        "/v1/variogram-maps",
        json={"samples": {"x": x.tolist(), "y": y.tolist(), "values": values.tolist()}, "cells": 5},
    ).json["parameters"]
    assert sized["cells"] == 5 and sized["cell_size"] == pytest.approx(reach / 5.5)


def test_classes_carry_their_uncertainty(client, rng):
    cols = random_columns(rng, n=150)
    doc = client.post(URL, json={"samples": cols}).json
    assert doc["parameters"]["class_uncertainty"]["blocks"] == 8
    assert "jackknife" in doc["parameters"]["class_uncertainty"]["method"]
    for row in doc["directions"][0]["classes"]:
        lower, upper = row["interval_95"]
        assert row["standard_error"] > 0 and lower < row["value"] < upper
    few = client.post(URL, json={"samples": random_columns(rng, n=20)}).json
    row = few["directions"][0]["classes"][0]
    assert row["standard_error"] is None and row["interval_95"] is None and row["uncertainty_reason"]
    assert few["parameters"]["class_uncertainty"] == {"method": None, "blocks": None}


def test_null_with_reason_never_nan(client):
    body = {
        "samples": {"x": [0, 1, 2, 3], "y": [0, 0, 1, 1], "values": [2, 2, 2, 2]},
        "statistic": "correlogram",
        "lags": {"width": 1, "count": 3},
    }
    r = client.post(URL, json=body)
    assert r.status_code == 200
    assert b"NaN" not in r.data and b"Infinity" not in r.data
    rows = r.json["directions"][0]["classes"]
    assert all(row["value"] is None and row["reason"] for row in rows)


def test_health_and_readiness(client):
    assert client.get("/healthz").json == {"status": "alive"}
    assert client.get("/readyz").json == {"status": "ready"}


def test_problem_types_are_described(client):
    r = client.get("/problems/invalid-input")
    assert r.status_code == 200 and r.json["status"] == 422


@pytest.mark.parametrize("statistic", STATISTICS)
def test_every_statistic(client, rng, statistic):
    cols = random_columns(rng, n=60)
    r = client.post(URL, json={"samples": cols, "statistic": statistic})
    assert r.status_code == 200, r.json
    rows = r.json["directions"][0]["classes"]
    assert ("tail_mean" in rows[0]) == (statistic in ("covariance", "covariance_noncentered", "correlogram"))
