"""Unit tests of block discretisation and validation (lagwise.core.kriging.blocks)."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.errors import InvalidInput, LimitExceeded
from lagwise.core.kriging.blocks import Blocks, validate_blocks
from lagwise.core.kriging.prediction import predict
from lagwise.core.limits import Limits
from lagwise.core.modelling.models import Structure, VariogramModel
from lagwise.core.stages import PredictionOptions

MODEL = VariogramModel(0.1, (Structure("exponential", 1.0, 30.0),))


def test_offsets_are_sub_cell_centres_x_fastest():
    offsets = Blocks((4.0, 2.0), (2, 2)).offsets()
    assert offsets.tolist() == [[-1.0, -0.5], [1.0, -0.5], [-1.0, 0.5], [1.0, 0.5]]
    three = Blocks((3.0, 3.0, 1.0), (3, 1, 2)).offsets()
    assert three.shape == (6, 3) and np.allclose(three.mean(axis=0), 0.0)
    assert sorted(set(three[:, 0])) == [-1.0, 0.0, 1.0] and sorted(set(three[:, 2])) == [-0.25, 0.25]


@pytest.mark.parametrize(
    ("blocks", "pointer"),
    [
        (Blocks((1.0, 1.0), (0, 2)), "/blocks/discretisation/0"),
        (Blocks((1.0, 1.0), (2, 2.5)), "/blocks/discretisation/1"),  # type: ignore[arg-type]
        (Blocks((1.0, -1.0), (2, 2)), "/blocks/size/1"),
        (Blocks((1.0,), (2,)), "/blocks/size"),
        (Blocks((1.0, 1.0), (32, 33)), "/blocks/discretisation/1"),
        (Blocks((1.0, 1.0), (32, 32 + 0)), None),
    ],
)
def test_validation(blocks, pointer):
    if pointer is None:
        validate_blocks(blocks, 2)
        return
    with pytest.raises(InvalidInput) as caught:
        validate_blocks(blocks, 2)
    assert pointer in [i.pointer for i in caught.value.issues]


@pytest.fixture()
def samples():
    rng = np.random.default_rng(3)
    xy = rng.uniform(0, 100, (40, 2))
    return build_sample_set(np.exp(rng.normal(size=40)), xy[:, 0], xy[:, 1])


def test_discretisation_multiplies_the_estimated_cost(samples):
    targets = np.full((2000, 2), 50.0)
    limits = Limits(max_kriging_flops=5_000_000_000)
    predict(samples, MODEL, targets=targets, limits=limits)
    with pytest.raises(LimitExceeded):
        predict(samples, MODEL, targets=targets, blocks=Blocks((5.0, 5.0), (16, 16)), limits=limits)


def test_blocks_with_a_transform_are_refused(samples):
    with pytest.raises(InvalidInput) as caught:
        PredictionOptions(
            targets=np.array([[50.0, 50.0]]), blocks=Blocks((5, 5), (2, 2)), transform="log", model=MODEL
        ).validate(samples)
    assert caught.value.issues[0].pointer == "/blocks" and "/v1/simulations" in caught.value.issues[0].detail


def test_geographic_samples_cannot_take_blocks():
    rng = np.random.default_rng(1)
    lon, lat = rng.uniform(-1, 1, 30), rng.uniform(50, 51, 30)
    geo = build_sample_set(rng.normal(size=30), lon, lat, coordinates="geographic")
    with pytest.raises(InvalidInput) as caught:
        predict(geo, MODEL, targets=np.array([[0.0, 50.5]]), blocks=Blocks((100.0, 100.0), (2, 2)))
    assert caught.value.issues[0].pointer == "/blocks"
