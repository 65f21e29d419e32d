"""gzip request bodies (Content-Encoding: gzip) through the Flask test client.

References: Python's ``gzip.compress`` for the members and RFC 1952 §2.2 (a gzip file is a series
of members; decompressed, their contents are joined), the same request sent uncompressed for the
answer.
"""

from __future__ import annotations

import gzip
import json

from lagwise.api import create_app
from lagwise.api.settings import Settings

URL = "/v1/experimental-variograms"
BODY = {
    "samples": {"x": [0, 1, 2, 3, 4, 5], "values": [1.0, 2.0, 4.0, 3.0, 5.0, 4.0]},
    "lags": {"width": 1, "count": 3},
}


def _post(client, data: bytes):
    return client.post(URL, data=data, headers={"Content-Encoding": "gzip", "Content-Type": "application/json"})


def _classes(response) -> list:
    return [c["value"] for c in response.json["directions"][0]["classes"]]


def test_a_body_of_several_members_is_their_contents_joined(client):
    plain = json.dumps(BODY).encode()
    expected = client.post(URL, json=BODY)
    cut = len(plain) // 3
    members = gzip.compress(plain[:cut]) + gzip.compress(plain[cut : 2 * cut]) + gzip.compress(plain[2 * cut :])
    for data in (gzip.compress(plain), members):
        r = _post(client, data)
        assert r.status_code == 200, r.json
        assert _classes(r) == _classes(expected)


def test_what_follows_a_member_must_be_a_whole_member(client):
    plain = json.dumps(BODY).encode()
    for tail, words in ((b"not gzip at all", "no gzip member"), (gzip.compress(plain)[:-9], "truncated")):
        r = _post(client, gzip.compress(plain) + tail)
        assert r.status_code == 400 and r.json["type"] == "/problems/malformed-request"
        assert words in r.json["detail"]


def test_members_together_count_against_the_body_limit():
    client = create_app({"TESTING": True}, settings=Settings(max_body_bytes=4096)).test_client()
    padding = gzip.compress(b" " * 3000)  # each member alone within the limit, together over it
    r = _post(client, gzip.compress(b"{") + padding + padding + gzip.compress(b"}"))
    assert r.status_code == 413 and r.json["type"] == "/problems/body-too-large"
