"""Sample ids in an Arrow stream: held compactly, echoed and refused exactly as the JSON form's.

References: the JSON form of the same request (every member of the answer but the timing
must match; an integer id is its decimal text there), pyarrow's IPC writer for the streams,
and ``hashlib.sha256`` over the float64 columns for ``provenance.input_sha256``.
"""

from __future__ import annotations

import hashlib
import json

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pytest
from urllib3.filepost import encode_multipart_formdata

from tests.api.test_arrow_api import ARROW, MODEL, as_json, multipart, stream, without_timing

KINDS = {
    "string": lambda numbers: pa.array([f"BH-{v}" for v in numbers], pa.string()),
    "large_string": lambda numbers: pa.array([f"BH-{v}" for v in numbers], pa.large_string()),
    "string_view": lambda numbers: pa.array([f"BH-{v}" for v in numbers], pa.string_view()),
    "int64": lambda numbers: pa.array(numbers, pa.int64()),
    "uint32": lambda numbers: pa.array(numbers, pa.uint32()),
}


@pytest.fixture()
def located(rng):
    """120 samples, the last at the first one's location (averaged away: the kept ids are picked)."""
    n = 120
    x, y = rng.uniform(0, 100, n), rng.uniform(0, 100, n)
    x[-1], y[-1] = x[0], y[0]
    values = np.sin(x / 15) + np.cos(y / 20) + rng.normal(0, 0.2, n)
    return {"x": x, "y": y, "values": values}, rng.permutation(1000)[:n] * 7


REQUESTS = {
    "/v1/cross-validations": {"model": MODEL, "neighbourhood": {"max_points": 16}},
    "/v1/predictions": {
        "model": MODEL,
        "neighbourhood": {"max_points": 8},
        "targets": {"x": [10.0, 50.0], "y": [10.0, 60.0]},
        "return_weights": [0, 1],
    },
}


@pytest.mark.parametrize("kind", list(KINDS))
@pytest.mark.parametrize("url", list(REQUESTS))
def test_arrow_ids_of_every_type_are_echoed_as_the_json_ids(client, located, kind, url):
    columns, numbers = located
    ids = KINDS[kind](numbers.tolist())
    texts = [str(v) for v in ids.to_pylist()]
    by_json = client.post(url, json={**REQUESTS[url], "samples": {**as_json(columns), "ids": texts}})
    # Batches of 37 rows: the id column arrives in several chunks and is joined once.
    by_arrow = multipart(client, url, REQUESTS[url], stream(pa.table({**columns, "ids": ids}), batch_rows=37))
    assert by_json.status_code == by_arrow.status_code == 200, by_arrow.json
    assert without_timing(by_arrow.json) == without_timing(by_json.json)
    digest = hashlib.sha256(b"".join(columns[k].astype("<f8").tobytes() for k in ("x", "y", "values"))).hexdigest()
    assert by_arrow.json["provenance"]["input_sha256"] == digest
    echoed = by_arrow.json["samples"]["id"] if "samples" in by_arrow.json else by_arrow.json["weights"][0]["samples"]
    assert set(echoed) <= set(texts[:-1])  # the last sample was averaged into the first


@pytest.mark.parametrize("kind", ["string", "int64"])
def test_a_repeated_arrow_id_is_refused_as_the_json_one(client, located, kind):
    columns, numbers = located
    numbers = numbers.copy()
    numbers[[40, 90]] = numbers[[7, 3]]
    ids = KINDS[kind](numbers.tolist())
    options = {"lags": {"width": 10, "count": 4}}
    by_json = client.post(
        "/v1/experimental-variograms",
        json={**options, "samples": {**as_json(columns), "ids": [str(v) for v in ids.to_pylist()]}},
    )
    by_arrow = multipart(client, "/v1/experimental-variograms", options, stream(pa.table({**columns, "ids": ids})))
    assert by_json.status_code == by_arrow.status_code == 422
    assert {**by_arrow.json, "request_id": None} == {**by_json.json, "request_id": None}
    assert [e["pointer"] for e in by_arrow.json["errors"]] == ["/samples/ids/40", "/samples/ids/90"]
    assert by_arrow.json["errors"][0]["detail"].endswith("of sample 7; ids must be distinct")


def test_one_repeat_among_a_million_arrow_ids_names_both_samples(client):
    n = 1_000_000
    rng = np.random.default_rng(12)
    numbers = rng.permutation(n)
    numbers[765_432] = numbers[23_456]
    # Text ids made by Arrow's compute functions: the request holds no Python string per id.
    ids = pc.binary_join_element_wise("BH-", pc.cast(pa.array(numbers), pa.string()), "")
    table = pa.table(
        {"x": rng.uniform(0, 1e4, n), "y": rng.uniform(0, 1e4, n), "values": rng.normal(size=n), "ids": ids}
    )
    # A body made beforehand: the test client's form builder would spool 35 MB to a file it never closes.
    body, content_type = encode_multipart_formdata(
        {
            "request": ("request.json", json.dumps({"lags": {"width": 10, "count": 4}}).encode(), "application/json"),
            "samples": ("samples.arrows", stream(table), ARROW),
        }
    )
    answer = client.post("/v1/experimental-variograms", data=body, content_type=content_type)
    assert answer.status_code == 422
    assert answer.json["errors"] == [
        {
            "pointer": "/samples/ids/765432",
            "detail": f"repeats the id 'BH-{numbers[23_456]}' of sample 23456; ids must be distinct",
        }
    ]
