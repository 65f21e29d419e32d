"""Cokriging on /v1/predictions and /v1/cross-validations: results equal the core's, refusals name the field."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.kriging.cokriging import CokrigingSpec, VariableColumns
from lagwise.core.kriging.cokriging_runs import cokrige, cross_validate_cokriging
from lagwise.core.kriging.neighbourhood import Neighbourhood
from lagwise.core.modelling.coregionalisation import JointModel, JointStructure

PROBLEM = "application/problem+json"
RNG = np.random.default_rng(21)
N = 50
X = RNG.uniform(0, 100, N).round(3).tolist()
Y = RNG.uniform(0, 100, N).round(3).tolist()
LEAD = [None if i % 4 == 0 else v for i, v in enumerate(RNG.normal(50, 5, N).round(3).tolist())]
ZINC = RNG.normal(200, 20, N).round(3).tolist()
MODEL = {
    "variables": ["lead", "zinc"],
    "nugget": [[2.0, 1.0], [1.0, 40.0]],
    "structures": [{"family": "spherical", "range": 40.0, "sills": [[20.0, 60.0], [60.0, 360.0]]}],
}


def samples():
    return {"x": X, "y": Y, "variables": {"lead": LEAD, "zinc": ZINC}}


def core_inputs():
    values = np.array([[np.nan if a is None else a, b] for a, b in zip(LEAD, ZINC, strict=True)])
    columns = VariableColumns(np.column_stack([X, Y]), ("lead", "zinc"), values, tuple(str(i) for i in range(N)))
    model = JointModel(
        ("lead", "zinc"),
        np.array(MODEL["nugget"]),
        (JointStructure("spherical", 40.0, np.array(MODEL["structures"][0]["sills"])),),
    )
    return columns, model


def problem(r, pointers):
    assert r.status_code == 422, r.data[:500]
    assert r.mimetype == PROBLEM
    assert [e["pointer"] for e in r.json["errors"]] == pointers, r.json
    return r.json


@pytest.mark.parametrize("hood", [None, {"max_points": 8}])
def test_prediction_equals_core(client, hood):
    targets = {"x": [10.0, 55.5, 90.0], "y": [20.0, 50.0, 80.0]}
    body = {"samples": samples(), "model": MODEL, "primary": "lead", "targets": targets}
    if hood:
        body["neighbourhood"] = hood
    r = client.post("/v1/predictions", json=body)
    assert r.status_code == 200, r.json
    columns, model = core_inputs()
    neighbourhood = Neighbourhood() if hood is None else Neighbourhood(max_points=8, min_points=4)
    expected = cokrige(
        columns, model, CokrigingSpec("ordinary", "lead"), neighbourhood, np.column_stack([targets["x"], targets["y"]])
    )
    np.testing.assert_allclose(r.json["estimate"], expected.prediction.estimate, rtol=1e-12)
    np.testing.assert_allclose(r.json["variance"], expected.prediction.variance, rtol=1e-12)
    gain = r.json["cokriging"]
    assert gain["primary"] == "lead" and gain["secondaries"] == ["zinc"]
    assert gain["mean_variance"] < gain["mean_variance_primary_only"]
    assert 0 < gain["variance_reduction"] < 1
    assert len(gain["variance_primary_only"]) == 3


def test_prediction_on_grid_and_simple_cokriging(client):
    grid = {"origin": [0.0, 0.0], "spacing": [25.0, 25.0], "shape": [5, 3]}
    r = client.post(
        "/v1/predictions",
        json={
            "samples": samples(),
            "model": MODEL,
            "kriging": {"type": "simple", "means": {"lead": 50.0, "zinc": 200.0}},
            "grid": grid,
        },
    )
    assert r.status_code == 200, r.json
    assert len(r.json["estimate"]) == 15 and r.json["grid"]["shape"] == [5, 3]
    assert r.json["parameters"]["kriging"]["means"] == {"lead": 50.0, "zinc": 200.0}


@pytest.mark.parametrize("scheme", [{"type": "leave_one_out"}, {"type": "k_fold", "folds": 5, "seed": 2}])
def test_cross_validation_equals_core(client, scheme):
    r = client.post(
        "/v1/cross-validations",
        json={
            "samples": samples(),
            "model": MODEL,
            "primary": "lead",
            "neighbourhood": {"max_points": 10},
            "scheme": scheme,
        },
    )
    assert r.status_code == 200, r.json
    columns, model = core_inputs()
    from lagwise.core.kriging.cross_validation import Scheme

    expected = cross_validate_cokriging(
        columns,
        model,
        CokrigingSpec("ordinary", "lead"),
        Neighbourhood(max_points=10, min_points=4),
        Scheme(scheme["type"], scheme.get("folds", 10), scheme.get("seed", 1)),
    )
    np.testing.assert_allclose(r.json["samples"]["estimate"], expected.result.estimate, rtol=1e-12)
    assert r.json["statistics"]["count"] == sum(v is not None for v in LEAD)
    assert r.json["samples"]["id"][0] == "1"  # sample 0 has no lead
    gain = r.json["cokriging"]
    assert gain["statistics_primary_only"]["count"] == r.json["statistics"]["count"]
    assert gain["variance_reduction"] > 0


def test_bad_joint_models_are_refused(client):
    def post(model, **extra):
        return client.post(
            "/v1/predictions", json={"samples": samples(), "model": model, "targets": {"x": [1.0], "y": [1.0]}, **extra}
        )

    not_psd = {**MODEL, "structures": [{**MODEL["structures"][0], "sills": [[20.0, 90.0], [90.0, 360.0]]}]}
    doc = problem(post(not_psd), ["/model/structures/0/sills"])
    assert "smallest eigenvalue" in doc["errors"][0]["detail"]
    problem(post({**MODEL, "variables": ["lead", "tin"]}), ["/model/variables/1"])
    problem(post(MODEL, primary="tin"), ["/primary"])
    problem(post(MODEL, transform="log"), ["/transform"])
    problem(post({**MODEL, "nugget": [[1.0, 0.0]]}), ["/model/nugget"])
    problem(post(MODEL, kriging={"type": "simple", "mean": 3.0}), ["/kriging/mean"])
    problem(post(MODEL, kriging={"type": "universal", "drift": "linear"}), ["/kriging/drift"])
    # A universal form without its drift is refused by the contract before cokriging looks at the type.
    problem(post(MODEL, kriging={"type": "universal"}), ["/kriging/drift"])


def test_joint_model_needs_several_variables_and_single_models_refuse_primary(client):
    one = {"x": X, "y": Y, "values": ZINC}
    target = {"x": [1.0], "y": [1.0]}
    problem(client.post("/v1/predictions", json={"samples": one, "model": MODEL, "targets": target}), ["/samples"])
    single = {"nugget": 1.0, "structures": [{"family": "spherical", "partial_sill": 1.0, "range": 30.0}]}
    r = client.post("/v1/predictions", json={"samples": one, "model": single, "primary": "zinc", "targets": target})
    assert r.status_code == 422 and r.json["errors"][0]["pointer"] == "/primary"


def test_variable_with_too_few_values(client):
    sparse = [None] * (N - 1) + [3.0]
    body = {"samples": {"x": X, "y": Y, "variables": {"lead": sparse, "zinc": ZINC}}, "model": MODEL}
    r = client.post("/v1/cross-validations", json=body)
    assert r.status_code == 422


def _several_experimental():
    """A several-variable experimental response built by brute force (scipy pdist) in the
    response's shape: variables with direct classes, cross with cross-semivariances."""
    from scipy.spatial.distance import pdist

    rng = np.random.default_rng(9)
    n = 300
    coords = rng.uniform(0, 100, (n, 2))
    common = np.sin(coords[:, 0] / 15.0) + np.cos(coords[:, 1] / 12.0)
    a = common + rng.normal(0, 0.3, n)
    b = 2.0 * common + rng.normal(0, 0.5, n)
    h = pdist(coords)
    i, j = np.triu_indices(n, 1)
    edges = np.arange(0.0, 55.0, 5.0)
    k = np.digitize(h, edges) - 1
    inside = (k >= 0) & (k < len(edges) - 1)

    def classes(u, v):
        product = (u[j] - u[i]) * (v[j] - v[i])
        rows = []
        for c in range(len(edges) - 1):
            m = inside & (k == c)
            rows.append(
                {
                    "mean_distance": float(h[m].mean()),
                    "value": float(product[m].sum() / (2 * m.sum())),
                    "pairs": int(m.sum()),
                }
            )
        return [{"azimuth": 0.0, "classes": rows}]

    return {
        "variables": [
            {"name": "lead", "directions": classes(a, a), "summary": {"variance": float(a.var()), "dimension": 2}},
            {"name": "zinc", "directions": classes(b, b), "summary": {"variance": float(b.var()), "dimension": 2}},
        ],
        "cross": [{"variables": ["lead", "zinc"], "directions": classes(a, b)}],
        "parameters": {"statistic": "semivariance"},
    }


def test_joint_fit_from_a_several_variable_experimental(client):
    """Every matrix of the selected model and of each candidate is PSD (numpy.linalg.eigvalsh >= -1e-12);
    exactly one candidate is selected; the fitted model goes back into a cokriging request as it is."""
    r = client.post(
        "/v1/model-fits", json={"experimental": _several_experimental(), "families": ["spherical", "exponential"]}
    )
    assert r.status_code == 200, r.json
    model = r.json["model"]
    assert model["variables"] == ["lead", "zinc"]
    for candidate in r.json["candidates"]:
        matrices = [candidate["model"]["nugget"]] + [s["sills"] for s in candidate["model"]["structures"]]
        for matrix in matrices:
            assert np.linalg.eigvalsh(np.array(matrix)).min() >= -1e-12
    assert sum(c["selected"] for c in r.json["candidates"]) == 1
    assert [c["rank"] for c in r.json["candidates"]] == list(range(1, len(r.json["candidates"]) + 1))
    cross = r.json["experimental"]["cross"][0]
    assert cross["variables"] == ["lead", "zinc"] and all(
        c["model_value"] is not None for c in cross["directions"][0]["classes"]
    )
    structured = model["structures"][0]["sills"]
    assert structured[0][1] / np.sqrt(structured[0][0] * structured[1][1]) > 0.8  # both follow one pattern
    again = client.post(
        "/v1/predictions",
        json={
            "samples": samples(),
            "model": {**model, "variables": ["lead", "zinc"]},
            "targets": {"x": [5.0], "y": [5.0]},
        },
    )
    assert again.status_code == 200, again.json


def test_joint_fit_bad_experimental(client):
    given = _several_experimental()
    given["cross"][0]["variables"] = ["lead", "tin"]
    problem(client.post("/v1/model-fits", json={"experimental": given}), ["/experimental/cross/0/variables"])
    problem(
        client.post("/v1/model-fits", json={"experimental": _several_experimental(), "weighting": "cressie"}),
        ["/weighting"],
    )


def test_joint_fit_from_samples_equals_fit_from_their_experimental(client):
    """Samples with several variables and no variable chosen are fitted jointly; the fit equals the
    one made from the several-variable experimental response of the same samples."""
    lags = {"width": 10.0, "count": 6}
    options = {"families": ["spherical"], "min_pairs": 10}
    direct = client.post("/v1/model-fits", json={"samples": samples(), "lags": lags, **options})
    assert direct.status_code == 200, direct.json
    experimental = client.post(
        "/v1/experimental-variograms", json={"samples": samples(), "lags": lags, "min_pairs": 10}
    )
    assert experimental.status_code == 200, experimental.json
    given = client.post("/v1/model-fits", json={"experimental": experimental.json, **options})
    assert given.status_code == 200, given.json
    assert direct.json["model"]["variables"] == ["lead", "zinc"]
    for a, b in zip(
        [direct.json["model"]["nugget"]] + [s["sills"] for s in direct.json["model"]["structures"]],
        [given.json["model"]["nugget"]] + [s["sills"] for s in given.json["model"]["structures"]],
        strict=True,
    ):
        np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-12)
    problem(client.post("/v1/model-fits", json={"samples": samples(), "transform": "log"}), ["/transform"])
    problem(
        client.post("/v1/model-fits", json={"samples": samples(), "statistic": "semivariance_median"}), ["/statistic"]
    )
