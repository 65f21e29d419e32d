"""Load and faults: two gunicorn instances behind nginx on 127.0.0.1, clients through the SDK.

Quick versions run by default (about a minute in all); the long ones (60 s of load, a worker
killed every 10 s, an instance stopped, a reload) are marked slow:
``python3 manage.py test-slow -k load_and_faults``.
"""

from __future__ import annotations

import os
import re
import signal
import sys
import threading
import time
import urllib.request
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "deploy"))

from cluster import Cluster  # noqa: E402

from .workload import run  # noqa: E402

pytestmark = pytest.mark.skipif(
    not any(os.path.exists(p) for p in ("/usr/sbin/nginx", "/usr/bin/nginx")), reason="needs Debian's nginx"
)


def _children(pid: int) -> list[int]:
    children = Path(f"/proc/{pid}/task/{pid}/children")
    return [int(p) for p in children.read_text().split()] if children.exists() else []


def _workers(instance_pid: int) -> list[int]:
    """The gunicorn workers of one instance (``lagwise serve`` -> gunicorn master -> workers)."""
    return [worker for master in _children(instance_pid) for worker in _children(master)]


def _counted(url: str) -> float:
    """Requests to computing endpoints that one instance counted in /metrics."""
    with urllib.request.urlopen(url + "/metrics", timeout=5) as answer:
        text = answer.read().decode()
    pattern = re.compile(
        r'^lagwise_requests_total\{endpoint="/v1/[^"]+",method="POST",status="200"\} ([0-9.e+]+)$', re.M
    )
    return sum(float(v) for v in pattern.findall(text))


def _load(seconds: float, report):
    with Cluster(instances=1) as one:
        single = run(one.url, seconds)
    with Cluster(instances=2) as two:
        double = run(two.url, seconds)
        served = sum(_counted(f"http://127.0.0.1:{port}") for port, _ in two.instances)
    report(single.line("one instance "))
    report(double.line("two instances"))
    report(f"throughput ratio two/one: {double.requests / double.seconds / (single.requests / single.seconds):.2f}")
    assert not single.failures and not double.failures, (single.failures + double.failures)[:5]
    # Every request the clients completed was counted once by the instance that answered it.
    assert served == double.requests
    return single, double


def test_load_quick(capsys):
    single, double = _load(8.0, print)
    assert double.requests > 0 and single.requests > 0


@pytest.mark.slow
def test_load_long():
    _load(60.0, print)


def _faults(seconds: float, kill_every: float, report, stop_instance: bool, reload: bool):
    with Cluster(instances=2, workers=2) as cluster:
        done = threading.Event()
        events = []

        def chaos():
            start = time.monotonic()
            next_kill = kill_every
            hup_at = seconds * 0.3 if reload else None
            term_at = seconds * 0.7 if stop_instance else None
            while not done.wait(0.2):
                elapsed = time.monotonic() - start
                if elapsed >= next_kill:
                    workers = _workers(cluster.instances[0][1].pid)
                    if workers:
                        os.kill(workers[0], signal.SIGKILL)
                        events.append(f"{elapsed:.0f}s kill -9 worker {workers[0]}")
                    next_kill += kill_every
                if hup_at is not None and elapsed >= hup_at:
                    cluster.signal_instance(1, signal.SIGHUP)
                    events.append(f"{elapsed:.0f}s SIGHUP instance 1")
                    hup_at = None
                if term_at is not None and elapsed >= term_at:
                    cluster.signal_instance(1, signal.SIGTERM)
                    events.append(f"{elapsed:.0f}s SIGTERM instance 1")
                    term_at = None

        thread = threading.Thread(target=chaos)
        thread.start()
        try:
            outcome = run(cluster.url, seconds)
        finally:
            done.set()
            thread.join()
    report("; ".join(events))
    report(outcome.line("under faults"))
    assert not outcome.failures, outcome.failures[:5]
    assert outcome.requests > 0


def test_faults_quick():
    _faults(20.0, 6.0, print, stop_instance=True, reload=True)


@pytest.mark.slow
def test_faults_long():
    _faults(60.0, 10.0, print, stop_instance=True, reload=True)
