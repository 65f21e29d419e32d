"""One definition per stage: the same caller mistake gives the same refusal in the separate endpoint
(its options at the top of the request) and in /v1/analyses (under the stage), before any work."""

from __future__ import annotations

import numpy as np
import pytest

ANALYSES = "/v1/analyses"
MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 0.9, "range": 30}]}
GRID = {"origin": [0, 0], "spacing": [10, 10], "shape": [5, 5]}


def _samples(n=60, seed=3, dimension=2):
    rng = np.random.default_rng(seed)
    xyz = rng.uniform(0, 100, (n, dimension))
    columns = {axis: xyz[:, k].tolist() for k, axis in enumerate("xyz"[:dimension])}
    return {**columns, "values": rng.lognormal(1.0, 0.5, n).tolist()}


def _refusal(client, url, body):
    r = client.post(url, json=body)
    assert r.status_code == 422, r.json
    return sorted((e["pointer"], e["detail"]) for e in r.json["errors"])


def _under(base, refusal):
    return sorted((base + pointer, detail) for pointer, detail in refusal)


def _same_refusal(client, url, separate, stage, options, base, dimension=2, top=None):
    """``options`` at the top of ``url``'s request and under ``stage`` of an analysis: the same issues."""
    samples = _samples(dimension=dimension)
    top = top or {}
    alone = _refusal(client, url, {"samples": samples, **top, **separate, **options})
    nested = _refusal(client, ANALYSES, {"samples": samples, **top, stage: options})
    assert nested == _under(base, alone)
    return alone


VARIOGRAM_MISTAKES = [
    ({"lags": {"width": -1, "count": 3}}, "/lags/width"),
    ({"lags": {"edges": [0, 20, 10]}}, "/lags/edges/2"),
    ({"lags": {"width": 5, "count": 4, "edges": [0, 5]}}, "/lags"),  # two forms mixed: refused at the object
    ({"directions": [{"azimuth": 400}]}, "/directions/0/azimuth"),
    ({"directions": [{"azimuth": 0, "bandwidth": -2}]}, "/directions/0/bandwidth"),
    ({"min_pairs": 0}, "/min_pairs"),
]


@pytest.mark.parametrize(("options", "pointer"), VARIOGRAM_MISTAKES)
def test_variogram_stage_mistakes_match(client, options, pointer):
    for url in ("/v1/experimental-variograms", "/v1/model-fits"):
        alone = _same_refusal(client, url, {}, "variogram", options, "/variogram")
        assert pointer in [p for p, _ in alone]


FIT_MISTAKES = [
    ({"families": ["no_such_family"]}, "/families/0", 2),
    ({"families": ["spherical", "spherical"]}, "/families/1", 2),
    ({"families": ["circular"]}, "/families/0", 3),
    ({"nugget": -1}, "/nugget", 2),
    ({"weighting": "by_hand"}, "/weighting", 2),
    ({"anisotropy": "fit"}, "/anisotropy", 1),
]


@pytest.mark.parametrize(("options", "pointer", "dimension"), FIT_MISTAKES)
def test_fit_stage_mistakes_match(client, options, pointer, dimension):
    alone = _same_refusal(client, "/v1/model-fits", {}, "fit", options, "/fit", dimension)
    assert pointer in [p for p, _ in alone]


CROSS_VALIDATION_MISTAKES = [
    ({"kriging": {"type": "universal"}}, "/kriging/drift", 2),
    ({"kriging": {"type": "kriging_by_guess"}}, "/kriging/type", 2),
    ({"scheme": {"type": "k_fold", "folds": 500}}, "/scheme/folds", 2),
    ({"neighbourhood": {"max_points": 8, "min_points": 12}}, "/neighbourhood/min_points", 2),
    ({"neighbourhood": {"max_points": 8, "sectors": 4}}, "/neighbourhood/sectors", 1),
    (
        {"scheme": {"type": "k_fold", "folds": 500}, "neighbourhood": {"max_points": 8, "min_points": 12}},
        "/scheme/folds",
        2,
    ),
]


@pytest.mark.parametrize(("options", "pointer", "dimension"), CROSS_VALIDATION_MISTAKES)
def test_cross_validation_stage_mistakes_match(client, options, pointer, dimension):
    alone = _same_refusal(
        client, "/v1/cross-validations", {"model": MODEL}, "cross_validation", options, "/cross_validation", dimension
    )
    assert pointer in [p for p, _ in alone]


PREDICTION_MISTAKES = [
    ({"grid": {"origin": [0], "spacing": [1], "shape": [3]}}, "/grid", {}),
    ({"grid": {**GRID, "spacing": [10, -1]}}, "/grid/spacing/1", {}),
    ({"grid": GRID, "thresholds": [-1.0, 2.0]}, "/thresholds/0", {"transform": "log"}),
    ({"grid": GRID, "blocks": {"size": [5, 5]}}, "/blocks", {"transform": "log"}),
    ({"grid": GRID, "blocks": {"size": [5, 5, 5]}}, "/blocks/size", {}),
    ({"grid": GRID, "blocks": {"size": [5, 5], "discretisation": [40, 40]}}, "/blocks/discretisation/0", {}),
]


@pytest.mark.parametrize(("options", "pointer", "top"), PREDICTION_MISTAKES)
def test_prediction_stage_mistakes_match(client, options, pointer, top):
    alone = _same_refusal(client, "/v1/predictions", {"model": MODEL}, "prediction", options, "/prediction", top=top)
    assert pointer in [p for p, _ in alone]


def test_block_kriging_with_a_transform_names_the_simulations(client):
    """The one message for block averages of transformed values, in both requests."""
    alone = _same_refusal(
        client,
        "/v1/predictions",
        {"model": MODEL},
        "prediction",
        {"grid": GRID, "blocks": {"size": [5, 5]}},
        "/prediction",
        top={"transform": "log"},
    )
    assert "POST /v1/simulations" in alone[0][1] and "prediction.simulation" in alone[0][1]


def test_separate_fit_checks_its_options_before_computing_the_variogram(client, monkeypatch):
    """Nothing half-computed: a fit mistake is refused before the experimental variogram runs."""
    import lagwise.core.stages as stages

    def refuse(*args, **kwargs):
        raise AssertionError("the variogram ran before the fit options were checked")

    monkeypatch.setattr(stages, "experimental_variogram", refuse)
    r = client.post("/v1/model-fits", json={"samples": _samples(dimension=1), "anisotropy": "fit"})
    assert r.status_code == 422 and r.json["errors"][0]["pointer"] == "/anisotropy"


def test_separate_cross_validation_reports_every_stage_issue_together(client):
    r = client.post(
        "/v1/cross-validations",
        json={
            "samples": _samples(),
            "model": MODEL,
            "scheme": {"type": "k_fold", "folds": 500},
            "neighbourhood": {"max_points": 8, "min_points": 12},
        },
    )
    pointers = {e["pointer"] for e in r.json["errors"]}
    assert {"/scheme/folds", "/neighbourhood/min_points"} <= pointers
