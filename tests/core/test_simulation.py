"""Conditional simulation: validation, limits, reproducibility, streaming passes, embedding enlargement."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.deadline import DeadlineExceeded, deadline
from lagwise.core.errors import InvalidInput, LimitExceeded
from lagwise.core.kriging.neighbourhood import Neighbourhood
from lagwise.core.kriging.prediction import Grid
from lagwise.core.kriging.systems import KrigingSpec
from lagwise.core.limits import Limits
from lagwise.core.modelling.models import Structure, VariogramModel
from lagwise.core.simulation import simulate
from lagwise.core.simulation.embedding import NEGATIVE_SHARE, embed

MODEL = VariogramModel(0.1, (Structure("spherical", 0.9, 12.0),))
GRID = Grid((0.0, 0.0), (1.0, 1.0), (40, 30))


@pytest.fixture(scope="module")
def samples():
    rng = np.random.default_rng(3)
    coords = rng.uniform(0, 40, (60, 2))
    values = rng.lognormal(0.0, 0.7, 60)
    return build_sample_set(values, coords[:, 0], coords[:, 1])


def run(samples, **options):
    arguments = {"grid": GRID, "realisations": 12, "thresholds": (1.0, 2.0)}
    arguments.update(options)
    return simulate(samples, options.pop("model", MODEL), **{k: v for k, v in arguments.items() if k != "model"})


def pointers(exc) -> list[str]:
    return [issue.pointer for issue in exc.value.issues]


def test_same_seed_same_bytes_another_seed_another_field(samples):
    a = run(samples, seed=7, return_realisations=True)
    b = run(samples, seed=7, return_realisations=True)
    c = run(samples, seed=8, return_realisations=True)
    assert a.realisations is not None and b.realisations is not None and c.realisations is not None
    assert a.realisations.tobytes() == b.realisations.tobytes()
    assert a.mean.tobytes() == b.mean.tobytes()
    assert np.mean(a.realisations != c.realisations) > 0.9


def test_passes_give_the_same_numbers_as_one_pass(samples):
    """A memory budget too small for one pass cuts the grid in passes that redraw the same fields."""
    whole = run(samples, block_size=(5.0, 5.0))
    cut = None
    for budget in range(600_000, 3_000_000, 10_000):  # the smallest budget that needs no more than 8 passes
        try:
            cut = run(samples, block_size=(5.0, 5.0), limits=Limits(memory_budget_bytes=budget))
            break
        except LimitExceeded:
            continue
    assert cut is not None
    assert whole.passes == 1 and cut.passes > 1
    assert np.array_equal(whole.quantiles["p50"], cut.quantiles["p50"])
    assert np.allclose(whole.mean, cut.mean, rtol=0, atol=1e-12)
    assert whole.blocks is not None and cut.blocks is not None
    assert np.allclose(whole.blocks.mean, cut.blocks.mean, rtol=0, atol=1e-12)
    assert [f for _, f in whole.above] == [f for _, f in cut.above]


def test_moving_neighbourhood_with_every_sample_equals_the_unique_one(samples):
    unique = run(samples, spec=KrigingSpec(type="ordinary"), return_realisations=True)
    moving = run(
        samples, spec=KrigingSpec(type="ordinary"), neighbourhood=Neighbourhood(max_points=60), return_realisations=True
    )
    assert unique.realisations is not None and moving.realisations is not None
    assert np.allclose(unique.realisations, moving.realisations, atol=1e-7)


def test_summaries_are_those_of_the_realisations(samples):
    result = run(samples, block_size=(10.0, 5.0), return_realisations=True)
    fields = result.realisations
    assert fields is not None
    assert np.allclose(result.mean, fields.mean(axis=0))
    assert np.allclose(result.variance, fields.var(axis=0))
    assert np.allclose(result.quantiles["p90"], np.quantile(fields, 0.9, axis=0))
    assert np.allclose(result.exceedance[1][1], (fields > 2.0).mean(axis=0))
    shares = (fields > 1.0).mean(axis=1)
    assert result.above[0][1].mean == pytest.approx(shares.mean())
    assert result.above[0][1].p10 == pytest.approx(np.quantile(shares, 0.1))
    blocks = fields.reshape(12, 6, 5, 4, 10).mean(axis=(2, 4)).reshape(12, -1)
    assert result.blocks is not None
    assert np.allclose(result.blocks.mean, blocks.mean(axis=0))
    assert np.allclose(result.blocks.exceedance[0][1], (blocks > 1.0).mean(axis=0))
    assert result.blocks.grid.shape == (4, 6)
    assert result.blocks.grid.origin == (4.5, 2.0)


def test_simple_kriging_mean_defaults_to_the_declustered_transformed_mean(samples):
    result = run(samples)
    assert result.spec.type == "simple"
    assert result.spec.mean is not None and abs(result.spec.mean) < 0.2  # normal scores


@pytest.mark.parametrize(
    ("options", "pointer"),
    [
        ({"realisations": 0}, "/realisations"),
        ({"realisations": -3}, "/realisations"),
        ({"thresholds": (1.0, float("nan"))}, "/thresholds/1"),
        ({"thresholds": (float("inf"),)}, "/thresholds/0"),
        ({"block_size": (3.0, 5.0)}, "/blocks/size/0"),
        ({"block_size": (4.0, 2.5)}, "/blocks/size/1"),
        ({"block_size": (0.0, 5.0)}, "/blocks/size/0"),
        ({"spec": KrigingSpec(type="universal", drift="linear")}, "/kriging/type"),
        ({"transform": "square_root"}, "/transform"),
        ({"model": VariogramModel(0.0, (Structure("linear", 1.0),))}, "/model"),
        ({"grid": Grid((0.0, 0.0), (0.0, 1.0), (4, 4))}, "/grid/spacing/0"),
        ({"seed": -1}, "/seed"),
    ],
)
def test_bad_input_names_the_field(samples, options, pointer):
    with pytest.raises(InvalidInput) as exc:
        run(samples, **options)
    assert pointer in pointers(exc)


def test_geographic_and_one_dimensional_samples_are_refused(samples):
    geographic = build_sample_set(
        np.array([1.0, 2.0]), np.array([5.0, 5.1]), np.array([50.0, 50.1]), coordinates="geographic"
    )
    with pytest.raises(InvalidInput) as exc:
        run(geographic)
    assert "/coordinates" in pointers(exc)
    line = build_sample_set(np.array([1.0, 2.0]), np.array([5.0, 6.0]))
    with pytest.raises(InvalidInput) as exc:
        run(line)
    assert "/samples" in pointers(exc)


def test_over_limit_work_is_refused_before_starting(samples):
    with pytest.raises(LimitExceeded) as exc:
        run(samples, limits=Limits(max_simulation_values=100_000))
    assert exc.value.limit == "LAGWISE_MAX_SIMULATION_VALUES"
    assert exc.value.pointer == "/realisations"
    with pytest.raises(LimitExceeded) as exc:
        run(samples, limits=Limits(max_embedding_nodes=1000))
    assert exc.value.limit == "LAGWISE_MAX_EMBEDDING_NODES"
    with pytest.raises(LimitExceeded) as exc:
        run(samples, return_realisations=True, limits=Limits(max_returned_values=10_000))
    assert exc.value.limit == "LAGWISE_MAX_RETURNED_VALUES"
    with pytest.raises(LimitExceeded) as exc:
        run(samples, return_realisations=True, limits=Limits(memory_budget_bytes=1_000_000))
    assert exc.value.limit == "LAGWISE_MEMORY_BUDGET_BYTES"


def test_model_in_the_wrong_units_is_warned_about(samples):
    result = run(samples, model=VariogramModel(0.5, (Structure("spherical", 4.5, 12.0),)))
    assert any("sill" in w and "transformed units" in w for w in result.warnings)
    assert not any("sill" in w for w in run(samples).warnings)


def test_embedding_is_enlarged_until_its_eigenvalues_are_non_negative():
    """A range as long as the lattice makes the smallest torus indefinite; a larger torus is not."""
    structural = VariogramModel(0.0, (Structure("gaussian", 1.0, 40.0),))
    embedding = embed(structural, (1.0, 1.0), (30, 30), max_nodes=1 << 22)
    assert embedding.enlargements > 0
    assert embedding.negative_share <= NEGATIVE_SHARE
    with pytest.raises(LimitExceeded) as exc:
        embed(structural, (1.0, 1.0), (30, 30), max_nodes=64 * 64)
    assert exc.value.limit == "LAGWISE_MAX_EMBEDDING_NODES"


def test_samples_outside_the_grid_extend_the_lattice(samples):
    far = replace(samples, coords=samples.coords + np.array([0.0, 25.0]))
    result = run(far)
    assert result.embedding.physical[1] > GRID.shape[1] + 20
    assert np.all(np.isfinite(result.mean))


def test_the_deadline_stops_a_simulation(samples):
    with deadline(1e-9), pytest.raises(DeadlineExceeded):
        run(samples, realisations=50)
