"""A catalogue of hostile input against real gunicorn: each gets its status and pointer, fast,
and the workers' memory does not grow."""

from __future__ import annotations

import json
import socket
import time
from pathlib import Path
from urllib.parse import urlparse

import pytest

from tests.live import running_service

URL = "/v1/experimental-variograms"


@pytest.fixture(scope="module")
def service():
    with running_service({"LAGWISE_MAX_BODY_BYTES": "2000000", "LAGWISE_MAX_SAMPLES": "1000"}, workers=1) as url:
        yield url


def _send(url: str, raw: bytes, timeout: float = 20.0) -> tuple[int, dict, float]:
    parts = urlparse(url)
    start = time.perf_counter()
    with socket.create_connection((parts.hostname, parts.port), timeout=timeout) as s:
        s.sendall(raw)
        data = b""
        while True:
            chunk = s.recv(65536)
            if not chunk:
                break
            data += chunk
    head, _, body = data.partition(b"\r\n\r\n")
    status = int(head.split()[1])
    try:
        document = json.loads(body)
    except ValueError:
        document = {}
    return status, document, time.perf_counter() - start


def _post(url: str, body: bytes, content_type: str = "application/json", extra: bytes = b"") -> tuple[int, dict, float]:
    head = f"POST {URL} HTTP/1.1\r\nHost: x\r\nContent-Type: {content_type}\r\nContent-Length: {len(body)}\r\nConnection: close\r\n".encode()
    return _send(url, head + extra + b"\r\n" + body)


def _worker_rss_kb(url: str) -> int:
    port = urlparse(url).port
    total = 0
    for status in Path("/proc").glob("[0-9]*/status"):
        try:
            text = status.read_text()
            cmdline = (status.parent / "cmdline").read_bytes()
        except OSError:
            continue
        if b"gunicorn" in cmdline and b"lagwise" in cmdline and "PPid" in text:
            environ = (status.parent / "environ").read_bytes() if (status.parent / "environ").exists() else b""
            if f"127.0.0.1:{port}".encode() in environ:
                total += int(next(line.split()[1] for line in text.splitlines() if line.startswith("VmRSS")))
    return total


CATALOGUE = [
    ("nan literal", b'{"samples": {"x": [0, 1], "values": [1, NaN]}}', "application/json", 400, None),
    ("infinity literal", b'{"samples": {"x": [0, 1], "values": [1, Infinity]}}', "application/json", 400, None),
    (
        "overflowing number",
        b'{"samples": {"x": [0, 1, 2], "values": [1, 2, 1e400]}}',
        "application/json",
        422,
        "/samples/values/2",
    ),
    ("deep nesting", b"[" * 200_000 + b"]" * 200_000, "application/json", 400, None),
    ("invalid utf-8", b'{"samples": "\xff\xfe"}', "application/json", 400, None),
    ("wrong media type", b"x,y,value\n0,0,1\n", "text/csv", 415, None),
    (
        "unknown field",
        b'{"samples": {"x": [0, 1], "values": [1, 2]}, "drop_table": true}',
        "application/json",
        422,
        "/drop_table",
    ),
    ("not an object", b'"just a string"', "application/json", 422, ""),
    (
        "text in numbers",
        b'{"samples": {"x": [0, 1, 2], "values": [1, "2", 3]}}',
        "application/json",
        422,
        "/samples/values/1",
    ),
]


@pytest.mark.parametrize("name, body, content_type, status, pointer", CATALOGUE, ids=[c[0] for c in CATALOGUE])
def test_catalogue(service, name, body, content_type, status, pointer):
    got, document, seconds = _post(service, body, content_type)
    assert got == status, document
    assert document["status"] == status and document["type"].startswith("/problems/") and document["request_id"]
    if pointer is not None:
        assert document["errors"][0]["pointer"] == pointer
    assert seconds < 5.0


def test_oversized_bodies_are_refused_fast_without_growing_memory(service):
    before = _worker_rss_kb(service)
    assert before > 50_000  # found the master and worker of this instance
    head = f"POST {URL} HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nContent-Length: {500_000_000}\r\nConnection: close\r\n\r\n".encode()
    status, document, seconds = _send(service, head + b'{"samples": ')
    assert status == 413 and document["type"] == "/problems/body-too-large" and seconds < 2.0
    chunk = b"[" + b"1," * 100_000 + b"1]"
    chunked = b"".join(b"%x\r\n%s\r\n" % (len(chunk), chunk) for _ in range(20)) + b"0\r\n\r\n"
    head = f"POST {URL} HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nTransfer-Encoding: chunked\r\nConnection: close\r\n\r\n".encode()
    status, document, seconds = _send(service, head + chunked)
    assert status == 413 and seconds < 5.0
    after = _worker_rss_kb(service)
    assert after - before < 50_000, f"worker RSS grew by {after - before} kB"


def test_sample_limit_refused_before_any_computation(service):
    n = 200_000
    body = json.dumps({"samples": {"x": list(range(n)), "values": [1.0] * n}}).encode()
    status, document, seconds = _post(service, body)
    assert status == 413  # 2.7 MB body over the 2 MB body limit: refused before parsing
    n = 1500
    body = json.dumps({"samples": {"x": list(range(n)), "values": [1.0] * n}}).encode()
    status, document, seconds = _post(service, body)
    assert status == 422 and document["limit"] == "LAGWISE_MAX_SAMPLES" and seconds < 2.0
