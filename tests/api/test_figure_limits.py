"""Figures bounded by the marks they draw: refused before any work, with the format that would fit named."""

from __future__ import annotations

import json
import time

import numpy as np
from lagwise.core.limits import PNG_ELEMENT_FACTOR, Limits


def _analysis(shape, fmt, figures=("prediction_map",)):
    rng = np.random.default_rng(4)
    xy = rng.uniform(0, 100, (60, 2))
    return {
        "samples": {"x": xy[:, 0].tolist(), "y": xy[:, 1].tolist(), "values": rng.normal(size=60).tolist()},
        "prediction": {"grid": {"origin": [0, 0], "spacing": [100 / shape[0], 100 / shape[1]], "shape": list(shape)}},
        "figures": list(figures),
        "figure_format": fmt,
    }


def test_a_map_with_more_marks_than_the_limit_is_refused_before_work(client):
    start = time.perf_counter()
    r = client.post("/v1/analyses", data=json.dumps(_analysis([1414, 1414], "svg")), content_type="application/json")
    assert time.perf_counter() - start < 5.0  # nothing is computed (loaded machines included)
    assert r.status_code == 422 and r.json["limit"] == "LAGWISE_MAX_FIGURE_ELEMENTS"
    assert r.json["requested"] == 1414 * 1414 + 60 and r.json["allowed"] == Limits().max_figure_elements
    assert r.json["errors"][0]["pointer"] == "/figures" and "PNG" in r.json["detail"]


def test_png_allows_more_marks_than_svg(client):
    side = 200  # 40,060 marks: over the SVG limit, within the PNG one
    assert side * side + 60 > Limits().max_figure_elements
    assert side * side + 60 < Limits().max_figure_elements * PNG_ELEMENT_FACTOR
    svg = client.post("/v1/analyses", data=json.dumps(_analysis([side, side], "svg")), content_type="application/json")
    assert svg.status_code == 422 and svg.json["limit"] == "LAGWISE_MAX_FIGURE_ELEMENTS"
    png = client.post(
        "/v1/analyses",
        data=json.dumps(_analysis([side, side], "png", ("standard_deviation_map",))),
        content_type="application/json",
    )
    assert png.status_code == 200, png.json
    assert "standard_deviation_map" in png.json["figures"]
