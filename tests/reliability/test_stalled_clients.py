"""The standalone ``lagwise serve`` (no nginx in front) against stalled clients, heavy work and killed workers.

Two sync workers; the front receives whole requests before a worker sees them and
answers liveness itself, so neither stalled uploads nor two long computations delay
``/healthz`` past a second.
"""

from __future__ import annotations

import gzip
import json
import os
import signal
import socket
import threading
import time
import urllib.error
import urllib.request
from pathlib import Path
from urllib.parse import urlparse

import numpy as np
import pytest

from tests.live import running_service

RECEIVE_SECONDS = 4
URL = "/v1/experimental-variograms"
SMALL = {"samples": {"x": [0, 1, 2, 3, 4], "values": [1, 3, 2, 5, 4]}, "lags": {"edges": [0.5, 1.5, 2.5]}}


@pytest.fixture(scope="module")
def service():
    env = {"LAGWISE_RECEIVE_SECONDS": str(RECEIVE_SECONDS), "LAGWISE_MAX_BODY_BYTES": "2000000"}
    with running_service(env, workers=2) as url:
        yield url


def _timed_get(url: str) -> tuple[int, float]:
    start = time.perf_counter()
    with urllib.request.urlopen(url, timeout=30) as answer:
        answer.read()
        return answer.status, time.perf_counter() - start


def _post(url: str, body: bytes, headers: dict | None = None):
    request = urllib.request.Request(
        url + URL, data=body, headers={"Content-Type": "application/json", **(headers or {})}
    )
    try:
        with urllib.request.urlopen(request, timeout=120) as answer:
            return answer.status, answer.headers, json.load(answer)
    except urllib.error.HTTPError as error:
        with error:
            return error.code, error.headers, json.load(error)


HEAVY_SAMPLES = 40_000  # every pair within the classes: 8e8 pairs, seconds of work for the column-sweep kernel


def _heavy_body(n: int, seed: int) -> bytes:
    rng = np.random.default_rng(seed)
    samples = {
        "x": rng.uniform(0, 100, n).round(3).tolist(),
        "y": rng.uniform(0, 100, n).round(3).tolist(),
        "values": rng.normal(size=n).round(3).tolist(),
    }
    return json.dumps({"samples": samples, "lags": {"width": 10, "count": 15}}).encode()


def _stall(port: int) -> socket.socket:
    """Headers and 6 of 1,000 body bytes, then silence."""
    s = socket.create_connection(("127.0.0.1", port), timeout=RECEIVE_SECONDS + 10)
    s.sendall(
        f"POST {URL} HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nContent-Length: 1000\r\n\r\n".encode()
        + b'{"sam'
        + b"p"
    )
    return s


def _read_all(s: socket.socket) -> bytes:
    data = b""
    while chunk := s.recv(65536):
        data += chunk
    return data


def test_two_stalled_uploads_hold_no_worker_and_get_a_408(service):
    port = urlparse(service).port
    stalled = [_stall(port), _stall(port)]
    try:
        time.sleep(0.5)
        health = [_timed_get(service + "/healthz") for _ in range(10)]
        start = time.perf_counter()
        status, _, document = _post(service, json.dumps(SMALL).encode())
        compute_seconds = time.perf_counter() - start
        answers = [_read_all(s) for s in stalled]
    finally:
        for s in stalled:
            s.close()
    assert all(code == 200 for code, _ in health)
    assert max(seconds for _, seconds in health) < 1.0, health
    # Both workers are free: a computation is answered at once, not after the stalled uploads.
    assert status == 200 and compute_seconds < 1.0, compute_seconds
    assert [c["value"] for c in document["directions"][0]["classes"]] == [1.875, 1.5]
    for answer in answers:
        head, _, body = answer.partition(b"\r\n\r\n")
        assert head.startswith(b"HTTP/1.1 408") and b"application/problem+json" in head
        assert json.loads(body)["type"] == "/problems/request-timeout"


def test_liveness_answers_within_a_second_while_both_workers_compute(service):
    results: list[tuple[int, float]] = []

    def compute(seed: int) -> None:
        start = time.perf_counter()
        status, _, _ = _post(service, _heavy_body(HEAVY_SAMPLES, seed))
        results.append((status, time.perf_counter() - start))

    workers = [threading.Thread(target=compute, args=(seed,)) for seed in (1, 2)]
    for t in workers:
        t.start()
    time.sleep(0.5)
    health = []
    # Measure only while both computations are still running (however fast the machine is).
    while all(t.is_alive() for t in workers):
        health.append(_timed_get(service + "/healthz"))
    for t in workers:
        t.join()
    assert [status for status, _ in results] == [200, 200]
    assert len(health) >= 3, f"only {len(health)} liveness probes fell while both computations ran"
    assert all(code == 200 for code, _ in health)
    assert max(seconds for _, seconds in health) < 1.0, max(seconds for _, seconds in health)


def _children(pid: int) -> list[int]:
    path = Path(f"/proc/{pid}/task/{pid}/children")
    return [int(p) for p in path.read_text().split()] if path.exists() else []


def _cpu_seconds(pid: int) -> float:
    """User and system CPU time of a process, seconds (proc(5): fields 14 and 15, in clock ticks)."""
    fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def _instance_pid(port: int) -> int:
    """The ``lagwise serve`` process listening on this port."""
    for cmdline in Path("/proc").glob("[0-9]*/cmdline"):
        try:
            args = cmdline.read_bytes().split(b"\0")
        except OSError:
            continue
        if b"serve" in args and f"127.0.0.1:{port}".encode() in args:
            return int(cmdline.parent.name)
    raise LookupError(port)


def test_a_worker_killed_mid_request_gives_a_problem(service):
    port = urlparse(service).port
    outcome: list = []
    thread = threading.Thread(target=lambda: outcome.append(_post(service, _heavy_body(HEAVY_SAMPLES, 3))))
    workers = [w for master in _children(_instance_pid(port)) for w in _children(master)]
    assert len(workers) == 2
    idle = {w: _cpu_seconds(w) for w in workers}
    thread.start()
    # Kill only once a worker is computing this request (0.5 s of CPU time more than at rest).
    deadline = time.monotonic() + 60
    while max(_cpu_seconds(w) - idle[w] for w in workers) < 0.5 and time.monotonic() < deadline:
        time.sleep(0.1)
    for worker in workers:
        os.kill(worker, signal.SIGKILL)
    thread.join()
    status, headers, document = outcome[0]
    assert status == 502 and headers["content-type"].startswith("application/problem+json")
    assert document["type"] == "/problems/worker-lost" and document["instance"] == URL
    # The master replaces the workers; the instance computes again.
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline:
        code, _, _ = _post(service, json.dumps(SMALL).encode())
        if code == 200:
            break
        time.sleep(0.5)
    assert code == 200


def _raw(url: str, request: bytes) -> tuple[bytes, dict]:
    parts = urlparse(url)
    with socket.create_connection((parts.hostname, parts.port), timeout=20) as s:
        s.sendall(request)
        head, _, body = _read_all(s).partition(b"\r\n\r\n")
    return head, json.loads(body)


@pytest.mark.parametrize(
    ("request_bytes", "status", "kind"),
    [
        (b"NOT HTTP AT ALL\r\n\r\n", 400, "malformed-request"),
        (b"GET /" + b"a" * 9000 + b" HTTP/1.1\r\nHost: x\r\n\r\n", 414, "uri-too-long"),
        (
            b"GET /healthz HTTP/1.1\r\nHost: x\r\n" + b"".join(b"X-%d: v\r\n" % i for i in range(120)) + b"\r\n",
            431,
            "headers-too-large",
        ),
        (b"GET /healthz HTTP/1.1\r\nHost: x\r\nX-Long: " + b"v" * 9000 + b"\r\n\r\n", 431, "headers-too-large"),
    ],
    ids=["400", "414", "431-fields", "431-size"],
)
def test_protocol_errors_are_problem_documents(service, request_bytes, status, kind):
    head, document = _raw(service, request_bytes)
    assert head.startswith(b"HTTP/1.1 %d" % status) and b"application/problem+json" in head
    assert document["type"] == f"/problems/{kind}" and document["status"] == status


def test_method_not_allowed_names_the_allowed_methods(service):
    request = urllib.request.Request(service + "/healthz", data=b"{}", method="POST")
    with pytest.raises(urllib.error.HTTPError) as raised:
        urllib.request.urlopen(request, timeout=10)
    assert raised.value.code == 405
    assert set(raised.value.headers["Allow"].replace(" ", "").split(",")) >= {"GET", "HEAD"}
    with raised.value:
        assert json.load(raised.value)["type"] == "/problems/method-not-allowed"
    request = urllib.request.Request(service + URL, method="GET")
    with pytest.raises(urllib.error.HTTPError) as raised:
        urllib.request.urlopen(request, timeout=10)
    raised.value.close()
    assert raised.value.code == 405 and "POST" in raised.value.headers["Allow"]


def test_gzip_bodies_are_decoded(service):
    plain = json.dumps(SMALL).encode()
    status, _, document = _post(service, gzip.compress(plain), {"Content-Encoding": "gzip"})
    assert status == 200
    assert [c["value"] for c in document["directions"][0]["classes"]] == [1.875, 1.5]


def test_gzip_expanding_past_the_body_limit_is_refused(service):
    # 5 MB of spaces compress to about 5 KB: the decoded size counts against LAGWISE_MAX_BODY_BYTES (2 MB).
    bomb = gzip.compress(b"{" + b" " * 5_000_000 + b"}")
    status, _, document = _post(service, bomb, {"Content-Encoding": "gzip"})
    assert status == 413 and document["type"] == "/problems/body-too-large"


def test_corrupt_gzip_is_a_400_problem(service):
    status, _, document = _post(service, b"\x1f\x8b\x08\x00garbage", {"Content-Encoding": "gzip"})
    assert status == 400 and document["type"] == "/problems/malformed-request"


def test_other_content_codings_are_refused_with_415(service):
    status, headers, document = _post(service, b"xx", {"Content-Encoding": "br"})
    assert status == 415 and document["type"] == "/problems/unsupported-media-type"
    assert headers["Accept-Encoding"] == "gzip"
