"""Hostile input: values of the wrong JSON type, mixed forms, repeated members are refused by name."""

from __future__ import annotations

import io

import pytest

from tests.api.test_arrow_api import ARROW, stream
from tests.api.test_bad_input import assert_problem

VARIOGRAMS = "/v1/experimental-variograms"


def columns(**extra):
    return {"x": [0, 1, 2, 3], "y": [0, 1, 0, 1], "values": [1, 2, 3, 4], **extra}


@pytest.mark.parametrize(
    "body, pointer, detail",
    [
        ({"samples": columns(), "lags": {"width": "12", "count": 3}}, "/lags/width", "must be a number, not a string"),
        ({"samples": columns(), "lags": {"width": 1, "count": "3"}}, "/lags/count", "must be an integer, not a string"),
        ({"samples": columns(), "lags": {"width": 1, "count": 2.5}}, "/lags/count", "not a number with a fraction"),
        ({"samples": columns(), "lags": {"width": True, "count": 3}}, "/lags/width", "not a boolean"),
        ({"samples": columns(), "min_pairs": "30"}, "/min_pairs", "must be an integer, not a string"),
        ({"samples": columns(), "directions": [{"azimuth": "45"}]}, "/directions/0/azimuth", "not a string"),
        ({"samples": columns(), "lags": {"edges": [0, "1", 2]}}, "/lags/edges/1", "must be a number, not a string"),
        (
            {"samples": columns(censored=["yes", False, False, False], detection_limits=[0.5, None, None, None])},
            "/samples/censored/0",
            "must be true or false, not a string",
        ),
        (
            {"samples": columns(censored=[1, False, False, False], detection_limits=[0.5, None, None, None])},
            "/samples/censored/0",
            "must be true or false, not a number",
        ),
        (
            {"samples": columns(censored=[True, False, False, False], detection_limits=["0.5", None, None, None])},
            "/samples/detection_limits/0",
            "must be a number, not a string",
        ),
        ({"samples": columns(x=[0, "1", 2, 3])}, "/samples/x/1", "not a number"),
        ({"samples": columns(values=[1, 2, "3", 4])}, "/samples/values/2", "not a number"),
    ],
)
def test_numbers_and_booleans_are_not_read_from_strings(client, body, pointer, detail):
    doc = assert_problem(client.post(VARIOGRAMS, json=body), 422, "invalid-input", [pointer])
    assert detail in doc["errors"][0]["detail"]
    assert doc["detail"].startswith(pointer + ": ")


def test_analysis_boolean_option_is_strict(client):
    body = {"samples": columns(), "fit": {"compare": "false"}}
    doc = assert_problem(client.post("/v1/analyses", json=body), 422, "invalid-input", ["/fit/compare"])
    assert doc["errors"][0]["detail"] == "must be true or false, not a string"


def test_true_numbers_and_booleans_still_load(client):
    body = {
        "samples": columns(censored=[True, False, False, False], detection_limits=[0.5, None, None, None]),
        "lags": {"width": 1, "count": 2},
    }
    assert client.post(VARIOGRAMS, json=body).status_code == 200


@pytest.mark.parametrize(
    "lags, given",
    [
        ({"width": 1, "count": 3, "auto": "equal_width"}, ("width", "count", "auto")),
        ({"edges": [0, 1, 2], "width": 1}, ("edges", "width")),
        ({"auto": "equal_pairs", "edges": [0, 1]}, ("auto", "edges")),
    ],
)
def test_mixed_lag_forms_are_refused_naming_the_forms(client, lags, given):
    doc = assert_problem(client.post(VARIOGRAMS, json={"samples": columns(), "lags": lags}), 422, "invalid-input")
    assert [e["pointer"] for e in doc["errors"]] == ["/lags"]
    detail = doc["errors"][0]["detail"]
    assert "width and count, edges, or auto" in detail and "cannot be mixed" in detail
    assert set(detail.split("(got ")[1].rstrip(")").split(", ")) == set(given)
    assert "Unknown field" not in doc["detail"]


def test_mixed_sample_forms_are_refused_naming_the_forms(client):
    raster = {"origin": [0, 0], "spacing": [1, 1], "shape": [2, 2], "values": [1, 2, 3, 4]}
    doc = assert_problem(
        client.post(VARIOGRAMS, json={"samples": {"raster": raster, "x": [0, 1]}}), 422, "invalid-input", ["/samples"]
    )
    assert "or a raster" in doc["errors"][0]["detail"] and "cannot be mixed" in doc["errors"][0]["detail"]


def test_a_misspelt_lag_member_is_still_unknown(client):
    doc = assert_problem(
        client.post(VARIOGRAMS, json={"samples": columns(), "lags": {"widht": 1}}), 422, "invalid-input"
    )
    assert [e["pointer"] for e in doc["errors"]] == ["/lags/widht"]


MODEL_WITHOUT_SILL = {"nugget": 0.1, "structures": [{"family": "spherical", "range": 2}]}


@pytest.mark.parametrize(
    "url, body, pointer",
    [
        (VARIOGRAMS, {}, "/samples"),
        (VARIOGRAMS, {"samples": {"x": [0, 1, 2]}}, "/samples/values"),
        (VARIOGRAMS, {"samples": columns(), "lags": {"width": 1}}, "/lags/count"),
        (
            "/v1/predictions",
            {"samples": columns(), "model": MODEL_WITHOUT_SILL, "targets": {"x": [0.5]}},
            "/model/structures/0/partial_sill",
        ),
    ],
)
def test_a_missing_required_member_is_named_in_our_words(client, url, body, pointer):
    doc = assert_problem(client.post(url, json=body), 422, "invalid-input", [pointer])
    assert doc["errors"][0]["detail"] == "is required" and doc["detail"] == f"{pointer}: is required"


def test_a_field_with_its_own_required_message_keeps_it(client):
    model = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 1, "range": 2}]}
    body = {"samples": columns(), "model": model, "targets": {"x": [0.5]}, "kriging": {"type": "universal"}}
    doc = assert_problem(client.post("/v1/predictions", json=body), 422, "invalid-input", ["/kriging/drift"])
    assert doc["errors"][0]["detail"].startswith("universal kriging needs a drift")


@pytest.mark.parametrize("url", ["/v1/model-fits", "/v1/analyses"])
@pytest.mark.parametrize("n", [2, 3])
def test_too_few_samples_to_fit_are_refused_at_samples(client, url, n):
    """The smallest default candidate (no nugget, sill and range) needs 3 classes of min_pairs = 30 pairs:
    90 pairs, and 13 samples make 13 * 12 / 2 = 78 (pair count n (n - 1) / 2: common practice)."""
    samples = {"x": list(range(n)), "y": [0] * n, "values": [float(i % 2) for i in range(n)]}
    doc = assert_problem(client.post(url, json={"samples": samples}), 422, "invalid-input", ["/samples"])
    assert "needs at least 14 samples" in doc["detail"] and f"got {n}" in doc["detail"]


def test_the_stated_minimum_follows_min_pairs(client):
    """With min_pairs = 1, three classes need three pairs, which three samples make; with 2, six pairs: four."""
    samples = {"x": [0, 1, 3], "y": [0, 0, 0], "values": [1.0, 2.0, 4.0]}
    doc = client.post("/v1/model-fits", json={"samples": samples, "min_pairs": 1}).json
    assert all(e["pointer"] != "/samples" for e in doc.get("errors", [])), doc
    doc = client.post("/v1/model-fits", json={"samples": samples, "min_pairs": 2}).json
    assert doc["errors"][0]["pointer"] == "/samples" and "at least 4 samples, got 3" in doc["detail"]


@pytest.mark.parametrize(
    "url, accept",
    [
        (VARIOGRAMS, "text/html"),
        (VARIOGRAMS, "application/vnd.apache.arrow.stream"),  # Arrow answers are for predictions and simulations
        ("/v1/predictions", "text/csv, application/xml;q=0.5"),
        ("/v1/model-families", "image/png"),
    ],
)
def test_an_unsatisfiable_accept_is_a_406_listing_what_the_path_answers_with(client, url, accept):
    method = client.get if url == "/v1/model-families" else client.post
    r = method(url, json={"samples": columns()}, headers={"Accept": accept})
    doc = assert_problem(r, 406, "not-acceptable")
    arrow = ["application/vnd.apache.arrow.stream"] if url == "/v1/predictions" else []
    assert doc["acceptable"] == ["application/json", *arrow]
    assert all(media_type in doc["detail"] for media_type in doc["acceptable"])


@pytest.mark.parametrize(
    "url, accept",
    [
        (VARIOGRAMS, "application/problem+json"),
        ("/v1/model-families", "application/problem+json"),
        ("/healthz", "application/problem+json"),
        ("/readyz", "application/problem+json, text/html"),
        ("/v1/predictions", "application/problem+json;q=1, application/json;q=0"),
    ],
)
def test_asking_for_problems_alone_asks_for_no_answer_and_is_a_406(client, url, accept):
    # A problem is sent whatever Accept says; it is not an answer a path can be asked for.
    method = client.post if url.startswith("/v1/") and url != "/v1/model-families" else client.get
    r = method(url, json={"samples": columns()}, headers={"Accept": accept})
    doc = assert_problem(r, 406, "not-acceptable")
    assert "application/problem+json" not in doc["acceptable"]


@pytest.mark.parametrize(
    "url, accept, served",
    [
        ("/", "application/json", "text/html"),
        ("/openapi.json", "application/yaml", "application/json"),
        ("/openapi.json", "application/problem+json", "application/json"),
        ("/openapi.yaml", "application/json", "application/yaml"),
        ("/openapi.yaml", "application/yaml;q=0, */*", "application/yaml"),
        ("/metrics", "application/json", "text/plain"),
        ("/problems/limit-exceeded", "text/html", "application/json"),
        ("/problems/no-such-kind", "application/problem+json", "application/json"),
    ],
)
def test_fixed_documents_refuse_an_accept_they_cannot_satisfy(client, url, accept, served):
    doc = assert_problem(client.get(url, headers={"Accept": accept}), 406, "not-acceptable")
    assert doc["acceptable"] == [served] and served in doc["detail"]


@pytest.mark.parametrize(
    "url, accept, served",
    [
        ("/", "text/html,application/xhtml+xml,application/xml;q=0.9,*/*;q=0.8", "text/html"),
        ("/openapi.json", "application/json, application/problem+json", "application/json"),
        ("/openapi.yaml", "application/*", "application/yaml"),
        ("/openapi.yaml", None, "application/yaml"),
        ("/metrics", "text/plain;version=0.0.4", "text/plain"),
        ("/metrics", "application/openmetrics-text;version=1.0.0,text/plain;version=0.0.4;q=0.5", "text/plain"),
        ("/problems/limit-exceeded", "application/json", "application/json"),
        ("/healthz", "application/json;q=0.5, application/problem+json", "application/json"),
    ],
)
def test_fixed_documents_answer_an_accept_they_can_satisfy(client, url, accept, served):
    r = client.get(url, headers={} if accept is None else {"Accept": accept})
    assert r.status_code == 200 and r.mimetype == served


@pytest.mark.parametrize(
    "accept",
    [None, "*/*", "application/*", "application/json", "text/html;q=0.9, application/json;q=0.1", "*/*;q=0.01"],
)
def test_acceptable_accept_headers_still_answer(client, accept):
    headers = {} if accept is None else {"Accept": accept}
    r = client.post(VARIOGRAMS, json={"samples": columns(), "lags": {"width": 1, "count": 2}}, headers=headers)
    assert r.status_code == 200 and r.mimetype == "application/json"


def test_a_zero_quality_refuses_json(client):
    r = client.get("/v1/model-families", headers={"Accept": "application/json;q=0, text/plain"})
    assert_problem(r, 406, "not-acceptable")


def test_repeated_sample_ids_are_refused_naming_both_samples(client):
    samples = columns(ids=["a", "b", "a", "b"])
    doc = assert_problem(
        client.post(VARIOGRAMS, json={"samples": samples}), 422, "invalid-input", ["/samples/ids/2", "/samples/ids/3"]
    )
    assert doc["errors"][0]["detail"] == "repeats the id 'a' of sample 0; ids must be distinct"
    assert "of sample 1" in doc["errors"][1]["detail"]


def test_repeated_ids_of_several_variables_and_features_are_refused(client):
    body = {"samples": {"x": [0, 1, 2], "y": [0, 1, 0], "ids": ["p", "q", "p"], "variables": {"a": [1, 2, 3]}}}
    assert_problem(client.post(VARIOGRAMS, json=body), 422, "invalid-input", ["/samples/ids/2"])
    features = [
        {
            "type": "Feature",
            "id": name,
            "geometry": {"type": "Point", "coordinates": [i, i % 2]},
            "properties": {"v": i},
        }
        for i, name in enumerate(["s1", "s2", "s3", "s1"])
    ]
    body = {"samples": {"geojson": {"type": "FeatureCollection", "features": features}, "value_property": "v"}}
    doc = assert_problem(client.post(VARIOGRAMS, json=body), 422, "invalid-input", ["/samples/geojson/features/3/id"])
    assert "of sample 0" in doc["detail"]


@pytest.mark.parametrize(
    "body, pointer",
    [
        (
            b'{"samples": {"x": [0, 1, 2], "values": [1, 2, 3]}, "lags": {"width": 1, "count": 2, "width": 5}}',
            "/lags/width",
        ),
        (b'{"samples": {"x": [0, 1, 2], "values": [1, 2, 3], "x": [5, 6, 7]}}', "/samples/x"),
        (
            b'{"samples": {"x": [0, 1, 2], "values": [1, 2, 3], "ids": ["a:1", "a:2", "a:3"]}, "min_pairs": 1, '
            b'"min_pairs": 2}',
            "/min_pairs",
        ),
        # The same name written with an escape, and a repeat inside the 17th feature's properties.
        (b'{"samples": {"x": [0, 1, 2], "values": [1, 2, 3]}, "min_pairs": 1, "min_\\u0070airs": 2}', "/min_pairs"),
        (
            b'{"samples": {"geojson": {"type": "FeatureCollection", "features": ['
            + b", ".join(
                b'{"type": "Feature", "geometry": {"type": "Point", "coordinates": [%d, %d]}, "properties": {"v": 1%s}}'
                % (i, i % 3, b', "v": 2' if i == 17 else b"")
                for i in range(20)
            )
            + b']}, "value_property": "v"}}',
            "/samples/geojson/features/17/properties/v",
        ),
    ],
)
def test_a_member_given_twice_is_refused_by_pointer(client, body, pointer):
    r = client.post(VARIOGRAMS, data=body, content_type="application/json")
    doc = assert_problem(r, 422, "invalid-input", [pointer])
    assert "names a member already given in its object" in doc["detail"]


def test_a_member_given_twice_in_the_request_part_of_a_multipart_body_is_refused(client):
    options = b'{"lags": {"width": 1, "count": 2}, "lags": {"width": 2, "count": 2}}'
    form = {
        "request": (io.BytesIO(options), "request.json", "application/json"),
        "samples": (io.BytesIO(stream({"x": [0.0, 1.0, 2.0], "values": [1.0, 2.0, 3.0]})), "s.arrows", ARROW),
    }
    r = client.post(VARIOGRAMS, data=form, content_type="multipart/form-data")
    assert_problem(r, 422, "invalid-input", ["/lags"])


@pytest.mark.parametrize(
    "body",
    [
        b'{"samples": {"x": [0, 1, 2], "values": [1, 2, 3]}, "lags": {"width": 1, "count": 2}}',
        # Names alike only inside strings, or in different objects, are not repeats.
        b'{"samples": {"x": [0, 1, 2], "values": [1, 2, 3], "ids": ["\\"x\\": 1", "x", "{\\"x\\":2}"]}, '
        b'"lags": {"width": 1, "count": 2}}',
    ],
)
def test_distinct_members_are_read_as_before(client, body):
    r = client.post(VARIOGRAMS, data=body, content_type="application/json")
    assert r.status_code == 200, r.json


def _library_defaults() -> set[str]:
    """Every default message of marshmallow's schemas and fields (the library's own words)."""
    import inspect

    import marshmallow

    texts = set(marshmallow.Schema._default_error_messages.values())
    for _, field_class in inspect.getmembers(marshmallow.fields, inspect.isclass):
        texts |= set(getattr(field_class, "default_error_messages", {}).values())
    return texts


@pytest.mark.parametrize(
    "member, pointer, words",
    [
        ({"lags": {"widht": 1}}, "/lags/widht", "is not a member of this object"),
        ({"bogus": 1}, "/bogus", "is not a member of this object"),
        ({"lags": None}, "/lags", "must not be null"),
        ({"lags": "x"}, "/lags", "must be an object"),
        ({"directions": {}}, "/directions", "must be an array"),
        ({"directions": [3]}, "/directions/0", "must be an object"),
        ({"samples": {"x": [0, 1], "values": [1.0, 2.0], "ids": [1, "a"]}}, "/samples/ids/0", "must be text"),
        ({"samples": 5}, "/samples", "must be an object"),
    ],
)
def test_type_and_member_mistakes_are_told_in_our_words(client, member, pointer, words):
    """Not the validation library's default wording (marshmallow's default_error_messages), which
    would read differently from every other problem of the service."""
    doc = assert_problem(client.post(VARIOGRAMS, json={"samples": columns(), **member}), 422, "invalid-input")
    assert [e["pointer"] for e in doc["errors"]] == [pointer]
    assert doc["errors"][0]["detail"] == words
    assert doc["errors"][0]["detail"] not in _library_defaults()
