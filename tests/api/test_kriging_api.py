"""API tests of POST /v1/cross-validations and POST /v1/predictions (Flask test client)."""

from __future__ import annotations

import numpy as np
import pytest

MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 1.0, "range": 40.0}]}


@pytest.fixture()
def cols(rng):
    x, y = rng.uniform(0, 100, 80), rng.uniform(0, 100, 80)
    return {
        "x": x.tolist(),
        "y": y.tolist(),
        "values": (np.sin(x / 15) + np.cos(y / 20) + rng.normal(0, 0.2, 80)).tolist(),
        "ids": [f"S{i}" for i in range(80)],
    }


def test_leave_one_out(client, cols):
    r = client.post("/v1/cross-validations", json={"samples": cols, "model": MODEL})
    assert r.status_code == 200, r.json
    doc = r.json
    stats = doc["statistics"]
    assert stats["count"] == 80 and 0 < stats["root_mean_square_standardized_error"] < 3
    assert set(doc["samples"]) == {
        "id",
        "observed",
        "estimate",
        "standard_deviation",
        "error",
        "standardized_error",
        "outlier",
    }
    assert doc["samples"]["id"][:2] == ["S0", "S1"]
    e = np.array(doc["samples"]["estimate"]) - np.array(doc["samples"]["observed"])
    np.testing.assert_allclose(doc["samples"]["error"], e, rtol=1e-12)
    assert "RMSSE" in doc["assessment"] and doc["parameters"]["method"].startswith("leave-one-out, closed form")
    assert doc["parameters"]["kriging"] == {"type": "ordinary", "nugget_as": "micro_scale"}


def test_k_fold_with_moving_neighbourhood(client, cols):
    body = {
        "samples": cols,
        "model": MODEL,
        "scheme": {"type": "k_fold", "folds": 4, "seed": 9},
        "neighbourhood": {"max_points": 12, "sectors": 4},
    }
    doc = client.post("/v1/cross-validations", json=body).json
    assert doc["parameters"]["scheme"] == {"type": "k_fold", "folds": 4, "seed": 9}
    assert doc["parameters"]["neighbourhood"]["max_points"] == 12


def test_predictions_on_a_grid_with_weights(client, cols):
    body = {
        "samples": cols,
        "model": MODEL,
        "grid": {"origin": [0, 0], "spacing": [25, 50], "shape": [5, 3]},
        "return_weights": [0, 7],
    }
    doc = client.post("/v1/predictions", json=body).json
    assert len(doc["x"]) == len(doc["estimate"]) == len(doc["variance"]) == 15
    assert doc["x"][:6] == [0, 25, 50, 75, 100, 0] and doc["y"][:6] == [0, 0, 0, 0, 0, 50]
    assert doc["grid"]["order"] == "x fastest"
    assert [w["target"] for w in doc["weights"]] == [0, 7]
    assert abs(sum(doc["weights"][0]["weights"]) - 1) < 1e-9 and doc["weights"][0]["samples"][0] == "S0"


def test_targets_partly_out_of_reach(client, cols):
    body = {
        "samples": cols,
        "model": MODEL,
        "neighbourhood": {"max_points": 8, "min_points": 3, "radius": 20},
        "targets": {"x": [50, 900], "y": [50, 900]},
    }
    doc = client.post("/v1/predictions", json=body).json
    assert doc["estimate"][0] is not None and doc["estimate"][1] is None and doc["variance"][1] is None
    assert doc["unestimated"] == [{"index": 1, "reason": "fewer than min_points samples within the search radius"}]


@pytest.mark.parametrize(
    "path, extra, pointer",
    [
        ("/v1/predictions", {"targets": {"x": [1, 2]}}, "/targets"),
        (
            "/v1/predictions",
            {
                "targets": {"x": [1], "y": [2]},
                "kriging": {"type": "simple", "mean": 0},
                "model": {"structures": [{"family": "power", "coefficient": 1, "exponent": 1.5}]},
            },
            "/model",
        ),
        (
            "/v1/predictions",
            {"targets": {"x": [1], "y": [2]}, "neighbourhood": {"max_points": 4, "min_points": 8}},
            "/neighbourhood/min_points",
        ),
        ("/v1/predictions", {"targets": {"x": [1], "y": [2]}, "kriging": {"type": "universal"}}, "/kriging/drift"),
        (
            "/v1/predictions",
            {"targets": {"x": [1], "y": [2]}, "model": {"structures": [{"family": "spherical", "range": 10}]}},
            "/model/structures/0/partial_sill",
        ),
        (
            "/v1/predictions",
            {
                "targets": {"x": [1], "y": [2]},
                "model": {"structures": [{"family": "blob", "partial_sill": 1, "range": 10}]},
            },
            "/model/structures/0/family",
        ),
        ("/v1/predictions", {"grid": {"origin": [0], "spacing": [1], "shape": [3]}}, "/grid"),
        ("/v1/predictions", {}, ""),
        ("/v1/cross-validations", {"scheme": {"type": "k_fold", "folds": 500}}, "/scheme/folds"),
        (
            "/v1/cross-validations",
            {
                "model": {
                    "structures": [{"family": "spherical", "partial_sill": 1, "range": 10, "anisotropy": {"ratio": 2}}]
                }
            },
            "/model/structures/0/anisotropy/ratio",
        ),
    ],
)
def test_bad_kriging_requests(client, cols, path, extra, pointer):
    body = {"samples": cols, "model": MODEL, **extra}
    r = client.post(path, json=body)
    assert r.status_code == 422, r.json
    assert r.json["errors"][0]["pointer"] == pointer


def test_model_is_required(client, cols):
    r = client.post("/v1/cross-validations", json={"samples": cols})
    assert r.status_code == 422 and r.json["errors"][0]["pointer"] == "/model"


def test_unique_limit(small_limits_client):
    cols = {"x": list(range(40)), "y": [i % 3 for i in range(40)], "values": [float(i % 5) for i in range(40)]}
    r = small_limits_client.post("/v1/cross-validations", json={"samples": cols, "model": MODEL})
    assert r.status_code == 422 and r.json["limit"] == "LAGWISE_MAX_UNIQUE_SAMPLES" and "max_points" in r.json["detail"]


def test_duplicates_policy_is_honoured(client):
    cols = {"x": [0, 0, 10, 20, 30], "y": [0, 0, 5, 0, 5], "values": [1.0, 3.0, 2.0, 4.0, 3.0]}
    doc = client.post("/v1/cross-validations", json={"samples": cols, "model": MODEL}).json
    assert doc["samples"]["observed"][0] == 2.0 and doc["statistics"]["count"] == 4
    r = client.post("/v1/cross-validations", json={"samples": cols, "model": MODEL, "duplicates": "reject"})
    assert r.status_code == 422 and r.json["errors"][0]["pointer"] == "/samples/x/1"


def test_simple_kriging_mean_defaults_to_the_declustered_mean(client, rng):
    """Clustered samples (a dense patch of high values): simple kriging without a mean uses the
    cell-declustered mean (Deutsch 1989), echoed in parameters.kriging.mean."""
    from lagwise.core.data.declustering import decluster

    x = np.concatenate([rng.uniform(0, 100, 60), rng.uniform(0, 10, 60)])
    y = np.concatenate([rng.uniform(0, 100, 60), rng.uniform(0, 10, 60)])
    values = np.concatenate([rng.normal(0, 1, 60), rng.normal(5, 1, 60)])
    body = {
        "samples": {"x": x.tolist(), "y": y.tolist(), "values": values.tolist()},
        "model": MODEL,
        "kriging": {"type": "simple"},
        "targets": {"x": [50.0], "y": [50.0]},
    }
    r = client.post("/v1/predictions", json=body)
    assert r.status_code == 200, r.json
    expected = decluster(np.column_stack([x, y]), values)
    assert expected.clustered
    assert r.json["parameters"]["kriging"]["mean"] == pytest.approx(expected.declustered_mean)
    assert r.json["parameters"]["kriging"]["mean"] < values.mean()


def _kriging_body(**options):
    rng = np.random.default_rng(8)
    xy = rng.uniform(0, 100, (40, 2))
    model = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 1.0, "range": 40}]}
    return {
        "samples": {"x": xy[:, 0].tolist(), "y": xy[:, 1].tolist(), "values": rng.normal(5, 1, 40).tolist()},
        "model": model,
        **options,
    }


def test_kriging_and_scheme_without_type_keep_their_defaults(client):
    """Older requests that leave out ``type`` are still read (ordinary kriging, leave-one-out), though the
    contract asks for ``type`` so that its either/or forms are told apart."""
    plain = client.post("/v1/cross-validations", json=_kriging_body()).json
    untyped = client.post(
        "/v1/cross-validations", json=_kriging_body(kriging={"nugget_as": "micro_scale"}, scheme={})
    ).json
    assert untyped["parameters"]["kriging"]["type"] == "ordinary"
    assert untyped["statistics"] == plain["statistics"]


@pytest.mark.parametrize(
    ("options", "pointer"),
    [
        ({"kriging": {"type": "ordinary", "drift": "linear"}}, "/kriging/drift"),
        ({"kriging": {"type": "universal", "mean": 1.0, "drift": "linear"}}, "/kriging/mean"),
        ({"kriging": {"type": "universal"}}, "/kriging/drift"),
        ({"scheme": {"type": "leave_one_out", "folds": 5}}, "/scheme/folds"),
    ],
)
def test_a_member_of_another_kriging_form_is_named(client, options, pointer):
    """A member that belongs to another form is refused by name (never silently ignored)."""
    r = client.post("/v1/cross-validations", json=_kriging_body(**options))
    assert r.status_code == 422 and [e["pointer"] for e in r.json["errors"]] == [pointer], r.json
