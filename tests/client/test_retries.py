"""Retry behaviour of the SDK against a scripted HTTP server on 127.0.0.1."""

from __future__ import annotations

import json
import socket
import threading
import time
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer

import pytest
from lagwise_client import DeadlineError, Lagwise, LagwiseError, TransportError, UnavailableError
from lagwise_client.retry import RetryPolicy, parse_retry_after

DEADLINE = {"type": "/problems/deadline-exceeded", "status": 503, "detail": "ran past 30 s"}
BUSY = {"type": "/problems/not-ready", "detail": "busy"}
ANSWER = {"status": "alive"}


class Scripted:
    """Serve a fixed list of answers, then 200 ``{"status": "alive"}``.

    Each answer is ``(status, headers)``, ``(status, headers, problem)``, or one of
    ``("drop",)`` (close the connection without answering), ``("slow", seconds)`` (answer
    after a pause), ``("stall", seconds)`` (send the headers, pause, then the body).
    """

    def __init__(self, answers):
        self.answers = list(answers)
        self.seen = []  # (method, X-Request-ID) per request
        self.lock = threading.Lock()
        owner = self

        class Handler(BaseHTTPRequestHandler):
            def log_message(self, *args):
                pass

            def _answer(self):
                length = int(self.headers.get("Content-Length") or 0)
                self.rfile.read(length)
                with owner.lock:
                    owner.seen.append((self.command, self.headers.get("X-Request-ID")))
                    answer = owner.answers.pop(0) if owner.answers else (200, {})
                if answer[0] == "drop":
                    self.close_connection = True
                    self.connection.shutdown(socket.SHUT_RDWR)
                    return
                pause_before = answer[1] if answer[0] == "slow" else 0.0
                stall = answer[1] if answer[0] == "stall" else 0.0
                status, headers = (200, {}) if answer[0] in ("slow", "stall") else answer[:2]
                problem = answer[2] if len(answer) > 2 else BUSY
                body = json.dumps(ANSWER if status == 200 else dict(problem, status=status)).encode()
                time.sleep(pause_before)
                try:
                    self.send_response(status)
                    for k, v in headers.items():
                        self.send_header(k, v)
                    self.send_header("Content-Type", "application/json")
                    self.send_header("Content-Length", str(len(body)))
                    self.end_headers()
                    self.wfile.flush()
                    time.sleep(stall)
                    self.wfile.write(body)
                except OSError:
                    pass  # the client gave up first

            do_GET = do_POST = _answer

        self.server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
        self.server.daemon_threads = True
        self.thread = threading.Thread(target=self.server.serve_forever, daemon=True)

    @property
    def methods(self):
        return [method for method, _ in self.seen]

    def __enter__(self):
        self.thread.start()
        return f"http://127.0.0.1:{self.server.server_address[1]}"

    def __exit__(self, *exc):
        self.server.shutdown()
        self.server.server_close()


def policy(slept, **kwargs):
    return RetryPolicy(sleep=slept.append, random=lambda: 0.0, **kwargs)


def test_retries_503_then_succeeds_honouring_retry_after():
    slept = []
    scripted = Scripted([(503, {"Retry-After": "2"}), (502, {}), (429, {"Retry-After": "1"})])
    with scripted as url:
        client = Lagwise(url, retries=policy(slept, retries=3))
        assert client.health() == ANSWER
    assert slept == [2.0, 0.5, 1.0]
    assert len(set(scripted.seen)) == 1  # one request id across retries


def test_gives_up_with_unavailable_error():
    with Scripted([(503, {})] * 5) as url:
        client = Lagwise(url, retries=RetryPolicy(retries=2, sleep=lambda s: None))
        with pytest.raises(UnavailableError) as info:
            client.health()
    assert info.value.status == 503 and info.value.detail == "busy"


def test_deadline_exceeded_is_never_retried():
    slept = []
    scripted = Scripted([(503, {"Retry-After": "1"}, DEADLINE)])
    with scripted as url:
        client = Lagwise(url, retries=policy(slept, retries=5, retry_read_timeouts=True))
        with pytest.raises(DeadlineError) as info:
            client.request("POST", "/v1/predictions", {"samples": {}})
    assert scripted.methods == ["POST"] and slept == []
    assert isinstance(info.value, UnavailableError) and info.value.detail == "ran past 30 s"


def test_other_errors_are_not_retried():
    scripted = Scripted([(500, {}), (422, {})])
    with scripted as url:
        client = Lagwise(url, retries=policy([], retries=3))
        with pytest.raises(LagwiseError) as first:
            client.health()
        with pytest.raises(LagwiseError) as second:
            client.request("POST", "/v1/analyses", {})
    assert (first.value.status, second.value.status) == (500, 422) and len(scripted.seen) == 2


def test_read_timeout_of_a_computation_is_not_resent_by_default():
    scripted = Scripted([("slow", 1.5)])
    with scripted as url:
        client = Lagwise(url, timeout=0.3, retries=policy([], retries=3))
        with pytest.raises(TransportError, match="not resent") as info:
            client.request("POST", "/v1/model-fits", {"samples": {}})
    assert scripted.methods == ["POST"]
    assert "retry_read_timeouts=True" in str(info.value)


def test_body_stalling_after_the_headers_counts_as_a_read_timeout():
    scripted = Scripted([("stall", 1.5)])
    with scripted as url:
        client = Lagwise(url, timeout=0.3, retries=policy([], retries=3))
        with pytest.raises(TransportError, match="not resent"):
            client.request("POST", "/v1/model-fits", {"samples": {}})
    assert scripted.methods == ["POST"]


def test_read_timeouts_are_resent_when_asked():
    slept = []
    scripted = Scripted([("slow", 1.0), ("slow", 1.0)])
    with scripted as url:
        client = Lagwise(url, timeout=0.3, retries=policy(slept, retries=3, retry_read_timeouts=True))
        assert client.request("POST", "/v1/model-fits", {"samples": {}}) == ANSWER
    assert scripted.methods == ["POST"] * 3 and slept == [0.25, 0.5]


def test_read_timeouts_of_reads_are_retried():
    scripted = Scripted([("slow", 1.0)])
    with scripted as url:
        client = Lagwise(url, timeout=0.3, retries=policy([], retries=1))
        assert client.health() == ANSWER
    assert scripted.methods == ["GET", "GET"]


def test_dropped_connections_of_computations_are_retried():
    slept = []
    scripted = Scripted([("drop",), ("drop",)])
    with scripted as url:
        client = Lagwise(url, retries=policy(slept, retries=2))
        assert client.request("POST", "/v1/analyses", {"samples": {}}) == ANSWER
    assert scripted.methods == ["POST"] * 3 and len(slept) == 2


def test_retry_after_forms():
    assert parse_retry_after("7") == 7.0
    assert parse_retry_after(None) is None and parse_retry_after("soon") is None
    assert parse_retry_after("Wed, 21 Oct 2015 07:28:00 GMT") == 0.0


def test_retry_after_is_capped():
    assert RetryPolicy(cap=3.0).delay(0, "120") == 3.0


def test_backoff_is_capped_exponential_with_jitter():
    policy = RetryPolicy(backoff=1.0, cap=5.0, jitter=0.5, random=lambda: 1.0)
    assert [policy.delay(a) for a in range(5)] == [0.5, 1.0, 2.0, 2.5, 2.5]
    # Jitter only shortens: each delay lies in [(1 - jitter) * base, base].
    spread = RetryPolicy(backoff=1.0, cap=5.0, jitter=0.5)
    delays = [spread.delay(2) for _ in range(200)]
    assert 2.0 <= min(delays) and max(delays) <= 4.0 and len(set(delays)) > 100


def test_status_and_failure_decisions():
    default, eager = RetryPolicy(), RetryPolicy(retry_read_timeouts=True)
    assert all(default.retries_status(s, "/problems/not-ready") for s in (429, 502, 503, 504))
    assert not default.retries_status(503, "/problems/deadline-exceeded")
    assert not default.retries_status(500, None) and not default.retries_status(422, "/problems/invalid-input")
    assert not default.retries_failure(read_timeout=True, computing=True)
    assert eager.retries_failure(read_timeout=True, computing=True)
    assert default.retries_failure(read_timeout=True, computing=False)
    assert default.retries_failure(read_timeout=False, computing=True)


def test_policy_refuses_nonsense():
    with pytest.raises(ValueError, match="retries"):
        RetryPolicy(retries=-1)
    with pytest.raises(ValueError, match="jitter"):
        RetryPolicy(jitter=1.5)
