"""Problem documents written by the front (lagwise.serving.answers): the same members as the service's."""

import json

import pytest
from lagwise.serving import answers


@pytest.mark.parametrize("unknown", [None, ""])
def test_instance_is_left_out_when_the_path_is_unknown(unknown):
    status, headers, body = answers.problem("overloaded", "full", instance=unknown, request_id="r-1")
    document = json.loads(body)
    assert status == 503 and "instance" not in document
    assert document == {
        "type": "/problems/overloaded",
        "title": document["title"],
        "status": 503,
        "detail": "full",
        "request_id": "r-1",
    }
    assert (b"content-type", b"application/problem+json") in headers


def test_instance_is_the_request_path_when_known():
    _, _, body = answers.problem("request-timeout", "late", instance="/v1/analyses", request_id="r-2")
    assert json.loads(body)["instance"] == "/v1/analyses"


@pytest.mark.parametrize(
    "accept, produced, expected",
    [
        (None, ("application/json",), True),
        ("", ("application/json",), False),
        ("application/problem+json", ("application/json",), False),
        ("application/json;q=0, */*", ("application/json",), False),  # the specific range wins (RFC 9110 12.5.1)
        ("application/json;q=0, */*", ("application/json", "application/vnd.apache.arrow.stream"), True),
        ("TEXT/Plain;version=0.0.4", ("text/plain",), True),
        ("text/*;q=0.1", ("text/html",), True),
        ("text/*;q=abc", ("text/html",), False),
        ("image/png, application/xml", ("application/yaml",), False),
        ("*/*;q=0.01", ("application/yaml",), True),
    ],
)
def test_accept_matching_weighs_the_most_specific_range(accept, produced, expected):
    assert answers.accepts(accept, produced) is expected
