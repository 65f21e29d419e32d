"""API tests: variogram maps by the grid method (POST /v1/variogram-maps with ``method``).

Reference for the values: the exact map of the same request (pair enumeration, checked
against brute force in tests/reference/test_map_brute_force.py); each grid cell must lie
within its stated bound of it.
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.api import create_app
from lagwise.api.settings import Settings
from lagwise.core.limits import Limits

from tests.api.test_bad_input import assert_problem
from tests.api.test_raster_api import _raster
from tests.conftest import random_columns

URL = "/v1/variogram-maps"


def _array(rows, dtype=float):
    return np.array([[np.nan if v is None else v for v in row] for row in rows], dtype=dtype)


def test_grid_map_of_scattered_samples_states_grid_method_and_bounds(client, rng):
    body = {"samples": random_columns(rng, n=600), "cell_size": 10.0, "cells": 4, "method": "grid"}
    r = client.post(URL, json=body)
    assert r.status_code == 200, r.json
    doc = r.json
    params = doc["parameters"]
    assert params["method"] == "grid" and params["grid"]["source"] == "binned"
    assert params["grid"]["tolerance"] == 0.01 and params["grid"]["spacing"] == [10.0 / 31, 10.0 / 31]
    bound, exceeded = _array(doc["error_bound"]), np.array(doc["bound_exceeded"])
    assert bound.shape == exceeded.shape == (9, 9) and np.array(doc["pair_bound"]).shape == (9, 9)
    assert params["grid"]["flagged_cells"] == int(exceeded.sum())
    exact = client.post(URL, json={**body, "method": "exact"}).json
    assert exact["parameters"]["method"] == "exact" and "error_bound" not in exact and "grid" not in exact["parameters"]
    g, e = _array(doc["values"]), _array(exact["values"])
    assert np.all(np.abs(np.array(doc["pairs"]) - np.array(exact["pairs"])) <= np.array(doc["pair_bound"]))
    both = np.isfinite(g) & np.isfinite(e) & np.isfinite(bound)
    assert both.sum() > 60
    assert np.all(np.abs(g - e)[both] <= bound[both] * np.abs(g[both]) + 1e-12)
    assert doc["provenance"]["input_sha256"] == exact["provenance"]["input_sha256"]


def test_tolerance_sets_the_flags(client, rng):
    body = {"samples": random_columns(rng, n=300), "cell_size": 12.0, "cells": 3, "method": "grid"}
    strict = client.post(URL, json={**body, "tolerance": 1e-9}).json
    loose = client.post(URL, json={**body, "tolerance": 0.999}).json
    assert strict["parameters"]["grid"]["tolerance"] == 1e-9
    assert strict["parameters"]["grid"]["flagged_cells"] > loose["parameters"]["grid"]["flagged_cells"]
    assert any("error bound above" in w for w in strict["warnings"])


def test_noncentred_covariance_by_grid(client, rng):
    body = {"samples": random_columns(rng, n=300), "cells": 3, "method": "grid", "statistic": "covariance_noncentered"}
    r = client.post(URL, json=body)
    assert r.status_code == 200, r.json
    assert r.json["parameters"]["method"] == "grid" and r.json["parameters"]["statistic"] == "covariance_noncentered"


def test_auto_is_exact_within_the_pair_limit(client, rng):
    body = {"samples": random_columns(rng, n=100), "cell_size": 10.0, "cells": 3, "method": "auto"}
    r = client.post(URL, json=body)
    assert r.status_code == 200 and r.json["parameters"]["method"] == "exact" and "error_bound" not in r.json


def test_auto_turns_to_grid_over_the_pair_limit(small_limits_client, rng):
    body = {"samples": random_columns(rng, n=50), "cell_size": 20.0, "cells": 5}
    refused = small_limits_client.post(URL, json=body)
    assert_problem(refused, 422, "limit-exceeded")
    assert refused.json["limit"] == "LAGWISE_MAX_PAIRS"
    r = small_limits_client.post(URL, json={**body, "method": "auto"})
    assert r.status_code == 200, r.json
    assert r.json["parameters"]["method"] == "grid" and "error_bound" in r.json


def test_auto_stays_exact_for_a_statistic_the_grid_does_not_bound(small_limits_client, rng):
    body = {"samples": random_columns(rng, n=50), "cell_size": 20.0, "cells": 5, "method": "auto"}
    r = small_limits_client.post(URL, json={**body, "statistic": "madogram"})
    assert_problem(r, 422, "limit-exceeded")
    assert r.json["limit"] == "LAGWISE_MAX_PAIRS"


def test_raster_map_states_its_own_grid(client, rng):
    r = client.post(URL, json={"samples": {"raster": _raster(rng)}, "cell_size": 2.0, "cells": 3, "method": "grid"})
    assert r.status_code == 200, r.json
    assert r.json["parameters"]["method"] == "grid" and r.json["parameters"]["grid"]["source"] == "raster"
    assert set(np.array(r.json["pair_bound"]).ravel()) == {0} and not np.array(r.json["bound_exceeded"]).any()


def test_raster_map_exact_takes_the_cells_as_points(client, rng):
    body = {"samples": {"raster": _raster(rng)}, "cell_size": 2.0, "cells": 3}
    by_fft = client.post(URL, json=body).json
    exact = client.post(URL, json={**body, "method": "exact"}).json
    assert exact["parameters"]["method"] == "exact" and not exact["warnings"][1:]
    assert exact["pairs"] == by_fft["pairs"]
    np.testing.assert_allclose(_array(exact["values"]), _array(by_fft["values"]), rtol=1e-9)


@pytest.mark.parametrize(
    ("change", "pointer"),
    [
        ({"statistic": "madogram"}, "/statistic"),
        ({"statistic": "covariance"}, "/statistic"),
        ({"method": "fastest"}, "/method"),
        ({"tolerance": 1.5}, "/tolerance"),
        ({"tolerance": 0}, "/tolerance"),
        ({"cell_size": 0.001}, "/cell_size"),
    ],
)
def test_bad_grid_requests_name_the_field(client, rng, change, pointer):
    body = {"samples": random_columns(rng, n=100), "cell_size": 10.0, "cells": 3, "method": "grid", **change}
    assert_problem(client.post(URL, json=body), 422, "invalid-input", [pointer])


def test_grid_method_refuses_3d_samples(client, rng):
    body = {"samples": random_columns(rng, n=100, dim=3), "cell_size": 10.0, "cells": 3, "method": "grid"}
    assert_problem(client.post(URL, json=body), 422, "invalid-input", ["/method"])


def test_raster_grid_map_of_a_pair_statistic_refused(client, rng):
    body = {
        "samples": {"raster": _raster(rng)},
        "cell_size": 2.0,
        "cells": 3,
        "method": "grid",
        "statistic": "madogram",
    }
    assert_problem(client.post(URL, json=body), 422, "invalid-input", ["/statistic"])


def test_memory_budget_refused_before_work(rng):
    client = create_app({"TESTING": True}, settings=Settings(limits=Limits(memory_budget_bytes=10_000))).test_client()
    body = {"samples": random_columns(rng, n=100), "cell_size": 10.0, "cells": 3, "method": "grid"}
    doc = assert_problem(client.post(URL, json=body), 422, "limit-exceeded")
    assert doc["limit"] == "LAGWISE_MEMORY_BUDGET_BYTES" and doc["allowed"] == 10_000
