"""The front alone, in this process, before a stand-in upstream on a Unix socket.

Each protocol error the front can meet is answered with a problem document: malformed
HTTP (400), a slow request (408), a body over the limit (413), a request line too long
(414), too many or too long header fields (431), an upstream that answers HTML (gunicorn's
own error pages) or closes without answering (a killed worker, 502). The stand-in
upstream echoes what it received, so the tests also see what a worker would get.
"""

from __future__ import annotations

import asyncio
import json
import os
import tempfile
import time

from lagwise.serving.front import Front, FrontSettings

RECEIVE_SECONDS = 1.0
MAX_BODY = 10_000
MAX_ARROW_BODY = 30_000


async def _upstream(reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
    """Stand-in worker: reads one request; answers according to its path."""
    head = await reader.readuntil(b"\r\n\r\n")
    length = 0
    for line in head.split(b"\r\n"):
        if line.lower().startswith(b"content-length:"):
            length = int(line.split(b":", 1)[1])
    body = await reader.readexactly(length)
    target = head.split(b" ", 2)[1]
    if target == b"/html-error":
        page = b"<html><body>Internal Server Error</body></html>"
        writer.write(
            b"HTTP/1.1 500 Internal Server Error\r\nContent-Type: text/html\r\nContent-Length: %d\r\n\r\n" % len(page)
            + page
        )
    elif target == b"/vanish":
        pass  # closes without a word, like a worker killed mid-request
    else:
        echo = json.dumps({"head": head.decode("latin-1"), "body": body.decode("latin-1")}).encode()
        writer.write(
            b"HTTP/1.1 200 OK\r\nContent-Type: application/json\r\nContent-Length: %d\r\n\r\n" % len(echo) + echo
        )
    await writer.drain()
    writer.close()


async def _exchange(raw: bytes, *, pause_after: float = 0.0, rest: bytes = b"") -> tuple[int, dict, bytes, float]:
    """Start the stand-in upstream and the front, send ``raw`` (then ``rest`` after a pause), read the answer."""
    folder = tempfile.mkdtemp(prefix="lagwise-front-test-")
    path = os.path.join(folder, "up.sock")
    upstream = await asyncio.start_unix_server(_upstream, path)
    front = Front(
        FrontSettings(
            upstream=path,
            max_body_bytes=MAX_BODY,
            receive_seconds=RECEIVE_SECONDS,
            max_connections=4,
            max_arrow_bytes=MAX_ARROW_BODY,
        )
    )
    server = await asyncio.start_server(front.handle, "127.0.0.1", 0)
    port = server.sockets[0].getsockname()[1]
    try:
        start = time.perf_counter()
        reader, writer = await asyncio.open_connection("127.0.0.1", port)
        writer.write(raw)
        await writer.drain()
        if pause_after:
            await asyncio.sleep(pause_after)
            try:
                writer.write(rest)
                await writer.drain()
            except ConnectionError:
                pass
        data = await asyncio.wait_for(reader.read(-1), 10)
        seconds = time.perf_counter() - start
        writer.close()
        await writer.wait_closed()
        await front.drained(5)
    finally:
        server.close()
        upstream.close()
        os.unlink(path)
        os.rmdir(folder)
    head, _, body = data.partition(b"\r\n\r\n")
    status = int(head.split()[1])
    document = json.loads(body) if body else {}
    return status, document, head, seconds


def exchange(raw: bytes, **kwargs) -> tuple[int, dict, bytes, float]:
    return asyncio.run(_exchange(raw, **kwargs))


def _problem(document: dict, kind: str, status: int) -> None:
    assert document["type"] == f"/problems/{kind}" and document["status"] == status, document
    assert document["title"] and document["detail"] and document["request_id"]


def test_a_whole_request_is_forwarded_with_its_length_and_request_id():
    body = b'{"a": 1}'
    chunked = b"%x\r\n%s\r\n0\r\n\r\n" % (len(body), body)
    raw = (
        b"POST /v1/x?q=1 HTTP/1.1\r\nHost: h\r\nContent-Type: application/json\r\nTransfer-Encoding: chunked\r\n"
        b"X-Request-ID: abc-123\r\nConnection: close\r\n\r\n" + chunked
    )
    status, document, head, _ = exchange(raw)
    assert status == 200
    forwarded = document["head"].lower()
    assert forwarded.startswith("post /v1/x?q=1 http/1.1")
    assert "content-length: 8" in forwarded and "transfer-encoding" not in forwarded
    assert "x-request-id: abc-123" in forwarded
    assert document["body"] == body.decode()


def test_malformed_request_line_is_a_400_problem():
    status, document, head, _ = exchange(b"GARBAGE\r\n\r\n")
    assert status == 400 and b"application/problem+json" in head
    _problem(document, "malformed-request", 400)


def test_request_line_too_long_is_a_414_problem():
    status, document, _, _ = exchange(b"GET /" + b"a" * 9000 + b" HTTP/1.1\r\nHost: h\r\n\r\n")
    _problem(document, "uri-too-long", 414)


def test_too_many_header_fields_is_a_431_problem():
    fields = b"".join(b"X-F%d: v\r\n" % i for i in range(150))
    status, document, _, _ = exchange(b"GET /v1/x HTTP/1.1\r\nHost: h\r\n" + fields + b"\r\n")
    _problem(document, "headers-too-large", 431)


def test_a_header_field_too_long_is_a_431_problem():
    status, document, _, _ = exchange(b"GET /v1/x HTTP/1.1\r\nHost: h\r\nX-Big: " + b"v" * 9000 + b"\r\n\r\n")
    _problem(document, "headers-too-large", 431)


def test_a_head_over_64_kib_is_a_431_problem():
    fields = b"".join(b"X-F%d: %s\r\n" % (i, b"v" * 8000) for i in range(9))
    status, document, _, _ = exchange(b"GET /v1/x HTTP/1.1\r\nHost: h\r\n" + fields + b"\r\n")
    _problem(document, "headers-too-large", 431)


def test_declared_body_over_the_limit_is_refused_before_it_arrives():
    raw = b"POST /v1/x HTTP/1.1\r\nHost: h\r\nContent-Type: application/json\r\nContent-Length: 50000000\r\n\r\n{"
    status, document, _, seconds = exchange(raw)
    _problem(document, "body-too-large", 413)
    assert seconds < RECEIVE_SECONDS  # answered from the declared length, not after waiting


def test_chunked_body_over_the_limit_is_refused():
    chunk = b"x" * 4000
    chunked = b"".join(b"%x\r\n%s\r\n" % (len(chunk), chunk) for _ in range(4)) + b"0\r\n\r\n"
    raw = b"POST /v1/x HTTP/1.1\r\nHost: h\r\nTransfer-Encoding: chunked\r\n\r\n" + chunked
    status, document, _, _ = exchange(raw)
    _problem(document, "body-too-large", 413)


def test_a_multipart_body_has_the_arrow_limit():
    body = b"x" * 20_000  # over LAGWISE_MAX_BODY_BYTES, under LAGWISE_MAX_ARROW_BYTES
    head = (
        b"POST /v1/x HTTP/1.1\r\nHost: h\r\nContent-Type: multipart/form-data; boundary=b\r\nContent-Length: %d\r\n\r\n"
    )
    status, document, _, _ = exchange(head % len(body) + body)
    assert status == 200 and len(document["body"]) == len(body)
    status, document, _, _ = exchange(
        b"POST /v1/x HTTP/1.1\r\nHost: h\r\nContent-Type: application/json\r\n"
        b"Content-Length: %d\r\n\r\n" % len(body) + body
    )
    _problem(document, "body-too-large", 413)
    assert "LAGWISE_MAX_BODY_BYTES" in document["detail"]
    status, document, _, _ = exchange(head % 40_000 + b"x" * 100)
    _problem(document, "body-too-large", 413)
    assert "LAGWISE_MAX_ARROW_BYTES" in document["detail"]


def test_a_stalled_body_gets_a_408_problem_at_the_receive_deadline():
    raw = b'POST /v1/x HTTP/1.1\r\nHost: h\r\nContent-Type: application/json\r\nContent-Length: 1000\r\n\r\n{"samp'
    status, document, _, seconds = exchange(raw)
    _problem(document, "request-timeout", 408)
    assert RECEIVE_SECONDS * 0.9 < seconds < RECEIVE_SECONDS + 3


def test_a_slow_but_timely_body_is_forwarded():
    raw = b"POST /v1/x HTTP/1.1\r\nHost: h\r\nContent-Length: 6\r\nConnection: close\r\n\r\nabc"
    status, document, _, _ = exchange(raw, pause_after=RECEIVE_SECONDS / 3, rest=b"def")
    assert status == 200 and document["body"] == "abcdef"


def test_an_html_error_from_upstream_becomes_a_problem():
    status, document, head, _ = exchange(b"GET /html-error HTTP/1.1\r\nHost: h\r\nConnection: close\r\n\r\n")
    assert status == 500 and b"application/problem+json" in head and b"text/html" not in head
    _problem(document, "internal-error", 500)


def test_an_upstream_that_closes_without_answering_gives_a_502_problem():
    status, document, _, _ = exchange(b"POST /vanish HTTP/1.1\r\nHost: h\r\nContent-Length: 2\r\n\r\n{}")
    _problem(document, "worker-lost", 502)
    assert document["instance"] == "/vanish"


def test_liveness_is_answered_by_the_front_itself():
    status, document, head, _ = exchange(b"GET /healthz HTTP/1.1\r\nHost: h\r\nConnection: close\r\n\r\n")
    assert status == 200 and document == {"status": "alive"} and b"x-request-id" in head.lower()


def test_liveness_with_an_accept_refusing_json_goes_to_a_worker():
    # The worker's /healthz refuses such an Accept (406) like every path; the stand-in echoes it.
    status, document, _, _ = exchange(
        b"GET /healthz HTTP/1.1\r\nHost: h\r\nAccept: application/problem+json\r\nConnection: close\r\n\r\n"
    )
    assert status == 200 and "accept: application/problem+json" in document["head"].lower()
    status, document, _, _ = exchange(
        b"GET /healthz HTTP/1.1\r\nHost: h\r\nAccept: text/html\r\nAccept: application/*;q=0.5\r\n"
        b"Connection: close\r\n\r\n"
    )
    assert status == 200 and document == {"status": "alive"}


async def _polls_before_the_workers_start(polls: int) -> list[dict]:
    """``polls`` readiness requests while no worker listens, then one once a stand-in listens."""
    folder = tempfile.mkdtemp(prefix="lagwise-front-test-")
    path = os.path.join(folder, "up.sock")
    front = Front(
        FrontSettings(upstream=path, max_body_bytes=MAX_BODY, receive_seconds=RECEIVE_SECONDS, max_connections=4)
    )
    server = await asyncio.start_server(front.handle, "127.0.0.1", 0)
    port = server.sockets[0].getsockname()[1]
    statuses = []

    async def poll() -> None:
        reader, writer = await asyncio.open_connection("127.0.0.1", port)
        writer.write(b"GET /readyz HTTP/1.1\r\nHost: h\r\nConnection: close\r\n\r\n")
        await writer.drain()
        statuses.append(int((await asyncio.wait_for(reader.read(-1), 10)).split()[1]))
        writer.close()

    try:
        for _ in range(polls):
            await poll()
        upstream = await asyncio.start_unix_server(_upstream, path)
        await poll()
        await front.drained(5)
        upstream.close()
    finally:
        server.close()
        os.unlink(path)
        os.rmdir(folder)
    return statuses


def _front_lines(captured: str) -> list[dict]:
    lines = [json.loads(line) for line in captured.splitlines() if line.startswith("{")]
    return [line for line in lines if line.get("logger") == "lagwise.front"]


def test_startup_polls_refused_not_ready_log_once_at_info_then_a_count(capsys, monkeypatch):
    monkeypatch.delenv("LAGWISE_LOG_LEVEL", raising=False)
    assert asyncio.run(_polls_before_the_workers_start(5)) == [503] * 5 + [200]
    lines = _front_lines(capsys.readouterr().err)
    assert [(line["message"], line["level"]) for line in lines] == [("refused", "info"), ("workers reached", "info")]
    assert lines[0]["problem"] == "not-ready" and "debug" in lines[0]["note"]
    assert lines[1]["refused_not_ready"] == 5


def test_every_not_ready_refusal_is_logged_at_debug_level(capsys, monkeypatch):
    monkeypatch.setenv("LAGWISE_LOG_LEVEL", "debug")
    asyncio.run(_polls_before_the_workers_start(3))
    lines = _front_lines(capsys.readouterr().err)
    assert [line["level"] for line in lines if line["message"] == "refused"] == ["info", "debug", "debug"]
