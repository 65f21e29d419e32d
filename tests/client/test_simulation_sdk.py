"""SDK simulate(...) against a real gunicorn service on 127.0.0.1."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise_client import Lagwise, Simulation, ValidationError


@pytest.fixture()
def lw(service_url):
    with Lagwise(service_url) as client:
        yield client


@pytest.fixture()
def data():
    rng = np.random.default_rng(21)
    x, y = rng.uniform(0, 60, 40), rng.uniform(0, 40, 40)
    return x, y, np.exp(np.sin(x / 12) + rng.normal(0, 0.3, 40))


MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 0.9, "range": 25.0}]}
GRID = {"origin": [1, 1], "spacing": [2, 2], "shape": [30, 20]}


def test_simulate_gives_2d_arrays_per_statistic_threshold_block_and_realisation(lw, data):
    x, y, v = data
    result = lw.simulate(
        x=x,
        y=y,
        values=v,
        model=MODEL,
        grid=GRID,
        realisations=8,
        seed=3,
        thresholds=[1.2],
        blocks={"size": [10, 8]},
        return_realisations=True,
    )
    assert isinstance(result, Simulation)
    fields = result.realisation_grids()
    assert fields.shape == (8, 20, 30)
    np.testing.assert_allclose(result.to_grid("mean"), fields.mean(axis=0), rtol=1e-12)
    np.testing.assert_allclose(result.to_grid("p90"), np.quantile(fields, 0.9, axis=0), rtol=1e-12)
    np.testing.assert_allclose(result.exceedance_grid(1.2), (fields > 1.2).mean(axis=0))
    np.testing.assert_array_equal(result.realisation_grid(2), fields[2])
    blocks = fields.reshape(8, 5, 4, 6, 5).mean(axis=(2, 4))
    np.testing.assert_allclose(result.block_grid(), blocks.mean(axis=0), rtol=1e-12)
    np.testing.assert_allclose(result.block_grid(1.2), (blocks > 1.2).mean(axis=0))
    shares = (fields > 1.2).mean(axis=(1, 2))
    assert result.fraction_above(1.2)["mean"] == pytest.approx(shares.mean())
    assert result.parameters["seed"] == 3
    with pytest.raises(KeyError):
        result.exceedance_grid(5.0)


def test_simulate_defaults_stream_the_realisations(lw, data):
    x, y, v = data
    result = lw.simulate(x=x, y=y, values=v, model=MODEL, grid=GRID, realisations=4)
    assert result.realisations is None and result.blocks is None
    assert result.parameters["transform"]["kind"] == "normal_score"
    with pytest.raises(ValueError):
        result.realisation_grids()


def test_simulate_bad_input_is_a_validation_error(lw, data):
    x, y, v = data
    with pytest.raises(ValidationError) as exc:
        lw.simulate(x=x, y=y, values=v, model=MODEL, grid=GRID, realisations=2, blocks={"size": [8, 8]})
    assert "/blocks/size/0" in str(exc.value.errors)
