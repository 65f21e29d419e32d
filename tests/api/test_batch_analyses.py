"""POST /v1/analyses with several variables: the whole chain for each, in one response.

Check against an outside reference: each variable's section equals the single-variable
analysis of that variable's measured samples (the same request without the others),
which is itself checked against published formulas elsewhere; the batch is invented
(tests/batch_data.py).
"""

from __future__ import annotations

import json

import pytest
from lagwise.api import create_app
from lagwise.api.settings import Settings

from tests.batch_data import ANALYTES, UNITS, batch

LIGHT = {"fit": {"compare": False}, "cross_validation": {"kriging": {"type": "ordinary"}}}


@pytest.fixture(scope="module")
def patient():
    """Twelve analyses in one request take twelve times one: a longer budget than the default 60 s."""
    return create_app({"TESTING": True}, settings=Settings(deadline_seconds=900.0)).test_client()


def measured(samples: dict, name: str) -> dict:
    column = samples["variables"][name]
    keep = [
        i
        for i, v in enumerate(column)
        if v is not None or samples.get("censored", {}).get(name, [False] * len(column))[i]
    ]
    out = {"x": [samples["x"][i] for i in keep], "y": [samples["y"][i] for i in keep]}
    out["values"] = [column[i] if column[i] is not None else 0.0 for i in keep]
    if name in samples.get("censored", {}):
        out["censored"] = [samples["censored"][name][i] for i in keep]
        out["detection_limits"] = [samples["detection_limits"][name][i] for i in keep]
    return out


def test_twelve_analytes_in_one_call(patient):
    samples = batch()
    # Sent as text: Flask's test client would sort the members of a json= body, and the order is the contract.
    body = json.dumps({"samples": samples, "transform": "log", **LIGHT})
    r = patient.post("/v1/analyses", data=body, content_type="application/json")
    assert r.status_code == 200, r.json
    doc = r.json
    assert [v["name"] for v in doc["variables"]] == list(ANALYTES)
    assert [v["unit"] for v in doc["variables"]] == [UNITS[a] for a in ANALYTES]
    for section in doc["variables"]:
        assert section["verdict"]["level"] in ("no_structure", "weak", "usable", "review")
        assert section["cross_validation"]["statistics"]["count"] == section["summary"]["samples"]
    counts = {v["name"]: v["summary"]["samples"] for v in doc["variables"]}
    assert counts["lead"] == 90 and counts["nitrate"] < 90 and counts["toluene"] < 90
    assert doc["parameters"]["variables"] == list(ANALYTES)


EXPLICIT = {"variogram": {"directions": [{"azimuth": 20.0, "tolerance": 30.0}, {"azimuth": 110.0, "tolerance": 30.0}]}}


@pytest.mark.parametrize("stages", [LIGHT, {}, {**LIGHT, **EXPLICIT}], ids=["light", "compared", "explicit-classes"])
@pytest.mark.parametrize("name", ["zinc", "toluene"])
def test_a_section_equals_the_single_variable_analysis(client, name, stages):
    """The fan of direction classes (automatic, or the caller's) and the anisotropy come from the
    batch's shared pass; the section equals the analysis of the variable alone."""
    samples = batch()
    two = {**samples, "variables": {k: samples["variables"][k] for k in ("lead", name)}}
    two["units"] = {k: samples["units"][k] for k in ("lead", name)}
    if name != "toluene":
        two.pop("censored"), two.pop("detection_limits")
    both = client.post("/v1/analyses", json={"samples": two, "transform": "log", **stages}).json
    alone = client.post(
        "/v1/analyses",
        json={
            "samples": measured(two, name),
            "transform": "log",
            "variable": {"name": name, "unit": UNITS[name]},
            **stages,
        },
    ).json
    section = both["variables"][1]
    assert section["name"] == name
    for key in ("summary", "fit", "verdict", "experimental", "selection", "anisotropy"):
        assert section.get(key) == alone.get(key), key
    assert section["cross_validation"]["statistics"] == alone["cross_validation"]["statistics"]


def test_naming_one_variable_analyses_only_that_one(client):
    samples = batch()
    r = client.post("/v1/analyses", json={"samples": samples, "variable": {"name": "copper", "unit": "mg/kg"}, **LIGHT})
    assert r.status_code == 200, r.json
    assert "variables" not in r.json and r.json["summary"]["samples"] == 90


def test_a_variable_that_cannot_be_analysed_is_named(client):
    samples = batch()
    samples["variables"]["zinc"] = [-1.0 if v is not None else None for v in samples["variables"]["zinc"]]
    body = json.dumps({"samples": samples, "transform": "log", **LIGHT})
    r = client.post("/v1/analyses", data=body, content_type="application/json")
    assert r.status_code == 422, r.json
    assert r.json["errors"][0]["pointer"].startswith("/samples/variables/zinc")
