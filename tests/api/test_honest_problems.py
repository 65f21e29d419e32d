"""Problem details tell the truth: how many fields are invalid, no empty pointer before a root message."""

from __future__ import annotations

import io

import numpy as np
import pyarrow as pa

from tests.api.test_arrow_api import ARROW

VARIOGRAMS = "/v1/experimental-variograms"
PREDICTIONS = "/v1/predictions"


def test_every_invalid_value_is_counted_though_twenty_are_listed(client):
    n = 150_000
    response = client.post(VARIOGRAMS, json={"samples": {"x": list(range(n)), "values": ["a"] * n}})
    assert response.status_code == 422
    problem = response.get_json()
    assert problem["detail"] == f"{n} fields are invalid (the first 20 listed)"
    assert len(problem["errors"]) == 20
    assert problem["errors_omitted"] == n - 20
    assert problem["errors"][0] == {"pointer": "/samples/values/0", "detail": "not a number"}


def test_a_few_invalid_values_are_all_listed(client):
    response = client.post(VARIOGRAMS, json={"samples": {"x": [0, 1, 2], "values": ["a", 1, "b"]}})
    problem = response.get_json()
    assert problem["detail"] == "2 fields are invalid"
    assert "errors_omitted" not in problem


def test_arrow_nulls_are_all_counted(client):
    n = 50
    table = pa.table({"x": np.arange(n, dtype=float), "values": pa.array([None] * n, type=pa.float64())})
    sink = io.BytesIO()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    response = client.post(
        VARIOGRAMS,
        data={
            "request": (io.BytesIO(b"{}"), "r.json", "application/json"),
            "samples": (io.BytesIO(sink.getvalue()), "s.arrow", ARROW),
        },
        content_type="multipart/form-data",
    )
    assert response.status_code == 422
    problem = response.get_json()
    assert problem["detail"] == f"{n} fields are invalid (the first 20 listed)"
    assert problem["errors_omitted"] == n - 20


def test_a_root_problem_has_no_empty_pointer_before_its_message(client):
    body = {"samples": {"x": [0, 1], "y": [0, 1], "values": [1, 2]}, "model": {"nugget": 1, "structures": []}}
    problem = client.post(PREDICTIONS, json=body).get_json()
    assert problem["detail"] == "give either targets or grid"
    assert problem["errors"][0]["pointer"] == ""


def test_a_multipart_form_without_request_part_names_it_plainly(client):
    response = client.post(
        VARIOGRAMS,
        data={"samples": (io.BytesIO(b"x"), "s.arrow", ARROW)},
        content_type="multipart/form-data",
    )
    assert response.status_code == 422
    assert response.get_json()["detail"].startswith("the multipart form needs a request part")


def test_a_multipart_form_with_an_extra_part_names_it_plainly(client):
    response = client.post(
        VARIOGRAMS,
        data={
            "request": (io.BytesIO(b"{}"), "r.json", "application/json"),
            "other": (io.BytesIO(b"x"), "o.txt", "text/plain"),
        },
        content_type="multipart/form-data",
    )
    assert response.status_code == 422
    assert response.get_json()["detail"].startswith("the multipart form has a part named 'other'")


def test_an_option_that_overflows_has_the_samples_wording(client):
    body = b'{"samples":{"x":[0,1,2],"values":[1,2,3]},"directions":[{"azimuth":1e400}]}'
    problem = client.post(VARIOGRAMS, data=body, content_type="application/json").get_json()
    assert problem["errors"] == [
        {"pointer": "/directions/0/azimuth", "detail": "not a finite number (overflows to infinity)"}
    ]
    sample = b'{"samples":{"x":[0,1,2],"values":[1,1e400,3]}}'
    problem = client.post(VARIOGRAMS, data=sample, content_type="application/json").get_json()
    assert problem["errors"][0]["detail"] == "not a finite number (overflows to infinity)"


def test_a_null_value_has_the_arrow_wording(client):
    problem = client.post(VARIOGRAMS, json={"samples": {"x": [0, 1, 2], "values": [1, None, 3]}}).get_json()
    assert problem["errors"] == [{"pointer": "/samples/values/1", "detail": "missing (null)"}]


BODY = '{"samples":{"x":[0,1,2],"values":[1,2,3]}}'


def test_json_declared_in_another_charset_is_refused(client):
    body = '{"samples":{"x":[0,1,2],"values":[1,2,3]},"variable":{"name":"Blei ü"}}'.encode("latin-1")
    response = client.post(VARIOGRAMS, data=body, content_type="application/json; charset=latin-1")
    assert response.status_code == 415
    problem = response.get_json()
    assert problem["type"] == "/problems/unsupported-media-type"
    assert "charset latin-1" in problem["detail"] and "UTF-8" in problem["detail"]


def test_json_in_utf8_is_taken_with_or_without_its_charset(client):
    for content_type in ("application/json", "application/json; charset=utf-8", "application/json; charset=UTF-8"):
        response = client.post(VARIOGRAMS, data=BODY.encode(), content_type=content_type)
        assert response.status_code == 200, content_type


def _arrow_samples() -> bytes:
    table = pa.table({"x": [0.0, 1.0, 2.0], "values": [1.0, 2.0, 3.0]})
    sink = io.BytesIO()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    return sink.getvalue()


def test_a_request_part_declared_in_another_charset_is_refused(client):
    def post(part_type):
        return client.post(
            VARIOGRAMS,
            data={
                "request": (io.BytesIO(b"{}"), "r.json", part_type),
                "samples": (io.BytesIO(_arrow_samples()), "s.arrow", ARROW),
            },
            content_type="multipart/form-data",
        )

    refused = post("application/json; charset=iso-8859-1")
    assert refused.status_code == 415
    assert "the request part is declared as charset iso-8859-1" in refused.get_json()["detail"]
    assert post("application/json; charset=utf-8").status_code == 200


def test_every_invalid_geojson_value_is_counted(client):
    features = [
        {"type": "Feature", "geometry": {"type": "Point", "coordinates": [i, 0]}, "properties": {"v": "n/a"}}
        for i in range(60)
    ]
    body = {"samples": {"geojson": {"type": "FeatureCollection", "features": features}, "value_property": "v"}}
    problem = client.post(VARIOGRAMS, json=body).get_json()
    assert problem["detail"] == "60 fields are invalid (the first 20 listed)"
    assert problem["errors"][19]["pointer"] == "/samples/geojson/features/19/properties/v"
    assert problem["errors_omitted"] == 40


def test_the_contract_describes_every_cause_of_a_415(client):
    # Each cause the service refuses with 415 is named in the contract's 415 response and in /problems/.
    body = b'{"samples": {"x": [0, 1, 2], "values": [1, 2, 3]}}'
    refusals = [
        client.post(VARIOGRAMS, data=body, content_type="text/csv"),
        client.post(VARIOGRAMS, data=body, content_type="application/json; charset=latin-1"),
        client.post(VARIOGRAMS, data=body, content_type="application/json", headers={"Content-Encoding": "br"}),
    ]
    assert [r.status_code for r in refusals] == [415, 415, 415]
    contract = client.get("/openapi.json").get_json()
    described = contract["components"]["responses"]["UnsupportedMediaType"]["description"]
    kind = client.get("/problems/unsupported-media-type").get_json()["description"]
    for text in (described, kind):
        assert "application/json" in text and "multipart/form-data" in text
        assert "charset other than UTF-8" in text and "Content-Encoding other than gzip" in text
