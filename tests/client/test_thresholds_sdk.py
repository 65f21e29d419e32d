"""SDK transform, thresholds and blocks on predict, cross_validate and analyze, against gunicorn on 127.0.0.1."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise_client import Lagwise
from lagwise_client.models import VariogramModel
from scipy.stats import norm


@pytest.fixture()
def lw(service_url):
    with Lagwise(service_url) as client:
        yield client


@pytest.fixture()
def data():
    rng = np.random.default_rng(8)
    x, y = rng.uniform(0, 60, 50), rng.uniform(0, 40, 50)
    return x, y, np.exp(np.sin(x / 12) + rng.normal(0, 0.3, 50))


MODEL = {"nugget": 0.05, "structures": [{"family": "spherical", "partial_sill": 0.4, "range": 25.0}]}
GRID = {"origin": [1, 1], "spacing": [4, 4], "shape": [15, 10]}


def test_predict_with_a_log_transform_and_thresholds(lw, data):
    x, y, v = data
    result = lw.predict(x=x, y=y, values=v, model=MODEL, grid=GRID, transform="log", thresholds=[1.5, 3.0])
    assert result.support == "point" and result.parameters["transform"]["kind"] == "log"
    grid = result.exceedance_grid(1.5)
    assert grid.shape == (10, 15) and np.all((grid >= 0) & (grid <= 1))
    inner = lw.predict(x=x, y=y, values=np.log(v), model=MODEL, grid=GRID)
    # scipy.stats.norm.sf at the log of the threshold, from the log-space estimate and variance
    expected = norm.sf((np.log(1.5) - inner.to_grid("estimate")) / np.sqrt(inner.to_grid("variance")))
    np.testing.assert_allclose(grid, expected, rtol=1e-10, atol=1e-15)
    with pytest.raises(KeyError):
        result.exceedance_grid(2.0)


def test_blocks_and_a_replayed_fitted_model(lw, data):
    x, y, v = data
    fit = lw.fit_model(x=x, y=y, values=v, transform="log", families=["spherical"])
    assert fit.model.transform == "log" and fit.model.to_dict()["transform"] == "log"
    replay = lw.predict(x=x, y=y, values=v, model=fit.model, grid=GRID)
    assert replay.parameters["transform"]["kind"] == "log"
    cv = lw.cross_validate(x=x, y=y, values=v, model=fit.model)
    assert cv.parameters["transform"]["kind"] == "log"
    logs = np.log(v)
    blocks = lw.predict(x=x, y=y, values=logs, model=MODEL, grid=GRID, blocks={"size": [4, 4]}, thresholds=[0.5])
    points = lw.predict(x=x, y=y, values=logs, model=MODEL, grid=GRID)
    assert blocks.support == "block"
    assert np.all(blocks.to_grid("variance") < points.to_grid("variance"))
    assert blocks.exceedance_grid(0.5).shape == (10, 15)


def test_analyze_with_thresholds_gives_grids_and_classes(lw, data):
    x, y, v = data
    result = lw.analyze(
        x=x,
        y=y,
        values=v,
        transform="log",
        fit={"compare": False},
        prediction={"grid": GRID},
        thresholds=[2.0],
    )
    assert result.model.transform == "log"
    assert result.exceedance_grid(2.0).shape == (10, 15)
    rows = result.probability_classes(2.0)
    assert [r["class"] for r in rows] == ["below", "uncertain", "above"]
    assert sum(r["count"] for r in rows) == 150
    with pytest.raises(ValueError):
        lw.analyze(x=x, y=y, values=v, thresholds=[2.0])


def test_model_transform_round_trips_without_a_service():
    model = VariogramModel.from_dict({**MODEL, "transform": "normal_score"})
    assert model.to_dict()["transform"] == "normal_score"
    assert "transform" not in VariogramModel.from_dict(MODEL).to_dict()
