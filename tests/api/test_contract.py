"""The OpenAPI contract: generated from the schemas, committed, valid, and obeyed by responses."""

from __future__ import annotations

from pathlib import Path

import pytest
import yaml
from lagwise.api.openapi import as_dict, as_yaml
from openapi_schema_validator import OAS30Validator
from openapi_spec_validator import validate

from tests.conftest import random_columns

COMMITTED = Path(__file__).resolve().parents[2] / "openapi" / "openapi.yaml"


def test_committed_contract_is_up_to_date():
    assert COMMITTED.read_text() == as_yaml(), (
        "openapi/openapi.yaml is stale: run `python3 manage.py openapi` and commit it"
    )


def test_contract_is_valid_openapi():
    validate(yaml.safe_load(COMMITTED.read_text()))


def test_served_contract_matches(client):
    assert client.get("/openapi.json").json == as_dict()
    assert yaml.safe_load(client.get("/openapi.yaml").data) == as_dict()


def _response_validator(path, status, media):
    spec = as_dict()
    schema = spec["paths"][path]["post" if path.startswith("/v1") else "get"]["responses"][str(status)]["content"][
        media
    ]["schema"]
    return OAS30Validator({**schema, "components": spec["components"]})


@pytest.mark.parametrize(
    "path, body",
    [
        (
            "/v1/experimental-variograms",
            {"directions": [{"azimuth": 10}], "pairs_for_class": {"class": 0}, "statistic": "correlogram"},
        ),
        ("/v1/experimental-variograms", {"lags": {"auto": "equal_pairs"}}),
        ("/v1/variogram-maps", {"cell_size": 10, "cells": 2}),
        ("/v1/model-fits", {"lags": {"width": 8, "count": 8}, "min_pairs": 5}),
        (
            "/v1/cross-validations",
            {"model": {"nugget": 0.1, "structures": [{"family": "exponential", "partial_sill": 1, "range": 30}]}},
        ),
        (
            "/v1/predictions",
            {
                "model": {"structures": [{"family": "spherical", "partial_sill": 1, "range": 30}]},
                "grid": {"origin": [0, 0], "spacing": [10, 10], "shape": [3, 3]},
                "return_weights": [1],
            },
        ),
        (
            "/v1/predictions",
            {
                "model": {"structures": [{"family": "spherical", "partial_sill": 1, "range": 30}]},
                "targets": {"x": [1, 500], "y": [1, 500]},
                "neighbourhood": {"max_points": 5, "radius": 20},
            },
        ),
    ],
)
def test_responses_obey_the_contract(client, rng, path, body):
    r = client.post(path, json={"samples": random_columns(rng, n=60), **body})
    assert r.status_code == 200
    _response_validator(path, 200, "application/json").validate(r.json)


def test_families_obey_the_contract(client):
    spec = as_dict()
    schema = spec["paths"]["/v1/model-families"]["get"]["responses"]["200"]["content"]["application/json"]["schema"]
    OAS30Validator({**schema, "components": spec["components"]}).validate(client.get("/v1/model-families").json)


def test_problems_obey_the_contract(client):
    r = client.post("/v1/experimental-variograms", json={"samples": {"x": [0], "values": ["a"]}})
    _response_validator("/v1/experimental-variograms", 422, "application/problem+json").validate(r.json)
