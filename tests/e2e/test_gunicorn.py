"""End-to-end tests against real gunicorn on 127.0.0.1."""

from __future__ import annotations

import json
import socket
import subprocess
import sys
import urllib.request
from pathlib import Path
from urllib.parse import urlparse

import pytest

from tests.live import running_service


@pytest.fixture(scope="module")
def url():
    with running_service({"LAGWISE_MAX_BODY_BYTES": "100000"}) as base:
        yield base


def _raw(url: str, request: bytes) -> bytes:
    parts = urlparse(url)
    with socket.create_connection((parts.hostname, parts.port), timeout=10) as s:
        s.sendall(request)
        chunks = []
        while True:
            data = s.recv(65536)
            if not data:
                break
            chunks.append(data)
    return b"".join(chunks)


def test_post_through_gunicorn(url):
    body = json.dumps(
        {"samples": {"x": [0, 1, 2, 3, 4], "values": [1, 3, 2, 5, 4]}, "lags": {"edges": [0.5, 1.5, 2.5]}}
    ).encode()
    request = urllib.request.Request(
        url + "/v1/experimental-variograms", data=body, headers={"Content-Type": "application/json"}
    )
    with urllib.request.urlopen(request) as answer:
        doc = json.load(answer)
    assert [c["value"] for c in doc["directions"][0]["classes"]] == [1.875, 1.5]


def test_oversized_body_with_content_length_is_refused_unread(url):
    head = b"POST /v1/experimental-variograms HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nContent-Length: 50000000\r\nConnection: close\r\n\r\n"
    answer = _raw(url, head + b"{")  # the rest is never sent: the refusal must not wait for it
    assert answer.startswith(b"HTTP/1.1 413") and b"body-too-large" in answer


def test_oversized_chunked_body_is_refused(url):
    chunk = b"[" + b"0," * 30000 + b"0]"
    body = b"".join(b"%x\r\n%s\r\n" % (len(chunk), chunk) for _ in range(3)) + b"0\r\n\r\n"
    head = b"POST /v1/experimental-variograms HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\nTransfer-Encoding: chunked\r\nConnection: close\r\n\r\n"
    answer = _raw(url, head + body)
    assert answer.startswith(b"HTTP/1.1 413")


def test_demo_through_the_sdk(tmp_path: Path):
    # The demo's twelve-analyte batch needs the allowances `manage.py run` gives its service.
    allowances = {"LAGWISE_DEADLINE_SECONDS": "600", "LAGWISE_MAX_ANALYSIS_SECONDS": "600"}
    with running_service(allowances) as url:
        out = subprocess.run(
            [sys.executable, "-m", "lagwise.cli", "demo", "--url", url, "--out", str(tmp_path)],
            capture_output=True,
            text=True,
            timeout=900,
        )
    assert out.returncode == 0, out.stderr
    assert "CAUTION" in out.stdout and "INVENTED" in out.stdout
    report = json.loads((tmp_path / "report.json").read_text())
    assert "Caution" in (tmp_path / "index.html").read_text() or "CAUTION" in out.stdout
    analytes = tmp_path / "figures" / "analytes"
    assert len([p for p in analytes.iterdir() if any(p.glob("*.svg"))]) == 12  # the invented batch
    assert sorted(p.name for p in (tmp_path / "figures").iterdir() if p.is_file()) == [
        "cross_validation.svg",
        "prediction_map.svg",
        "probability_map.svg",
        "standard_deviation_map.svg",
        "variogram.svg",
        "variogram_map.svg",
    ]
    assert report["analysis"]["verdict"]
    # The threshold decision: units by probability class, the simulated share above, the caution.
    (table,) = report["analysis"]["prediction"]["classes"]
    assert table["method"] == "simulation" and sum(r["count"] for r in table["classes"]) == 40
    assert report["analysis"]["prediction"]["simulation"]["above"][0]["threshold"] == 300.0
    assert "below the limit with at least 90 % probability" in out.stdout and "P10" in out.stdout
    assert "local regulation and a qualified professional" in (tmp_path / "index.html").read_text()
    classes = report["omnidirectional_lead"]["directions"][0]["classes"]
    assert len(classes) >= 5 and all(c["pairs"] >= 30 for c in classes)
    along, across = (d["classes"] for d in report["directional_log_lead"]["directions"])
    # The invented contamination is elongated along azimuth 60: shorter-lag semivariance is lower along it.
    assert along[2]["value"] < across[2]["value"]
