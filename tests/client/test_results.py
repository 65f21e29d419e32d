"""The tolerant reader: unknown response members are ignored and kept in ``raw``; missing
optional members do not break a result."""

from __future__ import annotations

import copy

import numpy as np
import pytest
from lagwise_client import (
    Analysis,
    CrossValidation,
    ExperimentalVariogram,
    Lagwise,
    ModelFit,
    Predictions,
    ResponseError,
    VariogramMap,
    VariogramModel,
)

FUTURE = {"added_later": {"nested": [1, 2]}, "note_for_people": "new"}


def with_extras(document):
    """A copy of ``document`` with unknown members added to every object at every level."""
    if isinstance(document, dict):
        grown = {k: with_extras(v) for k, v in document.items()}
        grown.update(copy.deepcopy(FUTURE))
        return grown
    if isinstance(document, list):
        return [with_extras(v) for v in document]
    return document


def _grows(value):
    return isinstance(value, dict) or (isinstance(value, tuple) and any(isinstance(v, dict) for v in value))


def typed(result):
    """The typed members of a result, plain dictionaries (whose members grow) left out."""
    return {k: v for k, v in vars(result).items() if k != "raw" and not _grows(v)}


MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 1.0, "range": 30.0}]}
CLASS = {"lower": 0.0, "upper": 10.0, "pairs": 40, "value": 0.5, "mean_distance": 6.1, "sparse": False}


def minimal_payloads():
    """Each result's smallest readable response (only the members a result cannot do without)."""
    return {
        ExperimentalVariogram: {"directions": [{"azimuth": 0.0, "classes": [CLASS]}]},
        VariogramMap: {"hx": [-1.0, 0.0, 1.0], "hy": [0.0], "values": [[0.5, None, 0.5]], "pairs": [[3, 0, 3]]},
        ModelFit: {"model": MODEL},
        CrossValidation: {"statistics": {"count": 3}, "samples": {"id": ["a", "b", "c"]}},
        Predictions: {"x": [1.0], "estimate": [2.0], "variance": [0.3]},
        Analysis: {"fit": {"model": MODEL}},
    }


@pytest.mark.parametrize("cls", list(minimal_payloads()), ids=lambda c: c.__name__)
def test_minimal_payloads_read_and_extras_are_ignored(cls):
    payload = minimal_payloads()[cls]
    plain = cls.from_response(payload)
    grown_payload = with_extras(payload)
    grown = cls.from_response(grown_payload)
    assert typed(grown) == typed(plain)
    assert grown.raw == grown_payload and grown.raw["added_later"] == FUTURE["added_later"]
    assert plain.warnings == () and plain.parameters == {}


def test_nested_parts_keep_their_own_raw():
    result = ExperimentalVariogram.from_response(with_extras(minimal_payloads()[ExperimentalVariogram]))
    direction = result.directions[0]
    assert direction.raw["note_for_people"] == "new" and direction.classes[0].raw["note_for_people"] == "new"
    assert direction.tolerance is None and direction.classes[0].tail_mean is None
    columns = list(result.to_dataframe().columns)
    assert "raw" not in columns and "note_for_people" not in columns  # raw is not a column


def test_candidate_without_model_and_unknown_family_round_trip():
    payload = {
        "model": {"nugget": 0.0, "structures": [{"family": "wave_2031", "scale": 2.0, "period": 9.0}]},
        "candidates": [
            {"rank": 1, "label": "wave_2031", "criterion": -3.0, "selected": True},
            {"rank": 2, "label": "gaussian", "model": None, "note": "did not converge"},
        ],
    }
    fit = ModelFit.from_response(payload)
    assert [c.rank for c in fit.candidates] == [1, 2] and fit.candidates[1].model is None
    assert fit.candidates[0].raw["selected"] is True
    # A family this client does not know yet is sent back exactly as it came.
    assert fit.model.to_dict() == payload["model"]
    with pytest.raises(ValueError, match="unknown family 'wave_2031'"):
        fit.model.semivariance(1.0)


@pytest.mark.parametrize(
    ("cls", "payload", "where"),
    [
        (ExperimentalVariogram, {"summary": {}}, "/directions"),
        (ExperimentalVariogram, {"directions": [{"azimuth": 0.0, "classes": [{"lower": 0.0}]}]}, "/upper"),
        (ModelFit, {"candidates": []}, "/model"),
        (Predictions, {"x": [1.0], "estimate": [1.0]}, "/variance"),
        (Analysis, {"summary": {}}, "/fit"),
        (VariogramMap, [], "/ is not a JSON object"),
    ],
)
def test_missing_essential_members_name_their_place(cls, payload, where):
    with pytest.raises(ResponseError, match=where):
        cls.from_response(payload)


def test_live_responses_with_extras_at_every_level(service_url):
    rng = np.random.default_rng(12)
    x, y = rng.uniform(0, 100, 90), rng.uniform(0, 100, 90)
    v = np.sin(x / 15) + rng.normal(0, 0.2, 90)
    model = VariogramModel.from_dict(MODEL)
    with Lagwise(service_url) as lw:
        results = [
            lw.experimental_variogram(x=x, y=y, values=v, lags={"width": 10, "count": 5}),
            lw.variogram_map(x=x, y=y, values=v, cell_size=10.0, cells=2),
            lw.fit_model(x=x, y=y, values=v, families=["spherical", "exponential"]),
            lw.cross_validate(x=x, y=y, values=v, model=model),
            lw.predict(x=x, y=y, values=v, model=model, targets={"x": [5.0], "y": [5.0]}, return_weights=[0]),
            lw.analyze(
                x=x, y=y, values=v, prediction={"grid": {"origin": [0, 0], "spacing": [50, 50], "shape": [2, 2]}}
            ),
        ]
    for result in results:
        grown = type(result).from_response(with_extras(result.raw))
        assert typed(grown) == typed(result), type(result).__name__
        assert grown.raw["added_later"] == FUTURE["added_later"]
