"""A raster's values as an Arrow IPC stream: its layout in the request part, one column ``values``.

References: the JSON raster of the same cells (every member of the answer but the timing must
match, ``provenance.input_sha256`` included), pyarrow's own IPC writer (``pyarrow.ipc``) for the
streams.
"""

from __future__ import annotations

import numpy as np
import pyarrow as pa
import pytest
from lagwise.api import create_app
from lagwise.api.settings import Settings

from .test_arrow_api import multipart, stream, without_timing

NX, NY = 30, 20
LAYOUT = {"origin": [100.0, 200.0], "spacing": [2.0, 3.0], "shape": [NX, NY]}
REQUESTS = {
    "/v1/experimental-variograms": {
        "lags": {"width": 4, "count": 8},
        "directions": [{"azimuth": a, "tolerance": 22.5} for a in (0, 45, 90, 135)],
    },
    "/v1/variogram-maps": {"cell_size": 4, "cells": 5},
    "/v1/model-fits": {"lags": {"width": 4, "count": 8}, "families": ["spherical"]},
}


@pytest.fixture()
def cells(rng):
    x, y = np.meshgrid(np.arange(NX), np.arange(NY))
    values = (np.sin(x / 5.0) + np.cos(y / 4.0) + rng.normal(0, 0.2, (NY, NX))).ravel()
    values[rng.random(values.size) < 0.2] = np.nan
    return values


def _json_raster(values: np.ndarray) -> dict:
    return {"raster": {**LAYOUT, "values": [None if np.isnan(v) else float(v) for v in values]}}


def _arrow_values(values: np.ndarray) -> bytes:
    return stream(pa.table({"values": pa.array(values, from_pandas=True)}))


@pytest.mark.parametrize("url", list(REQUESTS))
def test_an_arrow_raster_gives_the_json_rasters_answer(client, cells, url):
    options = REQUESTS[url]
    by_json = client.post(url, json={**options, "samples": _json_raster(cells)})
    by_arrow = multipart(client, url, {**options, "samples": {"raster": LAYOUT}}, _arrow_values(cells))
    assert by_json.status_code == 200, by_json.json
    assert by_arrow.status_code == 200, by_arrow.json
    assert without_timing(by_arrow.json) == without_timing(by_json.json)


def test_integer_and_float32_values_read_as_their_numbers(client):
    whole = np.arange(NX * NY) % 7
    options = {**REQUESTS["/v1/experimental-variograms"], "samples": {"raster": LAYOUT}}
    as_json = client.post(
        "/v1/experimental-variograms",
        json={**REQUESTS["/v1/experimental-variograms"], "samples": _json_raster(whole.astype(float))},
    )
    for column in (pa.array(whole, type=pa.int32()), pa.array(whole, type=pa.float32())):
        r = multipart(client, "/v1/experimental-variograms", options, stream(pa.table({"values": column})))
        assert r.status_code == 200, r.json
        assert r.json["provenance"]["input_sha256"] == as_json.json["provenance"]["input_sha256"]


@pytest.mark.parametrize(
    ("table", "pointer", "words"),
    [
        (pa.table({"values": pa.array(["a"] * (NX * NY))}), "/samples/raster/values", "must hold numbers"),
        (
            pa.table({"x": np.zeros(NX * NY), "values": np.ones(NX * NY)}),
            "/samples/raster/values",
            "holds one column, values",
        ),
        (pa.table({"value": np.ones(NX * NY)}), "/samples/raster/values", "holds one column, values"),
    ],
)
def test_a_raster_stream_of_other_columns_is_refused_by_name(client, table, pointer, words):
    r = multipart(client, "/v1/experimental-variograms", {"samples": {"raster": LAYOUT}}, stream(table))
    assert r.status_code == 422, r.json
    assert r.json["errors"][0]["pointer"] == pointer and words in r.json["errors"][0]["detail"]


def test_nan_is_not_a_missing_cell_and_each_is_named(client, cells):
    given = np.nan_to_num(cells, nan=1.0)
    given[[3, 40, 41]] = np.nan  # NaN numbers, not nulls
    column = pa.array(given, from_pandas=False)
    r = multipart(client, "/v1/experimental-variograms", {"samples": {"raster": LAYOUT}}, stream({"values": column}))
    assert r.status_code == 422
    assert [e["pointer"] for e in r.json["errors"]] == [f"/samples/raster/values/{i}" for i in (3, 40, 41)]
    assert "null marks a missing cell" in r.json["errors"][0]["detail"]


def test_nan_and_infinities_are_named_in_one_problem(client, cells):
    # As the sample columns' Arrow form and the JSON form do: every non-finite number listed at once.
    given = np.nan_to_num(cells, nan=1.0).tolist()
    given[3], given[7], given[40], given[41] = float("nan"), float("inf"), -float("inf"), None
    column = pa.array(given, type=pa.float64(), from_pandas=False)
    r = multipart(client, "/v1/experimental-variograms", {"samples": {"raster": LAYOUT}}, stream({"values": column}))
    assert r.status_code == 422
    assert [e["pointer"] for e in r.json["errors"]] == [f"/samples/raster/values/{i}" for i in (3, 7, 40)]


def test_a_layout_that_does_not_match_the_cells_is_refused(client, cells):
    layout = {**LAYOUT, "shape": [NX, NY + 1]}
    r = multipart(client, "/v1/experimental-variograms", {"samples": {"raster": layout}}, _arrow_values(cells))
    assert r.status_code == 422
    assert r.json["errors"][0]["pointer"] == "/samples/raster/values"
    assert f"has {NX * NY} entries but shape {NX} x {NY + 1}" in r.json["errors"][0]["detail"]


def test_only_a_layout_may_stand_in_the_request_part(client, cells):
    data = _arrow_values(cells)
    for samples in (_json_raster(cells), {"raster": LAYOUT, "x": [1.0]}, {"raster": [1, 2]}):
        r = multipart(client, "/v1/experimental-variograms", {"samples": samples}, data)
        assert r.status_code == 422 and r.json["errors"][0]["pointer"] == "/samples", r.json
        assert "for a raster the request part's samples holds only" in r.json["errors"][0]["detail"]
    r = multipart(client, "/v1/experimental-variograms", {"samples": {"raster": {"origin": [0, 0]}}}, data)
    assert r.status_code == 422
    assert {e["pointer"] for e in r.json["errors"]} == {"/samples/raster/spacing", "/samples/raster/shape"}


def test_cells_are_counted_from_the_batch_headers_against_their_own_limit(cells):
    client = create_app({"TESTING": True}, settings=Settings(max_arrow_cells=500, max_arrow_rows=10)).test_client()
    column = pa.array(np.nan_to_num(cells, nan=np.nan), from_pandas=True)
    data = stream(pa.table({"values": column}), batch_rows=510)
    r = multipart(client, "/v1/experimental-variograms", {"samples": {"raster": LAYOUT}}, data)
    assert r.status_code == 422 and r.json["limit"] == "LAGWISE_MAX_ARROW_CELLS"
    assert r.json["allowed"] == 500 and r.json["requested"] == 510
    small = {"origin": [0.0, 0.0], "spacing": [1.0, 1.0], "shape": [20, 20]}
    r = multipart(client, "/v1/experimental-variograms", {"samples": {"raster": small}}, _arrow_values(cells[:400]))
    assert r.status_code == 200, r.json  # 400 cells: within the cell limit, above the row limit of samples
