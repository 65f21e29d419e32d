"""Bounded cost: requests within the limits finish or are refused in time, with bounded worker memory.

The property test runs in process with a small deadline; the replay of the large
findings runs against real gunicorn (marked slow) and measures the worker's memory.
"""

from __future__ import annotations

import json
import time
from pathlib import Path
from urllib.parse import urlparse

import numpy as np
import pytest
import requests
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from lagwise.api import create_app
from lagwise.api.settings import Settings
from lagwise.core.limits import Limits

from tests.live import running_service

DEADLINE = 2.0
MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 1.0, "range": 30.0}]}


@pytest.fixture(scope="module")
def small_deadline_client():
    limits = Limits(max_samples=3000, max_pairs=50_000_000, max_kriging_flops=10**10, max_targets=5000)
    app = create_app({"TESTING": True}, settings=Settings(limits=limits, deadline_seconds=DEADLINE))
    return app.test_client()


def _columns(n, seed, along_y):
    rng = np.random.default_rng(seed)
    t = rng.uniform(0, 100, n)
    o = rng.uniform(0, 0.01 if along_y else 100, n)
    x, y = (o, t) if along_y else (t, o)
    return {"x": x.tolist(), "y": y.tolist(), "values": rng.normal(size=n).tolist()}


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    n=st.integers(20, 3000),
    seed=st.integers(0, 10),
    along_y=st.booleans(),
    operation=st.sampled_from(["variogram", "median", "map", "loo", "predict", "analysis"]),
    max_points=st.integers(1, 500),
)
def test_within_the_limits_a_request_finishes_or_is_refused_in_time(
    small_deadline_client, n, seed, along_y, operation, max_points
):
    samples = _columns(n, seed, along_y)
    if operation in ("variogram", "median"):
        url, body = "/v1/experimental-variograms", {"samples": samples}
        if operation == "median":
            body.update(statistic="semivariance_median", pairs_for_class={"direction": 0, "class": 0, "limit": 10})
    elif operation == "map":
        url, body = "/v1/variogram-maps", {"samples": samples}
    elif operation == "analysis":
        grid = {"origin": [0, 0], "spacing": [2, 2], "shape": [50, 50]}
        url = "/v1/analyses"
        body = {"samples": samples, "prediction": {"grid": grid}, "figures": ["variogram", "prediction_map"]}
    elif operation == "loo":
        url = "/v1/cross-validations"
        body = {"samples": samples, "model": MODEL, "neighbourhood": {"max_points": max_points}}
    else:
        url = "/v1/predictions"
        grid = {"origin": [0, 0], "spacing": [2, 2], "shape": [50, 50]}
        body = {"samples": samples, "model": MODEL, "neighbourhood": {"max_points": max_points}, "grid": grid}
    start = time.perf_counter()
    r = small_deadline_client.post(url, data=json.dumps(body), content_type="application/json")
    elapsed = time.perf_counter() - start
    assert elapsed < DEADLINE + 5.0
    assert r.status_code in (200, 422, 503), r.data[:300]
    if r.status_code != 200:
        assert r.json["type"] in ("/problems/limit-exceeded", "/problems/deadline-exceeded", "/problems/invalid-input")


def _rss_mb(url: str, field: str = "VmRSS") -> float:
    """Largest resident memory (MiB; ``VmHWM`` for the peak so far) of the service's gunicorn processes."""
    port = str(urlparse(url).port)
    total = 0
    for status in Path("/proc").glob("[0-9]*/status"):
        try:
            environ = (status.parent / "environ").read_bytes()
            text = status.read_text()
            cmdline = (status.parent / "cmdline").read_bytes()
        except OSError:
            continue
        if b"gunicorn" in cmdline and f"127.0.0.1:{port}".encode() in environ:
            total = max(total, int(next(line.split()[1] for line in text.splitlines() if line.startswith(field))))
    return total / 1024


@pytest.mark.slow
def test_large_findings_against_gunicorn():
    env = {"LAGWISE_DEADLINE_SECONDS": "30"}
    with running_service(env, workers=1) as url:
        idle = _rss_mb(url)
        rng = np.random.default_rng(2)
        xy = rng.uniform(0, 100, (800, 2))
        loo = {
            "samples": {"x": xy[:, 0].tolist(), "y": xy[:, 1].tolist(), "values": rng.normal(size=800).tolist()},
            "model": MODEL,
            "neighbourhood": {"max_points": 400},
        }
        along_y = {"samples": _columns(200_000, 1, True), "lags": {"width": 1.0, "count": 5}}
        cases = [("/v1/cross-validations", loo), ("/v1/experimental-variograms", along_y)]
        worst_latency, worst_memory = 0.0, 0.0
        for path, body in cases:
            start = time.perf_counter()
            r = requests.post(url + path, json=body, timeout=120)
            latency = time.perf_counter() - start
            worst_latency = max(worst_latency, latency)
            worst_memory = max(worst_memory, _rss_mb(url, "VmHWM") - idle)
            print(path, r.status_code, f"{latency:.1f} s")
            assert r.status_code in (200, 422, 503) and latency < 30 + 5, (path, r.status_code, latency)
            if r.status_code != 200:
                assert r.headers["Content-Type"].startswith("application/problem+json")
        print(f"worst latency {worst_latency:.1f} s, worst worker memory {worst_memory:.0f} MiB above idle")
        assert worst_memory < 300
