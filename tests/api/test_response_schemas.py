"""Responses are dumped by their schemas: the fast paths agree with marshmallow, and a member added
to a schema appears in the answer."""

from __future__ import annotations

import ast
from pathlib import Path

import numpy as np
from lagwise.api import schemas, serialize
from lagwise.api.fields import Column, Rows
from lagwise.core.variography.experimental import ClassRow
from marshmallow import fields

SERIALIZE = Path(serialize.__file__)

ROWS = [
    ClassRow(0.0, 10.0, None, 0, None, "no pairs in this class", True),
    ClassRow(10.0, 20.0, 14.5, 40, 1.25, None, False, standard_error=0.2, interval_95=(0.9, 1.6)),
    ClassRow(20.0, 30.0, 25.0, 12, 1.5, None, True, uncertainty_reason="too few blocks"),
    ClassRow(
        30.0, 40.0, 35.0, 50, 0.4, None, False, 1.0, 1.1, 0.5, 0.6, error_bound=None, pair_bound=3, bound_exceeded=True
    ),
    ClassRow(
        40.0,
        50.0,
        45.0,
        60,
        0.3,
        None,
        False,
        standard_error=0.1,
        uncertainty_reason="ignored",
        pair_bound=0,
        error_bound=0.0,
        bound_exceeded=False,
    ),
]


def test_rows_dump_as_marshmallow_dumps_each_row():
    # The plan of Rows against the schema's own dump (marshmallow Schema.dump), row by row.
    plain = schemas.ClassSchema()
    by_plan = Rows(schemas.ClassSchema)._serialize(ROWS, "classes", None)
    assert by_plan == [plain.dump(row) for row in ROWS]
    assert "reason" not in by_plan[1] and "tail_mean" not in by_plan[1] and "error_bound" not in by_plan[1]
    assert by_plan[3]["error_bound"] is None and by_plan[3]["bound_exceeded"] is True
    assert "uncertainty_reason" not in by_plan[4] and by_plan[2]["uncertainty_reason"] == "too few blocks"


def test_columns_pass_arrays_through_untouched():
    values = np.array([1.0, np.nan, 3.0])
    assert Column(fields.Float(allow_none=True))._serialize(values, "estimate", None) is values


def test_a_member_added_to_a_schema_appears_in_the_answer():
    @schemas.always_present("note")
    class Wider(schemas.MapResponse):
        cells_used = fields.Integer()
        note = fields.String()

    view = serialize.View(
        hx=np.zeros(1), hy=np.zeros(1), values=[[None]], pairs=np.zeros((1, 1), int), summary=None, cells_used=7
    )
    dumped = Wider().dump(view)
    assert dumped["cells_used"] == 7 and "note" not in dumped


def test_each_answer_is_dumped_by_its_contract_schema():
    dumpers = {
        serialize.EXPERIMENTAL: schemas.ExperimentalResponse,
        serialize.PREDICTION: schemas.PredictionResponse,
        serialize.MODEL_FIT: schemas.ModelFitResponse,
        serialize.ANALYSIS: schemas.AnalysisResponse,
    }
    assert all(type(dumper) is schema for dumper, schema in dumpers.items())


def test_serialize_imports_no_computing_function_of_the_core():
    # Only types and fixed texts come from the core; computing belongs to the core's results.
    allowed = {
        "FAN_DESCRIPTION",
        "Raster",
        "SampleSet",
        "MultiSampleSet",
        "RULE",
        "ExperimentalVariogram",
        "CROSS_MEANING",
    }
    tree = ast.parse(SERIALIZE.read_text())
    imported = {
        alias.name
        for node in ast.walk(tree)
        if isinstance(node, ast.ImportFrom) and (node.module or "").startswith("core")
        for alias in node.names
    }
    assert imported and imported <= allowed, imported - allowed


def test_a_three_dimensional_analysis_keeps_the_dip_members(client):
    rng = np.random.default_rng(5)
    n = 60
    samples = {k: rng.uniform(0, side, n).tolist() for k, side in (("x", 100), ("y", 100), ("z", 10))}
    samples["values"] = rng.normal(5, 1, n).tolist()
    body = {"samples": samples, "fit": {"compare": False, "anisotropy": "none"}}
    doc = client.post("/v1/analyses", json={**body, "cross_validation": {"kriging": {"type": "ordinary"}}}).json
    (direction,) = doc["experimental"]["omnidirectional"]["directions"]
    alone = client.post("/v1/experimental-variograms", json={"samples": samples}).json["directions"][0]
    assert {"dip", "dip_tolerance", "vertical_bandwidth"} <= set(direction)
    assert {k: v for k, v in direction.items() if k != "classes"} == {k: v for k, v in alone.items() if k != "classes"}
