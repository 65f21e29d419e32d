"""POST /v1/analyses: every stage validated before work, with pointers under its stage; strategies and verdict."""

from __future__ import annotations

import numpy as np
import pytest

URL = "/v1/analyses"


def _samples(n=60, seed=3):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 100, (n, 2))
    return {"x": xy[:, 0].tolist(), "y": xy[:, 1].tolist(), "values": rng.normal(10, 1, n).tolist()}


@pytest.mark.parametrize(
    ("stage", "pointer"),
    [
        ({"variogram": {"lags": {"width": -1, "count": 3}}}, "/variogram/lags/width"),
        ({"variogram": {"directions": [{"azimuth": 400}]}}, "/variogram/directions/0/azimuth"),
        ({"fit": {"families": ["no_such_family"]}}, "/fit/families/0"),
        ({"cross_validation": {"kriging": {"type": "simple"}}}, "/cross_validation/kriging/mean"),
        ({"cross_validation": {"kriging": {"type": "universal"}}}, "/cross_validation/kriging/drift"),
        ({"cross_validation": {"scheme": {"type": "k_fold", "folds": 500}}}, "/cross_validation/scheme/folds"),
        (
            {"prediction": {"grid": {"origin": [0], "spacing": [1], "shape": [3]}}},
            "/prediction/grid",
        ),
    ],
)
def test_a_callers_mistake_is_a_422_pointing_into_its_stage(client, stage, pointer):
    """The caller's own mistakes are refused whole (never a 200 with a warning), pointer under the stage."""
    r = client.post(URL, json={"samples": _samples(), **stage})
    assert r.status_code == 422, r.json
    assert pointer in [e["pointer"] for e in r.json["errors"]], r.json["errors"]


def test_mistakes_in_several_stages_are_reported_together(client):
    r = client.post(
        URL,
        json={
            "samples": _samples(),
            "cross_validation": {"kriging": {"type": "simple"}, "scheme": {"type": "k_fold", "folds": 500}},
        },
    )
    pointers = {e["pointer"] for e in r.json["errors"]}
    assert {"/cross_validation/kriging/mean", "/cross_validation/scheme/folds"} <= pointers


def test_pure_noise_has_no_structure(client):
    """Independent normal values (numpy normal draws): the pure nugget wins, the verdict says so."""
    doc = client.post(URL, json={"samples": _samples(n=200, seed=11)}).json
    assert doc["verdict"]["level"] == "no_structure" and doc["verdict"]["usable"] is False
    selected = [s for s in doc["selection"]["strategies"] if s["selected"]]
    assert len(selected) == 1 and selected[0]["name"] == "pure_nugget"
    assert doc["experimental"]["anisotropy"] is None or doc["experimental"]["anisotropy"]["supported"] is False


def test_null_strategy_equals_ordinary_kriging_with_a_pure_nugget(client):
    """The closed-form null equals the kriging engine's leave-one-out of a pure-nugget model
    (common practice: ordinary kriging with a pure nugget estimates the mean of the other samples)."""
    samples = _samples(n=80, seed=5)
    doc = client.post(URL, json={"samples": samples}).json
    null = next(s for s in doc["selection"]["strategies"] if s["name"] == "pure_nugget")
    values = np.array(samples["values"])
    cv = client.post(
        "/v1/cross-validations",
        json={"samples": samples, "model": {"nugget": float(np.var(values)), "structures": []}},
    ).json
    for key in ("root_mean_square_error", "root_mean_square_standardized_error", "interval_coverage_95"):
        assert null["statistics"][key] == pytest.approx(cv["statistics"][key], rel=1e-9)


def test_a_given_model_skips_fitting_and_is_compared_with_the_null(client):
    model = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 0.9, "range": 30}]}
    doc = client.post(URL, json={"samples": _samples(), "fit": {"model": model}}).json
    names = [s["name"] for s in doc["selection"]["strategies"]]
    assert names == ["pure_nugget", "given"]
    r = client.post(URL, json={"samples": _samples(), "fit": {"model": {"structures": [{"family": "spherical"}]}}})
    assert r.status_code == 422 and r.json["errors"][0]["pointer"].startswith("/fit/model/structures/0")
