"""Retry behaviour of the SDK against a scripted HTTP server on 127.0.0.1."""

from __future__ import annotations

import json
import threading
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer

import pytest
from lagwise_client import Lagwise, UnavailableError
from lagwise_client.retry import RetryPolicy, parse_retry_after


class Scripted:
    """Serve a fixed list of (status, headers) answers, then 200."""

    def __init__(self, answers):
        self.answers = list(answers)
        self.seen_ids = []
        owner = self

        class Handler(BaseHTTPRequestHandler):
            def log_message(self, *args):
                pass

            def do_GET(self):
                owner.seen_ids.append(self.headers.get("X-Request-ID"))
                status, headers = owner.answers.pop(0) if owner.answers else (200, {})
                body = json.dumps(
                    {"status": "alive"}
                    if status == 200
                    else {"type": "/problems/not-ready", "status": status, "detail": "busy"}
                ).encode()
                self.send_response(status)
                for k, v in headers.items():
                    self.send_header(k, v)
                self.send_header("Content-Type", "application/json")
                self.send_header("Content-Length", str(len(body)))
                self.end_headers()
                self.wfile.write(body)

        self.server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self.thread = threading.Thread(target=self.server.serve_forever, daemon=True)

    def __enter__(self):
        self.thread.start()
        return f"http://127.0.0.1:{self.server.server_address[1]}"

    def __exit__(self, *exc):
        self.server.shutdown()
        self.server.server_close()


def test_retries_503_then_succeeds_honouring_retry_after():
    slept = []
    scripted = Scripted([(503, {"Retry-After": "2"}), (502, {}), (429, {"Retry-After": "1"})])
    with scripted as url:
        client = Lagwise(url, retries=RetryPolicy(retries=3, sleep=slept.append, random=lambda: 0.0))
        assert client.health() == {"status": "alive"}
    assert slept == [2.0, 0.5, 1.0]
    assert len(set(scripted.seen_ids)) == 1  # one request id across retries


def test_gives_up_with_unavailable_error():
    with Scripted([(503, {})] * 5) as url:
        client = Lagwise(url, retries=RetryPolicy(retries=2, sleep=lambda s: None))
        with pytest.raises(UnavailableError) as info:
            client.health()
    assert info.value.status == 503 and info.value.detail == "busy"


def test_retry_after_forms():
    assert parse_retry_after("7") == 7.0
    assert parse_retry_after(None) is None and parse_retry_after("soon") is None
    assert parse_retry_after("Wed, 21 Oct 2015 07:28:00 GMT") == 0.0


def test_backoff_is_capped_exponential_with_jitter():
    policy = RetryPolicy(backoff=1.0, cap=5.0, jitter=0.5, random=lambda: 1.0)
    assert [policy.delay(a) for a in range(5)] == [0.5, 1.0, 2.0, 2.5, 2.5]
