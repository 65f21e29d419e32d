"""API tests: raster samples, the grid method and their refusals."""

from __future__ import annotations

import numpy as np
import pytest

from tests.conftest import random_columns

URL = "/v1/experimental-variograms"


def _raster(rng, nx=12, ny=9, missing=0.2):
    values = rng.normal(5.0, 1.0, nx * ny)
    values[rng.random(nx * ny) < missing] = np.nan
    listed = [None if np.isnan(v) else float(v) for v in values]
    return {"origin": [100.0, 200.0], "spacing": [2.0, 1.0], "shape": [nx, ny], "values": listed}


def test_raster_variogram_by_fft_equals_exact_on_points(client, rng):
    raster = _raster(rng)
    body = {
        "samples": {"raster": raster},
        "lags": {"width": 2.5, "count": 4},
        "directions": [{"azimuth": 0}, {"azimuth": 90}],
    }
    by_fft = client.post(URL, json=body)
    assert by_fft.status_code == 200, by_fft.json
    exact = client.post(URL, json={**body, "method": "exact"}).json
    doc = by_fft.json
    assert doc["parameters"]["method"] == "grid" and doc["parameters"]["grid"]["source"] == "raster"
    assert doc["parameters"]["raster"]["shape"] == [12, 9]
    assert exact["parameters"]["method"] == "exact"
    for d_fft, d_exact in zip(doc["directions"], exact["directions"], strict=True):
        for a, b in zip(d_fft["classes"], d_exact["classes"], strict=True):
            assert a["pairs"] == b["pairs"]
            if b["value"] is not None:
                assert abs(a["value"] - b["value"]) <= 1e-9 * abs(b["value"])
                assert 0.0 < a["error_bound"] < 1e-9  # the transforms' rounding estimate, relative
            else:
                assert a["error_bound"] is None
    assert doc["provenance"]["input_sha256"] == exact["provenance"]["input_sha256"]


def test_raster_map(client, rng):
    body = {"samples": {"raster": _raster(rng)}, "cell_size": 2.0, "cells": 3}
    r = client.post("/v1/variogram-maps", json=body)
    assert r.status_code == 200, r.json
    assert len(r.json["values"]) == 7 and r.json["parameters"]["raster"]["spacing"] == [2.0, 1.0]


@pytest.mark.parametrize("cell_size", [1e-20, 1e-300])
def test_raster_map_of_cells_far_below_the_spacing(client, rng, cell_size):
    # Every lag vector but 0 lies past such a map (spacing 2 x 1, as the points' exact map says): no pairs, no failure.
    raster = _raster(rng)
    body = {"cell_size": cell_size, "cells": 3}
    r = client.post("/v1/variogram-maps", json={**body, "samples": {"raster": raster}})
    assert r.status_code == 200, r.json
    exact = client.post("/v1/variogram-maps", json={**body, "samples": {"raster": raster}, "method": "exact"})
    assert exact.status_code == 200, exact.json
    assert r.json["pairs"] == exact.json["pairs"] == [[0] * 7] * 7


def test_raster_map_median_falls_back_to_points(client, rng):
    body = {"samples": {"raster": _raster(rng)}, "cell_size": 2.0, "cells": 3, "statistic": "madogram"}
    r = client.post("/v1/variogram-maps", json=body)
    assert r.status_code == 200, r.json
    assert any("not an FFT statistic" in w for w in r.json["warnings"])


def test_raster_median_falls_back_to_points(client, rng):
    body = {"samples": {"raster": _raster(rng)}, "statistic": "semivariance_median", "lags": {"width": 3, "count": 3}}
    r = client.post(URL, json=body)
    assert r.status_code == 200, r.json
    assert r.json["parameters"]["method"] == "exact"
    assert any("not an FFT statistic" in w for w in r.json["warnings"])
    refused = client.post(URL, json={**body, "method": "grid"})
    assert refused.status_code == 422 and refused.json["errors"][0]["pointer"] == "/statistic"


@pytest.mark.parametrize("url", [URL, "/v1/variogram-maps"])
@pytest.mark.parametrize("statistic", ["semivariance", "madogram"])
def test_raster_asked_exact_gets_no_fallback_note(client, rng, url, statistic):
    # method 'exact' is the caller's choice, not a fallback: no warning that the statistic lacks an FFT path.
    body = {"samples": {"raster": _raster(rng)}, "statistic": statistic, "method": "exact"}
    r = client.post(url, json=body)
    assert r.status_code == 200, r.json
    assert r.json["parameters"]["method"] == "exact"
    assert not any("FFT" in w for w in r.json["warnings"]), r.json["warnings"]


@pytest.mark.parametrize(
    ("samples", "azimuth"),
    [
        ({"raster": {"origin": [0.0, 0.0], "spacing": [1.0, 1.0], "shape": [1, 9], "values": list(range(9))}}, 90),
        ({"raster": {"origin": [0.0, 0.0], "spacing": [1.0, 1.0], "shape": [9, 1], "values": list(range(9))}}, 0),
        ({"x": [5.0] * 9, "y": list(range(9)), "values": list(range(9))}, 90),
        ({"x": list(range(9)), "y": [5.0] * 9, "values": list(range(9))}, 0),
    ],
)
def test_automatic_classes_across_a_line_are_refused_either_way(client, samples, azimuth):
    # A column (or row) of cells has no extent across it: cos 90 degrees rounding to 6e-17 must not
    # give a class [0, 2.4e-16) that a row along y (cos 0 exactly 1, sin 0 exactly 0) is refused for.
    r = client.post(URL, json={"samples": samples, "directions": [{"azimuth": azimuth, "tolerance": 10}]})
    assert r.status_code == 422, r.json
    assert r.json["errors"][0]["pointer"] == "/directions"


def test_raster_points_for_fits(client, rng):
    body = {"samples": {"raster": _raster(rng)}, "families": ["spherical"], "lags": {"width": 2.5, "count": 5}}
    r = client.post("/v1/model-fits", json=body)
    assert r.status_code == 200, r.json


@pytest.mark.parametrize(
    ("change", "pointer"),
    [
        ({"shape": [5, 5]}, "/samples/raster/values"),
        ({"spacing": [0.0, 1.0]}, "/samples/raster/spacing/0"),
        ({"spacing": [1.0, -2.0]}, "/samples/raster/spacing/1"),
        ({"values": [None] * 108}, "/samples/raster/values"),
        ({"shape": [12]}, "/samples/raster/shape"),
        ({"values": [1.0, "a"] + [None] * 106}, "/samples/raster/values/1"),
    ],
)
def test_bad_raster_names_the_field(client, rng, change, pointer):
    raster = {**_raster(rng), **change}
    r = client.post(URL, json={"samples": {"raster": raster}})
    assert r.status_code == 422, r.json
    assert pointer in [e["pointer"] for e in r.json["errors"]]


def test_raster_with_columns_refused(client, rng):
    samples = {"raster": _raster(rng), "x": [1.0, 2.0], "y": [1.0, 2.0]}
    r = client.post(URL, json={"samples": samples})
    assert r.status_code == 422
    # Mixed sample forms are refused at /samples, naming the accepted forms.
    assert [e["pointer"] for e in r.json["errors"]] == ["/samples"]
    assert "raster" in r.json["errors"][0]["detail"]


def test_geographic_raster_refused(client, rng):
    r = client.post(URL, json={"samples": {"raster": _raster(rng)}, "coordinates": "geographic"})
    assert r.status_code == 422 and r.json["errors"][0]["pointer"] == "/coordinates"


def test_grid_method_on_scattered_samples(client, rng):
    cols = random_columns(rng, n=400)
    body = {"samples": cols, "lags": {"width": 10, "count": 5}, "method": "grid", "directions": [{"azimuth": 45}]}
    r = client.post(URL, json=body)
    assert r.status_code == 200, r.json
    params = r.json["parameters"]
    assert params["method"] == "grid" and params["grid"]["source"] == "binned"
    assert params["grid"]["tolerance"] == 0.01
    row = r.json["directions"][0]["classes"][2]
    assert row["error_bound"] >= 0 and isinstance(row["bound_exceeded"], bool)
    exact = client.post(URL, json={**body, "method": "exact"}).json
    for a, b in zip(r.json["directions"][0]["classes"], exact["directions"][0]["classes"], strict=True):
        assert abs(a["pairs"] - b["pairs"]) <= a["pair_bound"]
        assert abs(a["value"] - b["value"]) <= a["error_bound"] * abs(a["value"]) + 1e-12


def test_grid_method_refuses_unbounded_statistics(client, rng):
    body = {"samples": random_columns(rng, n=100), "method": "grid", "statistic": "madogram"}
    r = client.post(URL, json=body)
    assert r.status_code == 422 and r.json["errors"][0]["pointer"] == "/statistic"


def test_auto_method_is_exact_within_the_pair_limit(client, rng):
    body = {"samples": random_columns(rng, n=100), "method": "auto", "lags": {"width": 10, "count": 3}}
    r = client.post(URL, json=body)
    assert r.status_code == 200 and r.json["parameters"]["method"] == "exact"


def test_auto_method_turns_to_grid_over_the_pair_limit(small_limits_client, rng):
    body = {"samples": random_columns(rng, n=50), "method": "auto", "lags": {"width": 20, "count": 4}}
    assert small_limits_client.post(URL, json={**body, "method": "exact"}).status_code == 422
    r = small_limits_client.post(URL, json=body)
    assert r.status_code == 200, r.json
    assert r.json["parameters"]["method"] == "grid"


def test_a_regular_grid_is_not_declustered(client):
    """A full 60 x 50 grid of sin(x/9) + cos(y/7), as raster cells and as columnar points: a regular
    design has no preferential sampling (declustering is for clustered sampling, common practice),
    so the summary keeps equal weights and the plain mean 0.117 (numpy mean) as its reference."""
    gx, gy = np.meshgrid(np.arange(60.0), np.arange(50.0))
    x, y = gx.ravel(), gy.ravel()
    values = np.sin(x / 9.0) + np.cos(y / 7.0)
    raster = {"origin": [0.0, 0.0], "spacing": [1.0, 1.0], "shape": [60, 50], "values": values.tolist()}
    columns = {"x": x.tolist(), "y": y.tolist(), "values": values.tolist()}
    for samples in ({"raster": raster}, columns):
        body = {"samples": samples, "fit": {"compare": False, "anisotropy": "none"}}
        doc = client.post("/v1/analyses", json=body).json
        summary, found = doc["summary"], doc["summary"]["declustering"]
        assert summary["mean"] == pytest.approx(values.mean()) == pytest.approx(0.1171, abs=1e-4)
        assert not any("clustered" in w for w in doc["warnings"])
        assert found["clustered"] is False and found["weights_used"] is False
        assert found["effective_sample_fraction"] > found["random_pattern_fraction"]
