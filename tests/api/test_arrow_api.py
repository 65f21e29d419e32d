"""Samples as an Arrow IPC stream (multipart/form-data) and answers in Arrow (Flask test client).

References: the JSON form of the same request (every member of the answer but the timing
must match), pyarrow's own IPC writer and reader (``pyarrow.ipc``) for the streams, and
``hashlib.sha256`` over the float64 columns for ``provenance.input_sha256`` (the input
hash convention of the HTTP contract).
"""

from __future__ import annotations

import hashlib
import io
import json

import numpy as np
import pyarrow as pa
import pytest
from lagwise.api import create_app
from lagwise.api.settings import Settings
from lagwise.core.limits import Limits

ARROW = "application/vnd.apache.arrow.stream"
MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 1.0, "range": 40.0}]}


def stream(columns: dict | pa.Table, batch_rows: int | None = None) -> bytes:
    """An Arrow IPC stream of ``columns`` (pyarrow's writer), in batches of ``batch_rows``."""
    table = columns if isinstance(columns, pa.Table) else pa.table(columns)
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table, max_chunksize=batch_rows)
    return sink.getvalue().to_pybytes()


def multipart(client, url: str, options: dict, data: bytes, *, media_type: str = ARROW, **kwargs):
    form = {
        "request": (io.BytesIO(json.dumps(options).encode()), "request.json", "application/json"),
        "samples": (io.BytesIO(data), "samples.arrows", media_type),
    }
    return client.post(url, data=form, content_type="multipart/form-data", **kwargs)


def without_timing(document: dict) -> dict:
    return {**document, "provenance": {k: v for k, v in document["provenance"].items() if k != "elapsed_ms"}}


@pytest.fixture()
def columns(rng):
    n = 120
    x, y = rng.uniform(0, 100, n), rng.uniform(0, 100, n)
    values = np.sin(x / 15) + np.cos(y / 20) + rng.normal(0, 0.2, n)
    return {"x": x, "y": y, "values": values}


def as_json(columns: dict) -> dict:
    return {k: v.tolist() if isinstance(v, np.ndarray) else v for k, v in columns.items()}


ENDPOINTS = {
    "/v1/experimental-variograms": {"lags": {"width": 10, "count": 6}, "directions": [{"azimuth": 0, "tolerance": 30}]},
    "/v1/variogram-maps": {"cell_size": 10, "cells": 4},
    "/v1/model-fits": {"lags": {"width": 10, "count": 6}, "families": ["spherical"]},
    "/v1/cross-validations": {"model": MODEL, "neighbourhood": {"max_points": 16}},
    "/v1/predictions": {"model": MODEL, "grid": {"origin": [0, 0], "spacing": [25, 25], "shape": [5, 5]}},
    "/v1/analyses": {"figures": []},
}


@pytest.mark.parametrize("url", list(ENDPOINTS))
def test_arrow_and_json_requests_give_the_same_answer(client, columns, url):
    options = ENDPOINTS[url]
    by_json = client.post(url, json={**options, "samples": as_json(columns)})
    by_arrow = multipart(client, url, options, stream(columns))
    assert by_json.status_code == by_arrow.status_code == 200, by_arrow.json
    assert without_timing(by_arrow.json) == without_timing(by_json.json)
    digest = hashlib.sha256(b"".join(columns[k].astype("<f8").tobytes() for k in ("x", "y", "values"))).hexdigest()
    assert by_arrow.json["provenance"]["input_sha256"] == digest


def test_integer_and_float32_columns_hash_like_the_json_numbers(client):
    x = np.arange(10, dtype=np.int32)
    y = (np.arange(10) % 3).astype(np.float32) * 0.5
    values = np.linspace(1, 2, 10)
    options = ENDPOINTS["/v1/experimental-variograms"]
    by_json = client.post(
        "/v1/experimental-variograms",
        json={**options, "samples": {"x": x.tolist(), "y": y.tolist(), "values": values.tolist()}},
    ).json
    by_arrow = multipart(
        client, "/v1/experimental-variograms", options, stream({"x": x, "y": y, "values": values})
    ).json
    assert by_arrow["provenance"]["input_sha256"] == by_json["provenance"]["input_sha256"]
    assert by_arrow["directions"] == by_json["directions"]


def test_ids_and_censoring_columns(client, columns):
    n = len(columns["x"])
    censored = np.zeros(n, dtype=bool)
    censored[[3, 7]] = True
    limits = np.full(n, np.nan)
    limits[[3, 7]] = 0.5
    ids = [f"P{i}" for i in range(n)]
    options = {"model": MODEL, "neighbourhood": {"max_points": 16}}
    body = {**as_json(columns), "ids": ids, "censored": censored.tolist()}
    body["detection_limits"] = [None if np.isnan(v) else v for v in limits]
    by_json = client.post("/v1/cross-validations", json={**options, "samples": body}).json
    table = pa.table(
        {
            **columns,
            "ids": pa.array(ids),
            "censored": pa.array(censored),
            "detection_limits": pa.array(limits, from_pandas=True),
        }
    )
    by_arrow = multipart(client, "/v1/cross-validations", options, stream(table)).json
    assert without_timing(by_arrow) == without_timing(by_json)
    assert by_arrow["samples"]["id"][:2] == ["P0", "P1"]


def test_predictions_answer_in_arrow_when_asked(client, columns):
    options = {
        "model": MODEL,
        "neighbourhood": {"max_points": 8, "radius": 15, "min_points": 4},
        "targets": {"x": [10.0, 50.0, 1e4], "y": [10.0, 60.0, 1e4]},
    }
    by_json = client.post("/v1/predictions", json={**options, "samples": as_json(columns)}).json
    answer = client.post("/v1/predictions", json={**options, "samples": as_json(columns)}, headers={"Accept": ARROW})
    assert answer.status_code == 200 and answer.mimetype == ARROW
    table = pa.ipc.open_stream(answer.get_data()).read_all()
    assert table.column_names == ["x", "y", "estimate", "variance"]
    for name in table.column_names:
        assert table.column(name).to_pylist() == by_json[name]
    assert by_json["estimate"][2] is None  # the far target has no neighbours: null in both forms
    rest = json.loads(table.schema.metadata[b"response"])
    assert rest["unestimated"] == by_json["unestimated"]
    assert rest["provenance"]["input_sha256"] == by_json["provenance"]["input_sha256"]
    assert "estimate" not in rest


def test_arrow_samples_have_their_own_sample_limit(columns):
    settings = Settings(limits=Limits(max_samples=50), max_arrow_rows=500)
    client = create_app({"TESTING": True}, settings=settings).test_client()
    options = ENDPOINTS["/v1/experimental-variograms"]
    refused = client.post("/v1/experimental-variograms", json={**options, "samples": as_json(columns)})
    assert refused.status_code == 422 and refused.json["limit"] == "LAGWISE_MAX_SAMPLES"
    accepted = multipart(client, "/v1/experimental-variograms", options, stream(columns))
    assert accepted.status_code == 200 and accepted.json["summary"]["samples"] == 120


@pytest.fixture()
def small_arrow_client():
    settings = Settings(max_body_bytes=4096, max_arrow_bytes=64 * 1024, max_arrow_rows=100)
    return create_app({"TESTING": True}, settings=settings).test_client()


def test_rows_are_refused_from_the_batch_headers_before_the_columns_are_read(small_arrow_client):
    n = 150
    x = np.arange(n, dtype=np.float64)
    values = np.full(n, np.nan)  # not finite, and null below: neither is looked at past the row limit
    table = pa.table({"x": x, "values": pa.array(values, from_pandas=False)})
    data = stream(table, batch_rows=120)
    # Cut the stream inside its second batch: the first batch's header already passes the limit.
    truncated = data[: len(data) - 200]
    for body in (data, truncated):
        r = multipart(small_arrow_client, "/v1/experimental-variograms", {}, body)
        assert r.status_code == 422, r.json
        assert r.json["type"] == "/problems/limit-exceeded" and r.json["limit"] == "LAGWISE_MAX_ARROW_ROWS"
        assert r.json["allowed"] == 100 and r.json["requested"] == 120


def test_an_arrow_body_over_its_byte_limit_is_refused_before_it_is_read(small_arrow_client):
    data = stream({"x": np.arange(5000.0), "values": np.ones(5000)})
    r = multipart(small_arrow_client, "/v1/experimental-variograms", {}, data)
    assert r.status_code == 413 and "LAGWISE_MAX_ARROW_BYTES" in r.json["detail"]
    # A JSON body keeps its own (smaller) limit.
    body = {"samples": {"x": list(range(1000)), "values": [1.0] * 1000}}
    r = small_arrow_client.post("/v1/experimental-variograms", json=body)
    assert r.status_code == 413 and "LAGWISE_MAX_BODY_BYTES" in r.json["detail"]


def test_the_schema_is_checked_before_the_rows(small_arrow_client):
    table = pa.table({"x": pa.array(["a"] * 150), "values": np.ones(150)})
    r = multipart(small_arrow_client, "/v1/experimental-variograms", {}, stream(table))
    assert r.status_code == 422 and r.json["errors"][0]["pointer"] == "/samples/x"


def pointers(response) -> list[str]:
    return [e["pointer"] for e in response.json["errors"]]


@pytest.mark.parametrize(
    ("table", "pointer", "words"),
    [
        (pa.table({"x": [1.0, 2.0, 3.0]}), "/samples/values", "no column values"),
        (pa.table({"x": ["a", "b", "c"], "values": [1.0, 2.0, 3.0]}), "/samples/x", "must hold numbers"),
        (pa.table({"x": [1.0, 2.0, 3.0], "values": [1.0, None, 3.0]}), "/samples/values/1", "missing (null)"),
        (pa.table({"x": [1.0, 2.0, 3.0], "values": [1.0, 2.0, 3.0], "lead": [1, 2, 3]}), "/samples/lead", "unknown"),
        (
            pa.table({"x": [1.0, 2.0, 3.0], "values": [1.0, 2.0, 3.0], "censored": [1, 0, 0]}),
            "/samples/censored",
            "boolean",
        ),
        (pa.table({"x": [1.0, 2.0, float("inf")], "values": [1.0, 2.0, 3.0]}), "/samples/x/2", "not a finite number"),
        (pa.table({"x": [1.0, 2.0, 3.0], "values": [1.0, 2.0, 1e200]}), "/samples/values/2", "magnitude above"),
    ],
)
def test_bad_columns_are_named(client, table, pointer, words):
    r = multipart(client, "/v1/experimental-variograms", {}, stream(table))
    assert r.status_code == 422, r.json
    assert pointer in pointers(r)
    assert any(words in e["detail"] for e in r.json["errors"])


def test_a_malformed_stream_is_named(client, columns):
    for data in (b"not an arrow stream", stream(columns)[:-300]):
        r = multipart(client, "/v1/experimental-variograms", {}, data)
        assert r.status_code == 422 and pointers(r) == ["/samples"], r.json


def test_form_mistakes(client, columns):
    data = stream(columns)
    r = multipart(client, "/v1/experimental-variograms", {"samples": as_json(columns)}, data)
    assert r.status_code == 422 and pointers(r) == ["/samples"]
    r = multipart(client, "/v1/experimental-variograms", {}, data, media_type="text/csv")
    assert r.status_code == 415
    r = client.post(
        "/v1/experimental-variograms",
        data={"samples": (io.BytesIO(data), "s.arrows", ARROW)},
        content_type="multipart/form-data",
    )
    assert r.status_code == 422 and "request part" in r.json["detail"]
    r = client.post(
        "/v1/experimental-variograms",
        data=b"--x\r\n",
        headers={"Content-Type": "multipart/form-data"},
    )
    assert r.status_code == 400 and r.json["type"] == "/problems/malformed-request"
    r = multipart(client, "/v1/experimental-variograms", {"lags": {"width": -1, "count": 3}}, data)
    assert r.status_code == 422 and pointers(r)[0].startswith("/lags")


def test_parts_without_filenames_and_an_unclosed_part(client, columns):
    """Form parts as RFC 7578 writes them by hand: no filename, CRLF line ends, a closing delimiter."""
    data = stream(columns)
    options = json.dumps(ENDPOINTS["/v1/experimental-variograms"]).encode()
    body = (
        b'--xyz\r\nContent-Disposition: form-data; name="request"\r\nContent-Type: application/json\r\n\r\n'
        + options
        + b'\r\n--xyz\r\nContent-Disposition: form-data; name="samples"\r\nContent-Type: '
        + ARROW.encode()
        + b"\r\n\r\n"
        + data
        + b"\r\n--xyz--\r\n"
    )
    headers = {"Content-Type": "multipart/form-data; boundary=xyz"}
    r = client.post("/v1/experimental-variograms", data=body, headers=headers)
    assert r.status_code == 200, r.json
    by_json = client.post(
        "/v1/experimental-variograms", json={**ENDPOINTS["/v1/experimental-variograms"], "samples": as_json(columns)}
    )
    assert r.json["provenance"]["input_sha256"] == by_json.json["provenance"]["input_sha256"]
    r = client.post("/v1/experimental-variograms", data=body[: len(body) - 12], headers=headers)
    assert r.status_code == 400 and r.json["type"] == "/problems/malformed-request"


def _form(*parts: tuple[str, str, bytes]) -> bytes:
    """A multipart/form-data body (boundary ``xyz``) of (name, media type, content) parts, written by hand."""
    body = b""
    for name, media_type, content in parts:
        body += (
            f'--xyz\r\nContent-Disposition: form-data; name="{name}"\r\nContent-Type: {media_type}\r\n\r\n'.encode()
            + content
            + b"\r\n"
        )
    return body + b"--xyz--\r\n"


def test_a_repeated_or_unknown_part_is_refused_by_name(client, columns, rng):
    """A second samples part used to replace the first silently, and unknown parts were ignored."""
    headers = {"Content-Type": "multipart/form-data; boundary=xyz"}
    options = ("request", "application/json", json.dumps(ENDPOINTS["/v1/experimental-variograms"]).encode())
    first = ("samples", ARROW, stream(columns))
    other = {name: rng.permutation(column) for name, column in columns.items()}
    second = ("samples", ARROW, stream(other))
    r = client.post("/v1/experimental-variograms", data=_form(options, first, second), headers=headers)
    assert r.status_code == 422 and r.mimetype == "application/problem+json", r.json
    assert pointers(r) == ["/samples"] and "more than one samples part" in r.json["detail"]
    r = client.post("/v1/experimental-variograms", data=_form(options, options, first), headers=headers)
    assert r.status_code == 422 and "more than one request part" in r.json["detail"]
    extra = ("weights", "application/json", b"[1, 2, 3]")
    r = client.post("/v1/experimental-variograms", data=_form(options, first, extra), headers=headers)
    assert r.status_code == 422 and pointers(r) == [""], r.json
    assert "'weights'" in r.json["detail"] and "only a request part" in r.json["detail"]
    assert client.post("/v1/experimental-variograms", data=_form(options, first), headers=headers).status_code == 200


# ---- several variables in, simulations and cokriging out ---------------------------------------

SIM_MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 0.9, "range": 30.0}]}
JOINT_MODEL = {
    "variables": ["lead", "zinc"],
    "nugget": [[0.02, 0.01], [0.01, 0.05]],
    "structures": [{"family": "spherical", "range": 40.0, "sills": [[0.5, 0.3], [0.3, 0.6]]}],
}


def put_back(data: bytes) -> dict:
    """Reference reading of an Arrow answer: each column's list placed at its JSON Pointer (RFC 6901)
    into the metadata's document (a moved member is absent from its object, null in its array)."""
    table = pa.ipc.open_stream(data).read_all()
    document = json.loads(table.schema.metadata[b"response"])
    for name in table.column_names:
        *parents, last = name.split("/")
        node = document
        for token in parents:
            node = node[int(token)] if isinstance(node, list) else node[token.replace("~1", "/").replace("~0", "~")]
        node[int(last) if isinstance(node, list) else last] = table.column(name).to_pylist()
    return document


def arrow_and_json(client, url: str, options: dict, samples: dict):
    by_json = client.post(url, json={**options, "samples": samples})
    answer = client.post(url, json={**options, "samples": samples}, headers={"Accept": ARROW})
    assert by_json.status_code == answer.status_code == 200, answer.data[:500]
    assert answer.mimetype == ARROW
    return by_json.json, answer.get_data()


def test_simulations_answer_in_arrow_when_asked(client, columns):
    options = {
        "model": SIM_MODEL,
        "grid": {"origin": [0, 0], "spacing": [10, 10], "shape": [8, 6]},
        "realisations": 6,
        "thresholds": [0.0, 1.0],
        "blocks": {"size": [20, 20]},
        "return_realisations": True,
    }
    by_json, data = arrow_and_json(client, "/v1/simulations", options, as_json(columns))
    table = pa.ipc.open_stream(data).read_all()
    assert table.num_rows == 48
    assert table.column_names == [
        "mean",
        "variance",
        "quantiles/p10",
        "quantiles/p50",
        "quantiles/p90",
        "exceedance/0/probability",
        "exceedance/1/probability",
        *[f"realisations/{r}" for r in range(6)],
    ]
    assert without_timing(put_back(data)) == without_timing(by_json)
    rest = json.loads(table.schema.metadata[b"response"])
    assert "mean" not in rest and rest["realisations"] == [None] * 6 and rest["exceedance"][0] == {"threshold": 0.0}
    assert rest["blocks"] == by_json["blocks"]  # block summaries have their own length: they stay JSON


def test_predictions_with_thresholds_answer_exceedance_columns(client, columns):
    options = {"model": MODEL, "grid": {"origin": [0, 0], "spacing": [25, 25], "shape": [5, 5]}, "thresholds": [0.5]}
    by_json, data = arrow_and_json(client, "/v1/predictions", options, as_json(columns))
    assert "exceedance/0/probability" in pa.ipc.open_stream(data).read_all().column_names
    assert without_timing(put_back(data)) == without_timing(by_json)


@pytest.fixture()
def several(rng):
    n = 90
    x, y = rng.uniform(0, 100, n), rng.uniform(0, 100, n)
    lead = np.sin(x / 15) + rng.normal(0, 0.2, n)
    zinc = 0.6 * lead + rng.normal(0, 0.3, n)
    lead[::5] = np.nan  # not measured
    censored = np.zeros(n, dtype=bool)
    censored[[2, 9]] = True
    limits = np.where(censored, 0.05, np.nan)
    json_form = {
        "x": x.tolist(),
        "y": y.tolist(),
        "variables": {"lead": [None if np.isnan(v) else v for v in lead], "zinc": zinc.tolist()},
        "censored": {"zinc": censored.tolist()},
        "detection_limits": {"zinc": [None if np.isnan(v) else v for v in limits]},
        "units": {"lead": "mg/kg"},
    }
    lead_field = pa.field("variables/lead", pa.float64(), metadata={"unit": "mg/kg"})
    table = pa.table(
        [x, y, pa.array(lead, from_pandas=True), zinc, censored, pa.array(limits, from_pandas=True)],
        schema=pa.schema(
            [
                pa.field("x", pa.float64()),
                pa.field("y", pa.float64()),
                lead_field,
                pa.field("variables/zinc", pa.float64()),
                pa.field("censored/zinc", pa.bool_()),
                pa.field("detection_limits/zinc", pa.float64()),
            ]
        ),
    )
    return json_form, table


SEVERAL_ENDPOINTS = {
    "/v1/experimental-variograms": {"lags": {"width": 10, "count": 6}},
    "/v1/predictions": {"model": JOINT_MODEL, "primary": "lead", "targets": {"x": [10.0, 50.0], "y": [20.0, 70.0]}},
    "/v1/cross-validations": {"model": JOINT_MODEL, "primary": "lead", "neighbourhood": {"max_points": 12}},
}


@pytest.mark.parametrize("url", list(SEVERAL_ENDPOINTS))
def test_several_variables_in_arrow_give_the_json_answer(client, several, url):
    json_form, table = several
    options = SEVERAL_ENDPOINTS[url]
    by_json = client.post(url, json={**options, "samples": json_form})
    by_arrow = multipart(client, url, options, stream(table))
    assert by_json.status_code == by_arrow.status_code == 200, by_arrow.json
    assert without_timing(by_arrow.json) == without_timing(by_json.json)
    assert by_arrow.json["provenance"]["input_sha256"] == by_json.json["provenance"]["input_sha256"]


def test_cokriging_predictions_answer_in_arrow_when_asked(client, several):
    json_form, table = several
    options = SEVERAL_ENDPOINTS["/v1/predictions"]
    by_json, data = arrow_and_json(client, "/v1/predictions", options, json_form)
    assert pa.ipc.open_stream(data).read_all().column_names == ["x", "y", "estimate", "variance"]
    assert without_timing(put_back(data)) == without_timing(by_json)
    arrow_both = multipart(client, "/v1/predictions", options, stream(table), headers={"Accept": ARROW})
    assert put_back(arrow_both.get_data())["provenance"]["input_sha256"] == by_json["provenance"]["input_sha256"]


@pytest.mark.parametrize(
    ("columns", "pointer", "words"),
    [
        (
            {"x": [1.0, 2.0, 3.0], "values": [1.0, 2.0, 3.0], "variables/lead": [1.0, 2.0, 3.0]},
            "/samples/values",
            "not both",
        ),
        (
            {"x": [1.0, 2.0, 3.0], "variables/lead": [1.0, 2.0, 3.0], "censored/zinc": [True, False, False]},
            "/samples/censored/zinc",
            "names no",
        ),
        ({"x": [1.0, 2.0, 3.0], "variables/lead": [1.0, float("nan"), 3.0]}, "/samples/variables/lead/1", "null marks"),
        (
            {"x": [1.0, 2.0, 3.0], "variables/a/b": [1.0, 2.0, float("inf")]},
            "/samples/variables/a~1b/2",
            "not a finite",
        ),
        ({"x": [1.0, 2.0, 3.0], "variables/lead": ["a", "b", "c"]}, "/samples/variables/lead", "must hold numbers"),
    ],
)
def test_bad_variable_columns_are_named(client, columns, pointer, words):
    r = multipart(client, "/v1/experimental-variograms", {}, stream(pa.table(columns)))
    assert r.status_code == 422, r.json
    assert pointer in pointers(r), r.json
    assert any(words in e["detail"] for e in r.json["errors"])
