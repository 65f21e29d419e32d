"""The whole analysis under one estimate: stages that each pass their own limit may not add up past
``LAGWISE_MAX_ANALYSIS_SECONDS``, for one variable or summed over the variables of a batch, and the
request is refused before any work; the demo analysis and ordinary requests fit.

The stage costs are those of ``lagwise.core.kriging.cost`` (LU of an s x s matrix s^3/3
multiply-adds, Golub & Van Loan 2013, section 3.2) and the pair counts of the sweep.
"""

from __future__ import annotations

import json
import math
from dataclasses import replace

import numpy as np
import pytest
from lagwise.api import convert, create_app
from lagwise.api import operations as views
from lagwise.api.figure_set import marks
from lagwise.api.schemas import AnalysisRequest
from lagwise.api.settings import Settings
from lagwise.core import analysis_cost
from lagwise.core.data.variables import MultiSampleSet
from lagwise.core.errors import LimitExceeded
from lagwise.core.kriging.cost import cross_validation_flops, prediction_flops
from lagwise.core.kriging.neighbourhood import Neighbourhood
from lagwise.core.limits import Limits
from lagwise.core.variography import maps, pairs
from lagwise.demo import ACTION_LEVEL, UNIT_SIZE_M, elmsworth_samples

LIMIT = "LAGWISE_MAX_ANALYSIS_SECONDS"


def _columns(n: int, seed: int = 2, variables: int = 0) -> dict:
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 1000, (n, 2)).round(3)
    columns = {"x": xy[:, 0].tolist(), "y": xy[:, 1].tolist()}
    if variables:
        columns["variables"] = {f"v{k}": rng.normal(size=n).round(4).tolist() for k in range(variables)}
    else:
        columns["values"] = rng.normal(size=n).round(4).tolist()
    return columns


def _estimate(document: dict, limits: Limits = Limits()) -> list[analysis_cost.AnalysisCost]:
    loaded = AnalysisRequest().load(document)
    given = convert.samples_of(loaded, limits)
    options = replace(convert.analysis_options(loaded), with_map="variogram_map" in loaded["figures"])
    if not isinstance(given, MultiSampleSet):
        parts = [given]
    elif loaded["variable"]["name"] in given.names:
        parts = [given.variable(loaded["variable"]["name"])]
    else:
        parts = [given.variable(name) for name in given.names]
    return [
        analysis_cost.estimate(s, options, limits, figure_marks=marks(loaded, s.size), figure_format="svg")
        for s in parts
    ]


def _post(client, document: dict):
    return client.post("/v1/analyses", data=json.dumps(document), content_type="application/json")


@pytest.fixture()
def no_work(monkeypatch):
    """Fails the test if the analysis starts."""

    def refuse(*args, **kwargs):
        raise AssertionError("the analysis ran")

    monkeypatch.setattr(views, "analyse", refuse)


def _heavy() -> dict:
    """1,500 samples (the unique neighbourhood), five strategies and a 120 x 120 prediction grid."""
    return {
        "samples": _columns(1500),
        "prediction": {"grid": {"origin": [0, 0], "spacing": [1000 / 120, 1000 / 120], "shape": [120, 120]}},
    }


def test_stages_that_each_pass_but_add_up_past_the_limit_are_refused_before_work(client, no_work):
    limits = Limits()
    n, m, hood = 1500, 120 * 120, Neighbourhood()
    # each kriging stage within LAGWISE_MAX_KRIGING_FLOPS: one leave-one-out, the prediction
    assert cross_validation_flops(n, None, hood, 6) < limits.max_kriging_flops
    assert prediction_flops(n, m, hood, 6) < limits.max_kriging_flops
    (cost,) = _estimate(_heavy())
    assert cost.stages["cross_validation"] < limits.max_analysis_seconds
    assert cost.stages["prediction"] < limits.max_analysis_seconds
    assert cost.seconds > limits.max_analysis_seconds
    r = _post(client, _heavy())  # no_work: analyse is never called
    assert r.status_code == 422, r.json
    assert r.headers["content-type"].startswith("application/problem+json")
    assert r.json["type"] == "/problems/limit-exceeded" and r.json["limit"] == LIMIT
    assert r.json["allowed"] == limits.max_analysis_seconds
    assert r.json["requested"] == pytest.approx(cost.seconds, abs=0.1)
    assert "cross_validation" in r.json["detail"] and "prediction" in r.json["detail"]
    assert "coarser prediction grid" in r.json["detail"]


def test_the_sum_over_the_variables_of_a_batch_is_refused_before_work(no_work):
    document = {"samples": _columns(400, variables=3), "fit": {"compare": False}}
    costs = _estimate(document)
    one = costs[0].seconds
    assert len(costs) == 3 and all(c.seconds == pytest.approx(one, rel=0.05) for c in costs)
    limits = replace(Limits(), max_analysis_seconds=int(2 * one))  # one or two variables fit, three do not
    client = create_app({"TESTING": True}, settings=Settings(limits=limits)).test_client()
    r = _post(client, document)
    assert r.status_code == 422 and r.json["limit"] == LIMIT, r.json
    assert r.json["requested"] == pytest.approx(sum(c.seconds for c in costs), abs=0.1)
    assert "over 3 variables (v0, v1, v2)" in r.json["detail"]
    assert "fewer variables per request" in r.json["detail"]


def test_a_single_variable_of_the_same_samples_is_estimated_alone(monkeypatch):
    document = {"samples": _columns(400, variables=3), "fit": {"compare": False}, "variable": {"name": "v1"}}
    (cost,) = _estimate(document)
    limits = replace(Limits(), max_analysis_seconds=int(2 * cost.seconds))
    client = create_app({"TESTING": True}, settings=Settings(limits=limits)).test_client()
    ran = []

    def stop(*args, **kwargs):
        ran.append(1)
        raise LimitExceeded("LAGWISE_MAX_SAMPLES", 1, 2, "stopped by the test")

    monkeypatch.setattr(views, "analyse", stop)
    r = _post(client, document)
    assert ran == [1] and r.json["limit"] == "LAGWISE_MAX_SAMPLES"  # past the estimate, into the analysis


def test_the_demo_analysis_and_ordinary_requests_fit_the_default_limit():
    demo = {
        "samples": elmsworth_samples(),
        "transform": "log",
        "variogram": {"directions": "auto"},
        "cross_validation": {"neighbourhood": {"max_points": 24, "min_points": 4}},
        "prediction": {
            "grid": {"origin": [10.0, 10.0], "spacing": [20.0, 20.0], "shape": [40, 25]},
            "thresholds": [ACTION_LEVEL],
            "simulation": {"realisations": 100, "seed": 1, "blocks": {"size": [UNIT_SIZE_M, UNIT_SIZE_M]}},
        },
        "figures": ["variogram", "variogram_map", "cross_validation", "prediction_map", "standard_deviation_map"],
    }
    ordinary = [
        {"samples": _columns(n), "prediction": {"grid": {"origin": [0, 0], "spacing": [10, 10], "shape": [100, 100]}}}
        for n in (300, 1000, 5000)
    ]
    for document in [demo, *ordinary]:
        (cost,) = _estimate(document)
        assert 0 < cost.seconds < Limits().max_analysis_seconds, cost.stages


def test_invalid_options_are_left_to_the_analysis_which_names_their_stage(client):
    document = {"samples": _columns(100), "cross_validation": {"scheme": {"type": "k_fold", "folds": 500}}}
    r = _post(client, document)
    assert r.status_code == 422 and r.json["type"] == "/problems/invalid-input", r.json
    assert r.json["errors"][0]["pointer"].startswith("/cross_validation/scheme")


def _map_document(method: str) -> dict:
    return {
        "samples": _columns(2000),
        "figures": ["variogram_map"],
        "fit": {"anisotropy": "none"},
        "variogram_map": {"method": method},
    }


def test_the_map_stage_counts_by_the_method_it_takes():
    """The exact map counts its pair work; auto its pairs within LAGWISE_MAX_PAIRS, else the grid's
    transforms; the grid's transforms are transforms x points x log2 points of the padded grid that
    the map reports (an FFT of P points takes of the order of P log2 P operations, Cooley & Tukey 1965)."""
    limits = Limits(max_pairs=100_000)
    samples = convert.samples_of(AnalysisRequest().load(_map_document("exact")), limits)
    exact = maps.map_work(samples, statistic="semivariance", min_pairs=30, method="exact", limits=limits)
    grid = maps.map_work(samples, statistic="semivariance", min_pairs=30, method="grid", limits=limits)
    assert exact.method == "exact" and exact.pairs > limits.max_pairs and exact.transforms == 0
    assert grid.method == "grid" and grid.pairs == 0 and grid.transforms == 5
    made = maps.variogram_map(samples, method="grid", limits=limits)
    assert grid.points == made.grid.padded[0] * made.grid.padded[1]
    fft_seconds = grid.transforms * grid.points * math.log2(grid.points) / analysis_cost.FFT_UNITS_PER_SECOND
    seconds = {m: _estimate(_map_document(m), limits)[0].stages for m in ("exact", "auto", "grid")}
    without = _estimate({**_map_document("exact"), "figures": []}, limits)[0].stages
    assert seconds["exact"]["variogram_map"] == pytest.approx(exact.pairs / analysis_cost.PAIRS_PER_SECOND)
    assert seconds["auto"]["variogram_map"] == seconds["grid"]["variogram_map"] == pytest.approx(fft_seconds)
    assert without["variogram_map"] == 0.0
    assert {m: s["variograms"] for m, s in seconds.items()} == dict.fromkeys(seconds, without["variograms"])
    roomy = _estimate(_map_document("auto"))[0].stages["variogram_map"]
    assert roomy == pytest.approx(exact.pairs / analysis_cost.PAIRS_PER_SECOND)


def test_a_grid_map_can_take_an_analysis_past_the_limit():
    document = {**_map_document("grid"), "fit": {"anisotropy": "none", "compare": False}}
    (cost,) = _estimate(document)
    (without,) = _estimate({**document, "figures": []})
    limits = Limits(max_analysis_seconds=math.ceil(without.seconds))
    analysis_cost.check([without], limits)
    assert cost.seconds > limits.max_analysis_seconds
    with pytest.raises(LimitExceeded) as info:
        analysis_cost.check([cost], limits)
    assert info.value.limit == LIMIT and f"variogram_map {cost.stages['variogram_map']:.3g} s" in info.value.advice


def test_the_variogram_stage_counts_the_kernel_each_pass_takes():
    """Explicit classes, no fan and no drift: the statistic's pass by the column sweep, the class
    uncertainties' per-block pass by the sweep along x (pairs.pass_visits, checked against brute force
    and scipy's cKDTree in tests/core/test_pair_cost.py), each with the pairs within the radius."""
    document = {
        "samples": _columns(2000),
        "variogram": {"lags": {"width": 10.0, "count": 5}},
        "fit": {"anisotropy": "none", "compare": False},
    }
    samples = convert.samples_of(AnalysisRequest().load(document), Limits())
    prepared = pairs.prepare(samples.coords, samples.values)
    (_, columns), (_, along_x) = pairs.pass_visits(prepared, 50.0, [pairs.COLUMN_SWEEP, pairs.X_SWEEP])
    within = pairs.estimate_pairs_within(samples.coords, 50.0)
    (cost,) = _estimate(document)
    work = (columns + within) + (along_x + within)
    assert cost.stages["variograms"] == pytest.approx(work / analysis_cost.PAIRS_PER_SECOND, rel=1e-12)
