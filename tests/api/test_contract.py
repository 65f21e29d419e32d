"""The OpenAPI contract: generated from the schemas, committed, valid 3.1, and obeyed.

Every response of the suite is checked against the committed contract by
``tests/contract_check.py``; the tests here check the contract's own shape.
"""

from __future__ import annotations

from pathlib import Path

import pytest
import yaml
from flask import Flask
from lagwise.api.examples import REQUESTS
from lagwise.api.openapi import as_dict, as_yaml
from lagwise.api.operations import OPERATIONS
from lagwise.core.modelling.families import FAMILIES
from openapi_spec_validator import OpenAPIV31SpecValidator

from tests.conftest import random_columns
from tests.contract_check import TALLY, ContractClient, ContractMismatch

COMMITTED = Path(__file__).resolve().parents[2] / "openapi" / "openapi.yaml"
SPEC = yaml.safe_load(COMMITTED.read_text())
METHODS = ("get", "post")


def _operations():
    for path, item in SPEC["paths"].items():
        for method in METHODS:
            if method in item:
                yield path, method, item[method]


def _schemas(node):
    """Every schema object in the document (depth first)."""
    if isinstance(node, dict):
        yield node
        for value in node.values():
            yield from _schemas(value)
    elif isinstance(node, list):
        for value in node:
            yield from _schemas(value)


def test_committed_contract_is_up_to_date():
    assert COMMITTED.read_text() == as_yaml(), (
        "openapi/openapi.yaml is stale: run `python3 manage.py openapi` and commit it"
    )


def test_contract_is_valid_openapi_3_1():
    assert SPEC["openapi"] == "3.1.0"
    OpenAPIV31SpecValidator(SPEC).validate()


def test_nulls_are_json_schema_2020_12():
    assert not [s for s in _schemas(SPEC) if "nullable" in s]
    # A nullable object is a reference or null, never an empty object beside the reference.
    for s in _schemas(SPEC):
        if "anyOf" in s:
            assert {"type": "null"} in s["anyOf"] and all(b.keys() <= {"$ref", "type"} for b in s["anyOf"]), s


def test_served_contract_matches(client):
    assert client.get("/openapi.json").json == as_dict()
    assert yaml.safe_load(client.get("/openapi.yaml").data) == as_dict()


def test_every_route_of_the_service_is_in_the_contract(app):
    routes = {
        rule.rule.replace("<", "{").replace(">", "}") for rule in app.url_map.iter_rules() if rule.endpoint != "static"
    }
    assert routes == set(SPEC["paths"])


def test_every_response_schema_says_what_is_always_there():
    for name, schema in SPEC["components"]["schemas"].items():
        if name.endswith(("Response", "Schema")) or name in ("Problem", "ProblemKind", "Health"):
            if schema.get("properties"):
                assert schema.get("required"), f"{name} has no required members"


def test_every_operation_declares_its_statuses_security_header_and_example():
    for path, method, op in _operations():
        responses = op["responses"]
        assert "default" in responses and "405" in responses, path
        assert {"$ref": "#/components/parameters/RequestId"} in op["parameters"], path
        assert "X-Request-ID" in responses["200"]["headers"], path
        opened = op.get("security") == []
        assert opened == (path in ("/", "/healthz", "/readyz", "/openapi.json", "/openapi.yaml", "/problems/{kind}"))
        assert opened or "401" in responses, path
        if method == "post":
            assert {"400", "413", "415", "422", "503"} <= responses.keys(), path
            assert "example" in op["requestBody"]["content"]["application/json"], path
        else:
            assert "example" in next(iter(responses["200"]["content"].values())), path
    assert SPEC["components"]["securitySchemes"]["apiKey"] == {
        "type": "http",
        "scheme": "bearer",
        "description": SPEC["components"]["securitySchemes"]["apiKey"]["description"],
    }
    assert SPEC["security"] == [{"apiKey": []}, {}]


def test_limit_exceeded_problem_is_documented():
    problem = SPEC["components"]["schemas"]["Problem"]
    assert {"limit", "allowed", "requested"} <= problem["properties"].keys()
    assert "/problems/limit-exceeded" in problem["properties"]["type"]["enum"]
    examples = SPEC["components"]["responses"]["InvalidInput"]["content"]["application/problem+json"]["examples"]
    assert examples["limit-exceeded"]["value"]["limit"] == "LAGWISE_MAX_SAMPLES"


def test_either_or_inputs_are_one_of():
    schemas = SPEC["components"]["schemas"]
    refs = lambda prop: [b["$ref"].rsplit("/", 1)[1] for b in prop["oneOf"]]  # noqa: E731
    assert refs(schemas["ExperimentalRequest"]["properties"]["samples"]) == [
        "SampleColumns",
        "SampleFeatures",
        "SampleVariableColumns",
        "SampleFeatureVariables",
        "SampleRaster",
    ]
    assert refs(schemas["ExperimentalRequest"]["properties"]["lags"]) == ["LagWidths", "LagEdges", "LagAuto"]
    body = lambda path: SPEC["paths"][path]["post"]["requestBody"]["content"]["application/json"]["schema"]  # noqa: E731
    assert refs(body("/v1/predictions")) == ["PredictionAtTargets", "PredictionOnGrid"]
    assert refs(body("/v1/model-fits")) == ["ModelFitFromSamples", "ModelFitFromExperimental"]
    assert "grid" not in schemas["PredictionAtTargets"]["properties"]
    assert "samples" not in schemas["ModelFitFromExperimental"]["properties"]


def test_structures_are_discriminated_by_family_and_fitted_models_are_request_models():
    schemas = SPEC["components"]["schemas"]
    items = schemas["Model"]["properties"]["structures"]["items"]
    mapping = items["discriminator"]["mapping"]
    assert items["discriminator"]["propertyName"] == "family" and set(mapping) == set(FAMILIES)
    for family, ref in mapping.items():
        form = schemas[ref.rsplit("/", 1)[1]]
        assert form["properties"]["family"]["enum"] == [family] and "family" in form["required"]
    model_ref = {"$ref": "#/components/schemas/Model"}
    joint_ref = {"$ref": "#/components/schemas/JointModel"}
    assert schemas["ModelFitResponse"]["properties"]["model"]["oneOf"] == [model_ref, joint_ref]
    assert schemas["CrossValidationRequest"]["properties"]["model"]["oneOf"] == [model_ref, joint_ref]
    assert schemas["Candidate"]["properties"]["model"]["anyOf"] == [model_ref, {"type": "null"}]


@pytest.mark.parametrize(
    ("union", "forms"),
    [
        ("Kriging", {"ordinary": "OrdinaryKriging", "simple": "SimpleKriging", "universal": "UniversalKriging"}),
        ("Scheme", {"leave_one_out": "LeaveOneOut", "k_fold": "KFold"}),
    ],
)
def test_kriging_and_scheme_are_discriminated_by_type(union, forms):
    """One named union per either/or option, each form requiring its own ``type``; every request that
    takes the option refers to the union (analyses' cross-validation: "auto" or the union)."""
    schemas = SPEC["components"]["schemas"]
    found = schemas[union]
    assert found["discriminator"]["propertyName"] == "type"
    assert found["discriminator"]["mapping"] == {t: f"#/components/schemas/{f}" for t, f in forms.items()}
    assert [b["$ref"].rsplit("/", 1)[1] for b in found["oneOf"]] == list(forms.values())
    for kind, form in forms.items():
        assert schemas[form]["properties"]["type"]["enum"] == [kind] and "type" in schemas[form]["required"]
    ref = {"$ref": f"#/components/schemas/{union}"}
    member = union.lower()
    for request in ("CrossValidationRequest", "PredictionAtTargets", "PredictionOnGrid"):
        if member in schemas[request]["properties"]:
            assert schemas[request]["properties"][member] == ref
    assert ref in schemas["CrossValidationStage"]["properties"][member].get("oneOf", [ref])
    assert "universal" not in schemas["SimpleKriging"]["properties"]["type"]["enum"]
    assert "drift" in schemas["UniversalKriging"]["required"]


def test_names_are_enums():
    schemas = SPEC["components"]["schemas"]
    assert set(schemas["Family"]["properties"]["name"]["enum"]) == set(FAMILIES)
    assert "correlogram" in schemas["ExperimentalRequest"]["properties"]["statistic"]["enum"]
    assert schemas["Health"]["properties"]["status"]["enum"] == ["alive", "ready"]
    assert "no pairs in this class" in schemas["Class"]["properties"]["reason"]["enum"]
    assert 422 in schemas["Problem"]["properties"]["status"]["enum"]


@pytest.mark.parametrize("operation", [op for op in OPERATIONS if op.request is not None], ids=lambda o: o.path)
def test_each_example_is_answered(client, operation):
    r = client.post(operation.path, json=REQUESTS[operation.operation_id])
    assert r.status_code == 200, r.json


def test_a_fitted_model_is_sent_back_as_it_is(client, rng):
    samples = random_columns(rng, n=60)
    fit = client.post("/v1/model-fits", json={"samples": samples, "lags": {"width": 8, "count": 8}, "min_pairs": 5})
    assert fit.status_code == 200
    candidates = fit.json["candidates"]
    assert sum(c["selected"] for c in candidates) == 1
    (selected,) = [c for c in candidates if c["selected"]]
    assert selected["model"] == fit.json["model"]
    for candidate in candidates:
        if candidate["model"] is not None:
            r = client.post("/v1/cross-validations", json={"samples": samples, "model": candidate["model"]})
            assert r.status_code == 200, r.json


def test_the_checker_refuses_what_the_contract_does_not_allow(monkeypatch):
    monkeypatch.setitem(TALLY, "mismatches", TALLY["mismatches"])  # these two are meant; the tally is restored
    impostor = Flask("impostor")
    impostor.add_url_rule("/healthz", "healthz", lambda: {"status": "sleeping"})
    impostor.add_url_rule("/readyz", "readyz", lambda: ({"status": "ready"}, 418))
    client = ContractClient(impostor)
    with pytest.raises(ContractMismatch, match="sleeping"):
        client.get("/healthz")
    with pytest.raises(ContractMismatch):
        client.get("/readyz")
