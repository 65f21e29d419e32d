"""API keys, CORS, security headers, request ids, the deadline and the metrics listener."""

from __future__ import annotations

import hashlib
import urllib.error
import urllib.request

import pytest
from lagwise.api import create_app
from lagwise.api.settings import Settings

from tests.live import free_port, running_service

KEY = "s3cret-key-for-tests"
DIGEST = hashlib.sha256(KEY.encode()).hexdigest()
BODY = {"samples": {"x": [0, 1, 2, 3], "values": [1, 2, 1, 3]}, "lags": {"width": 1, "count": 3}, "min_pairs": 1}


@pytest.fixture()
def keyed():
    return create_app({"TESTING": True}, settings=Settings(api_key_digests=frozenset({DIGEST}))).test_client()


def test_api_keys(keyed):
    r = keyed.post("/v1/experimental-variograms", json=BODY)
    assert (
        r.status_code == 401
        and r.json["type"] == "/problems/unauthorized"
        and "Bearer" in r.headers["WWW-Authenticate"]
    )
    assert (
        keyed.post("/v1/experimental-variograms", json=BODY, headers={"Authorization": "Bearer wrong"}).status_code
        == 401
    )
    assert (
        keyed.post("/v1/experimental-variograms", json=BODY, headers={"Authorization": f"Bearer {KEY}"}).status_code
        == 200
    )
    assert keyed.get("/healthz").status_code == 200 and keyed.get("/readyz").status_code == 200
    assert keyed.get("/metrics").status_code == 401


def test_digests_from_a_file(tmp_path):
    path = tmp_path / "keys"
    path.write_text(f"# operations team\n{DIGEST}  # first key\n\n")
    assert Settings.from_env({"LAGWISE_API_KEYS_FILE": str(path)}).api_key_digests == frozenset({DIGEST})
    with pytest.raises(ValueError, match="SHA-256"):
        Settings.from_env({"LAGWISE_API_KEYS": "not-a-digest"})


def test_cors_off_by_default_and_on_for_configured_origins(client):
    r = client.post("/v1/experimental-variograms", json=BODY, headers={"Origin": "https://lims.example"})
    assert "Access-Control-Allow-Origin" not in r.headers
    allowed = create_app(
        {"TESTING": True}, settings=Settings(cors_origins=frozenset({"https://lims.example"}))
    ).test_client()
    r = allowed.post("/v1/experimental-variograms", json=BODY, headers={"Origin": "https://lims.example"})
    assert r.headers["Access-Control-Allow-Origin"] == "https://lims.example"
    assert allowed.options("/v1/experimental-variograms", headers={"Origin": "https://lims.example"}).status_code == 204
    other = allowed.post("/v1/experimental-variograms", json=BODY, headers={"Origin": "https://elsewhere.example"})
    assert "Access-Control-Allow-Origin" not in other.headers


def test_security_headers_and_request_ids(client):
    r = client.post("/v1/experimental-variograms", json=BODY, headers={"X-Request-ID": "lims-batch-42"})
    assert r.headers["X-Content-Type-Options"] == "nosniff" and r.headers["Cache-Control"] == "no-store"
    assert r.headers["X-Request-ID"] == "lims-batch-42"
    bad = client.post("/v1/experimental-variograms", json={"samples": {}}, headers={"X-Request-ID": "lims-batch-43"})
    assert bad.json["request_id"] == "lims-batch-43"
    odd = client.get("/healthz", headers={"X-Request-ID": "no spaces <allowed>"})
    assert odd.headers["X-Request-ID"] != "no spaces <allowed>" and len(odd.headers["X-Request-ID"]) == 32


def test_no_tracebacks_leave_the_service(client, monkeypatch):
    import lagwise.api.operations as operations

    def broken(*args, **kwargs):
        raise RuntimeError("internal detail that must not leak")

    monkeypatch.setattr(operations, "run_variogram", broken)
    r = client.post("/v1/experimental-variograms", json=BODY)
    assert r.status_code == 500 and r.json["type"] == "/problems/internal-error"
    assert b"internal detail" not in r.data and b"Traceback" not in r.data


def test_deadline_gives_a_clear_503():
    app = create_app({"TESTING": True}, settings=Settings(deadline_seconds=1e-9))
    r = app.test_client().post("/v1/experimental-variograms", json=BODY)
    assert r.status_code == 503 and r.json["type"] == "/problems/deadline-exceeded"


def test_metrics_on_a_separate_listener():
    port = free_port()
    with running_service({"LAGWISE_METRICS_BIND": f"127.0.0.1:{port}"}, workers=1) as url:
        with pytest.raises(urllib.error.HTTPError) as info:
            urllib.request.urlopen(url + "/metrics", timeout=5)
        assert info.value.code == 404
        info.value.close()
        with urllib.request.urlopen(url + "/readyz", timeout=5):
            pass
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/metrics", timeout=5) as answer:
            text = answer.read().decode()
    # (/healthz is answered by the front, before any worker: it is not counted in the workers' metrics.)
    assert 'lagwise_requests_total{endpoint="/readyz",method="GET",status="200"}' in text
