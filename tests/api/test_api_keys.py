"""With API keys configured, the page, the contract and the problem descriptions stay open;
everything that computes (and the metrics) needs a key."""

from __future__ import annotations

import hashlib

import pytest
import yaml
from lagwise.api import create_app
from lagwise.api.examples import REQUESTS
from lagwise.api.operations import OPERATIONS
from lagwise.api.settings import Settings

from tests.api.test_contract import SPEC

KEY = "a-key-for-the-tests"
OPEN = ("/", "/openapi.json", "/openapi.yaml", "/problems/limit-exceeded", "/healthz", "/readyz")


@pytest.fixture(scope="module")
def keyed():
    digest = hashlib.sha256(KEY.encode()).hexdigest()
    return create_app({"TESTING": True}, settings=Settings(api_key_digests=frozenset({digest})))


@pytest.mark.parametrize("path", OPEN)
def test_open_paths_answer_without_a_key(keyed, path):
    assert keyed.test_client().get(path).status_code == 200


def test_the_page_can_fetch_its_contract_without_a_key(keyed):
    client = keyed.test_client()
    assert yaml.safe_load(client.get("/openapi.yaml").data)["paths"].keys() == SPEC["paths"].keys()
    assert client.get("/problems/no-such-kind").status_code == 404


@pytest.mark.parametrize("operation", OPERATIONS, ids=lambda o: f"{o.method} {o.path}")
def test_computing_paths_need_a_key(keyed, operation):
    client = keyed.test_client()
    call = client.post if operation.method == "POST" else client.get
    body = {"json": REQUESTS[operation.operation_id]} if operation.request is not None else {}
    if operation.path in OPEN:
        assert call(operation.path, **body).status_code == 200
        return
    refused = call(operation.path, **body)
    assert refused.status_code == 401 and refused.json["type"] == "/problems/unauthorized"
    wrong = call(operation.path, headers={"Authorization": "Bearer not-the-key"}, **body)
    assert wrong.status_code == 401
    allowed = call(operation.path, headers={"Authorization": f"Bearer {KEY}"}, **body)
    assert allowed.status_code == 200


def test_metrics_need_a_key(keyed):
    client = keyed.test_client()
    assert client.get("/metrics").status_code == 401
    assert client.get("/metrics", headers={"Authorization": f"Bearer {KEY}"}).status_code == 200


def test_the_contract_marks_exactly_the_open_paths():
    opened = {path for path, item in SPEC["paths"].items() if item.get("get", item.get("post")).get("security") == []}
    assert opened == {"/", "/openapi.json", "/openapi.yaml", "/problems/{kind}", "/healthz", "/readyz"}
