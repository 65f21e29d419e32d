"""POST /v1/analyses: the variogram map stage (``variogram_map.method`` exact|grid|auto, ``tolerance``).

Reference for the values: the separate POST /v1/variogram-maps on the same samples (the
exact map is checked against brute force in tests/reference/test_map_brute_force.py, the
grid map against the exact one within its bounds in tests/reference/test_grid_map_bounds.py);
the analysis must draw the map that endpoint computes with the same method.
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.api import create_app
from lagwise.api.settings import Settings
from lagwise.core.limits import Limits

from tests.conftest import random_columns

URL = "/v1/analyses"
SHORT = {"lags": {"width": 5.0, "count": 4}}  # classes to 20 on a 100 square: few pairs beside the map's


def _analysis(client, samples, **extra):
    body = {"samples": samples, "figures": ["variogram_map"], "fit": {"anisotropy": "none"}, **extra}
    r = client.post(URL, json=body)
    assert r.status_code == 200, r.json
    return r.json


def test_auto_is_the_default_and_changes_nothing_for_small_inputs(client, rng):
    samples = random_columns(rng, n=150)
    default = _analysis(client, samples)
    exact = _analysis(client, samples, variogram_map={"method": "exact"})
    used = default["parameters"]["variogram_map"]
    assert used["method_requested"] == "auto" and used["method"] == "exact" and "grid" not in used
    assert exact["parameters"]["variogram_map"]["method_requested"] == "exact"
    assert default["figures"]["variogram_map"] == exact["figures"]["variogram_map"]
    for section in ("summary", "experimental", "fit", "cross_validation", "warnings", "verdict"):
        assert default[section] == exact[section], section
    same = {k: v for k, v in default["parameters"].items() if k != "variogram_map"}
    assert same == {k: v for k, v in exact["parameters"].items() if k != "variogram_map"}


def test_grid_map_echoes_its_grid_and_matches_the_separate_endpoint(client, rng):
    samples = random_columns(rng, n=400)
    doc = _analysis(client, samples, variogram_map={"method": "grid", "tolerance": 0.05})
    used = doc["parameters"]["variogram_map"]
    assert used["method"] == "grid" and used["method_requested"] == "grid" and used["tolerance"] == 0.05
    assert used["grid"]["source"] == "binned" and used["grid"]["tolerance"] == 0.05
    separate = client.post(
        "/v1/variogram-maps",
        json={"samples": samples, "method": "grid", "tolerance": 0.05, "cell_size": used["cell_size"]},
    ).json
    assert separate["parameters"]["grid"] == used["grid"] and separate["parameters"]["cells"] == used["cells"]
    assert doc["figures"]["variogram_map"] != _analysis(client, samples)["figures"]["variogram_map"]


def test_flagged_cells_are_warned_about(client, rng):
    doc = _analysis(client, random_columns(rng, n=300), variogram_map={"method": "grid", "tolerance": 1e-9})
    flagged = doc["parameters"]["variogram_map"]["grid"]["flagged_cells"]
    assert flagged > 0
    assert any(w.startswith(f"{flagged} variogram map cells have a grid error bound") for w in doc["warnings"])


def test_auto_turns_to_grid_when_the_exact_map_is_over_the_pair_limit(rng):
    """The variogram classes need some 2.7e5 pairs of work (the column sweep's runs most of it), the exact
    map (reaching about 70) some 5e5."""
    limits = Limits(max_pairs=400_000)
    client = create_app({"TESTING": True}, settings=Settings(limits=limits)).test_client()
    samples = random_columns(rng, n=600)
    doc = _analysis(client, samples, variogram=SHORT)
    assert doc["parameters"]["variogram_map"]["method"] == "grid"
    refused = client.post(
        URL,
        json={
            "samples": samples,
            "figures": ["variogram_map"],
            "fit": {"anisotropy": "none"},
            "variogram": SHORT,
            "variogram_map": {"method": "exact"},
        },
    )
    assert refused.status_code == 422 and refused.json["limit"] == "LAGWISE_MAX_PAIRS", refused.json


def test_no_map_no_map_parameters(client, rng):
    r = client.post(URL, json={"samples": random_columns(rng, n=80), "variogram_map": {"method": "grid"}})
    assert r.status_code == 200, r.json
    assert r.json["parameters"]["variogram_map"] is None


@pytest.mark.parametrize(
    ("extra", "dim", "pointer"),
    [
        ({"variogram_map": {"method": "fastest"}}, 2, "/variogram_map/method"),
        ({"variogram_map": {"tolerance": 1.5}}, 2, "/variogram_map/tolerance"),
        ({"variogram_map": {"tolerance": 0}}, 2, "/variogram_map/tolerance"),
        ({"variogram_map": {"method": "grid"}}, 3, "/variogram_map/method"),
        (
            {"variogram_map": {"method": "grid"}, "variogram": {"statistic": "semivariance_robust"}},
            2,
            "/variogram_map/method",
        ),
    ],
)
def test_bad_map_stage_is_refused_before_any_work(client, rng, extra, dim, pointer):
    body = {"samples": random_columns(rng, n=80, dim=dim), "figures": ["variogram_map"], **extra}
    r = client.post(URL, json=body)
    assert r.status_code == 422, r.json
    assert pointer in [e["pointer"] for e in r.json["errors"]], r.json["errors"]


def test_grid_map_of_a_robust_variogram_is_exact_under_auto(client, rng):
    doc = _analysis(client, random_columns(rng, n=120), variogram={"statistic": "semivariance_robust"})
    assert doc["parameters"]["variogram_map"]["method"] == "exact"
    assert np.isfinite(doc["parameters"]["variogram_map"]["cell_size"])
