"""The default kriging limit fits the default deadline: a prediction at the limit finishes in time.

Against a real ``lagwise serve`` with its defaults (60 s deadline, ``LAGWISE_MAX_KRIGING_FLOPS``
1e11): a moving-neighbourhood prediction estimated at 95 % of the limit must answer 200 within
the deadline plus 5 s, one at 105 % must be refused at once. The rate the worker reached
(operations of :func:`lagwise.core.kriging.cost.prediction_flops` per second) is printed.
"""

from __future__ import annotations

import json
import time

import numpy as np
import pytest
import requests
from lagwise.core.kriging.cost import prediction_flops
from lagwise.core.kriging.neighbourhood import Neighbourhood
from lagwise.core.limits import Limits

from tests.live import running_service

pytestmark = pytest.mark.slow

DEADLINE = 60.0
SAMPLES = 3000
NEIGHBOURS = 64
MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 1.0, "range": 30.0}]}


def _targets_for(fraction: float) -> int:
    per_target = prediction_flops(SAMPLES, 1, Neighbourhood(max_points=NEIGHBOURS), 1)
    return int(fraction * Limits().max_kriging_flops / per_target)


def _body(m: int) -> str:
    rng = np.random.default_rng(11)
    xy, targets = rng.uniform(0, 100, (SAMPLES, 2)).round(4), rng.uniform(0, 100, (m, 2)).round(4)
    return json.dumps(
        {
            "samples": {"x": xy[:, 0].tolist(), "y": xy[:, 1].tolist(), "values": rng.normal(size=SAMPLES).tolist()},
            "model": MODEL,
            "neighbourhood": {"max_points": NEIGHBOURS},
            "targets": {"x": targets[:, 0].tolist(), "y": targets[:, 1].tolist()},
        }
    )


def test_a_prediction_at_the_default_limit_finishes_within_the_deadline():
    with running_service(workers=2) as url:
        over = _targets_for(1.05)
        start = time.perf_counter()
        r = requests.post(url + "/v1/predictions", data=_body(over), headers={"Content-Type": "application/json"})
        assert r.status_code == 422 and r.json()["limit"] == "LAGWISE_MAX_KRIGING_FLOPS"
        assert time.perf_counter() - start < 5.0
        m = _targets_for(0.95)
        start = time.perf_counter()
        r = requests.post(url + "/v1/predictions", data=_body(m), headers={"Content-Type": "application/json"})
        seconds = time.perf_counter() - start
        operations = prediction_flops(SAMPLES, m, Neighbourhood(max_points=NEIGHBOURS), 1)
        print(f"\n{m} targets x {NEIGHBOURS} neighbours: {operations:.3g} operations in {seconds:.1f} s "
              f"({operations / seconds:.3g} per second); status {r.status_code}")  # fmt: skip
        assert r.status_code == 200, r.text[:300]
        assert seconds < DEADLINE + 5.0
