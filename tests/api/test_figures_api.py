"""POST /v1/analyses figures: names and units echoed and on the labels, reproducible bytes, geographic maps."""

from __future__ import annotations

import base64
import io
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from lagwise.demo import elmsworth_samples
from matplotlib.image import imread

URL = "/v1/analyses"
SVG = "{http://www.w3.org/2000/svg}"
ALL = ["variogram", "variogram_map", "cross_validation", "prediction_map", "standard_deviation_map"]
GRID = {"origin": [10.0, 10.0], "spacing": [40.0, 40.0], "shape": [20, 13]}


@pytest.fixture(scope="module")
def demo():
    return elmsworth_samples()


@pytest.fixture(scope="module")
def lead_request(demo):
    return {
        "samples": demo,
        "transform": "log",
        "variable": {"name": "lead", "unit": "mg/kg"},
        "coordinate_unit": "m",
        "prediction": {"grid": GRID, "thresholds": [200.0, 400.0]},
        "figures": ALL,
    }


@pytest.fixture(scope="module")
def lead(app, lead_request):
    return app.test_client().post(URL, json=lead_request).json


def _texts(svg: str) -> list[str]:
    return ["".join(e.itertext()) for e in ET.fromstring(svg).iter(f"{SVG}text")]


def test_names_and_units_are_echoed(lead):
    parameters = lead["parameters"]
    assert parameters["variable"] == {"name": "lead", "unit": "mg/kg"}
    assert parameters["coordinate_unit"] == "m"
    assert parameters["figure_colour_scale"] == "auto"
    assert parameters["thresholds"] == [200.0, 400.0]
    assert sorted(lead["figures"]) == sorted(ALL)


def test_every_figure_names_the_variable_and_the_unit(lead):
    for name, svg in lead["figures"].items():
        text = " ".join(_texts(svg))
        assert "value units" not in text and "coordinate units" not in text, name
        assert "lead" in text, name
        assert "(m)" in text, name
    assert "estimate of lead (mg/kg)" in _texts(lead["figures"]["prediction_map"])
    assert "log colour scale" in " ".join(_texts(lead["figures"]["prediction_map"]))
    assert "standard deviation of lead (mg/kg)" in _texts(lead["figures"]["standard_deviation_map"])


def test_the_same_request_gives_the_same_bytes(client, lead, lead_request):
    again = client.post(URL, json=lead_request).json
    assert again["figures"] == lead["figures"]


def test_variogram_map_cell_follows_the_sample_spacing(lead):
    """The demo's samples sit about 30-40 m apart: cells of that size resolve its 100 m minor range."""
    text = " ".join(_texts(lead["figures"]["variogram_map"]))
    cell = float(text.split("square cells of ")[1].split(" m")[0])
    assert 20.0 < cell < 45.0


def test_geographic_prediction_map_is_not_blank(client, demo):
    """Degrees on the grid and on the samples: the map fills its frame."""
    lon = 6.0 + np.array(demo["x"]) / (111_320.0 * np.cos(np.radians(46.0)))
    lat = 46.0 + np.array(demo["y"]) / 110_540.0
    grid = {"origin": [6.0, 46.0], "spacing": [0.0005, 0.0004], "shape": [21, 12]}
    body = {
        "samples": {"x": lon.tolist(), "y": lat.tolist(), "values": demo["values"]},
        "coordinates": "geographic",
        "transform": "log",
        "prediction": {"grid": grid},
        "figures": ["prediction_map", "cross_validation"],
        "figure_format": "png",
        "figure_size": [600, 420],
    }
    doc = client.post(URL, json=body).json
    assert doc["parameters"]["coordinate_unit"] == "m"
    pixels = imread(io.BytesIO(base64.b64decode(doc["figures"]["prediction_map"])))[:, :, :3]
    assert pixels.shape[:2] == (420, 600)
    assert (np.ptp(pixels, axis=2) > 0.08).mean() > 0.25  # coloured, not white or grey
    svg = client.post(URL, json={**body, "figure_format": "svg"}).json["figures"]["prediction_map"]
    assert {"longitude (°)", "latitude (°)"} <= set(_texts(svg))


@pytest.mark.parametrize(
    ("change", "pointer"),
    [
        ({"coordinates": "geographic", "coordinate_unit": "ft"}, "/coordinate_unit"),
        ({"variable": {"name": "lead\u0007"}}, "/variable/name"),
        ({"variable": {"name": ""}}, "/variable/name"),
        ({"figure_colour_scale": "rainbow"}, "/figure_colour_scale"),
        ({"prediction": {"grid": GRID, "thresholds": [1.0, "high"]}}, "/prediction/thresholds/1"),
    ],
)
def test_bad_figure_options_name_the_field(client, demo, change, pointer):
    response = client.post(URL, json={"samples": demo, **change})
    assert response.status_code == 422
    assert pointer in [e["pointer"] for e in response.json["errors"]]


def test_quantile_scale_and_no_names(client, demo):
    body = {
        "samples": demo,
        "prediction": {"grid": GRID},
        "figures": ["prediction_map", "variogram"],
        "figure_colour_scale": "quantile",
    }
    doc = client.post(URL, json=body).json
    texts = " ".join(_texts(doc["figures"]["prediction_map"]))
    assert "colours by decile" in texts and "estimate of value" in texts
    assert doc["parameters"]["variable"] == {"name": "value", "unit": None}
    assert doc["parameters"]["coordinate_unit"] is None
    assert "separation distance" in _texts(doc["figures"]["variogram"])
