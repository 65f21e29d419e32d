"""API tests of GET /v1/model-families and of model fields built from the family table."""

from __future__ import annotations

import pytest
from lagwise.api.schemas import STRUCTURE_FORMS, AnisotropyInput
from lagwise.core.modelling.families import (
    ANISOTROPY,
    FAMILIES,
    FIT_SCALES,
    family_catalogue,
    model_parameter_catalogue,
    structure_parameters,
)
from marshmallow import validate


def test_catalogue_is_the_table(client):
    doc = client.get("/v1/model-families").json
    assert doc["families"] == family_catalogue()
    assert doc["model_parameters"] == model_parameter_catalogue()
    assert doc["fit_scales"] == FIT_SCALES


def test_request_fields_carry_the_documented_bounds():
    assert set(STRUCTURE_FORMS) == set(FAMILIES)
    for name, family in FAMILIES.items():
        declared = STRUCTURE_FORMS[name]().fields
        assert set(declared) == {"family", "anisotropy", *(p.name for p in family.parameters)}
        assert declared["family"].validate.comparable == name
        assert all(declared[p.name].required for p in family.parameters)
        for parameter in family.parameters:
            assert structure_parameters()[parameter.name] == parameter
    for parameter in [*structure_parameters().values(), *ANISOTROPY]:
        form = next((f for f in STRUCTURE_FORMS.values() if parameter.name in f().fields), AnisotropyInput)
        field = form().fields[parameter.name]
        rule = next(v for v in field.validators if isinstance(v, validate.Range))
        b = parameter.bounds
        assert (rule.min, rule.max, rule.min_inclusive, rule.max_inclusive) == (
            b.minimum,
            b.maximum,
            not b.minimum_exclusive,
            not b.maximum_exclusive,
        )


@pytest.mark.parametrize(
    "structure, pointer",
    [
        ({"family": "matern", "partial_sill": 1, "range": 20, "smoothness": 25}, "/model/structures/0/smoothness"),
        ({"family": "stable", "partial_sill": 1, "range": 20, "shape": 2.5}, "/model/structures/0/shape"),
        ({"family": "stable", "partial_sill": 1, "range": 20}, "/model/structures/0/shape"),
        ({"family": "power", "exponent": 1.0}, "/model/structures/0/coefficient"),
        ({"family": "spherical", "partial_sill": 1}, "/model/structures/0/range"),
        ({"family": "blob", "partial_sill": 1, "range": 3}, "/model/structures/0/family"),
    ],
)
def test_model_requests_are_checked_against_the_table(client, structure, pointer):
    samples = {"x": [0, 10, 20, 30, 40, 50], "y": [0, 5, 0, 5, 0, 5], "values": [1, 2, 1.5, 3, 2.5, 2]}
    r = client.post(
        "/v1/cross-validations", json={"samples": samples, "model": {"nugget": 0.1, "structures": [structure]}}
    )
    assert r.status_code == 422, r.json
    assert pointer in [e["pointer"] for e in r.json["errors"]]
