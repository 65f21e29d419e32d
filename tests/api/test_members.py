"""The one compiled pass over raw bodies (lagwise.api.members) against exact references.

References: the standard library's ``json.loads`` with ``object_pairs_hook`` (every member
of every object, in order) for repeats; ``bytes.count`` for the value bound the prescan took
before.
"""

from __future__ import annotations

import json
import random

import pytest
from lagwise.api.members import MAX_DEPTH, scan

NAMES = ["a", "b", "é", "\\u00e9", '\\"', ":", "{", "}", "\\\\", "\\n", "\\ud83d\\ude00", "😀", "a" * 70]


def _document(rng: random.Random, depth: int = 0) -> str:
    if depth > 3 or rng.random() < 0.3:
        return rng.choice(["1", '"x:{\\"a\\":1}"', "null", "[1, 2]", '"\\u003a"'])
    if rng.random() < 0.3:
        return "[" + ",".join(_document(rng, depth + 1) for _ in range(rng.randint(0, 3))) + "]"
    members = []
    for _ in range(rng.randint(0, 20 if depth == 0 else 6)):
        name = "".join(rng.choice(NAMES) for _ in range(rng.randint(0, 2)))
        members.append(f'"{name}"' + " " * rng.choice([0, 1, 63, 64, 65]) + f": {_document(rng, depth + 1)}")
    return "{" + ", ".join(members) + "}"


def _has_repeat(text: bytes) -> bool:
    found = []

    def hook(pairs):
        found.append(len({k for k, _ in pairs}) != len(pairs))
        return dict(pairs)

    json.loads(text, object_pairs_hook=hook)
    return any(found)


def test_every_repeat_is_found_and_distinct_names_pass():
    rng = random.Random(11)
    repeats = 0
    for _ in range(3000):
        text = _document(rng).encode()
        exact = _has_repeat(text)
        repeats += exact
        # 64-bit hashes: a collision between distinct names of one object is not expected here.
        assert scan(text).maybe_repeated == exact, text
    assert 500 < repeats < 2500  # both kinds were drawn


@pytest.mark.parametrize(
    "text, repeated",
    [
        (b'{"a": 1, "a": 2}', True),
        (b'{"a": 1, "b": {"a": 2}}', False),
        (b'{"ab": 1, "a\\u0062": 2}', True),
        (b'{"\\ud83d\\ude00": 1, "\xf0\x9f\x98\x80": 2}', True),
        (b'{"k": "\\"k\\": 1, \\"k\\": 2"}', False),
        (b'[{"x": [1, {"y": 1}], "y": 2}]', False),
        (b'{"a"\n  :1, "b":2, "a"\t:3}', True),
    ],
)
def test_repeats_are_read_through_escapes_and_whitespace(text, repeated):
    assert scan(text).maybe_repeated is repeated


@pytest.mark.parametrize(
    "text",
    [b"}}}{{", b'"unterminated', b'{"a\\', b"::::", b'{"a":' * (MAX_DEPTH + 5), b"[" * 5000, b"\\" * 200, b""],
)
def test_a_body_that_is_not_json_is_read_safely_and_counted_as_before(text):
    result = scan(text)
    assert result.values == text.count(b",") + text.count(b"[") + text.count(b"{") + 1
    if text.startswith(b'{"a":' * 4):
        assert result.maybe_repeated  # past the depth orjson allows: the exact parse decides


def test_the_value_bound_is_the_prescans_count():
    rng = random.Random(12)
    for _ in range(200):
        text = _document(rng).encode() * rng.randint(1, 5)
        assert scan(text).values == text.count(b",") + text.count(b"[") + text.count(b"{") + 1
