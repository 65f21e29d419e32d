"""Kriging cost: batched solves sized by the memory budget, cross-validation under the kriging limits."""

from __future__ import annotations

import time
import tracemalloc

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.deadline import DeadlineExceeded, deadline
from lagwise.core.errors import LimitExceeded
from lagwise.core.kriging.cost import (
    BATCH_ENTRIES,
    ENTRY_OPERATIONS,
    TARGET_OPERATIONS,
    batch_rows,
    cross_validation_flops,
    prediction_flops,
    system_bytes,
)
from lagwise.core.kriging.cross_validation import Scheme, cross_validate
from lagwise.core.kriging.neighbourhood import Neighbourhood
from lagwise.core.kriging.prediction import predict
from lagwise.core.limits import Limits
from lagwise.core.modelling.models import Structure, VariogramModel

MODEL = VariogramModel(0.1, (Structure("spherical", 1.0, 30.0),))


def _samples(n, seed=3):
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 100, (n, 2))
    return build_sample_set(rng.normal(size=n), xy[:, 0], xy[:, 1])


def test_batches_fit_the_budget():
    budget = 32 * 2**20
    for k in (1, 24, 150, 400, 500):
        rows = batch_rows(k, 1, 3, budget)
        assert rows >= 1
        assert rows == 1 or rows * system_bytes(k, 1, 3) <= budget


def test_flops_follow_the_lu_count():
    # LU of an s x s matrix: s^3 / 3 multiply-adds, each solve 2 s^2 (Golub & Van Loan 2013, section 3.2);
    # plus the covariance entries built (k^2 + k per moving system) and a fixed cost per target.
    hood = Neighbourhood(max_points=20)
    e, t = ENTRY_OPERATIONS, TARGET_OPERATIONS
    assert prediction_flops(100, 7, hood, 1) == pytest.approx(7 * (t + e * (400 + 20) + 21**3 / 3 + 2 * 21**2))
    unique = e * 100**2 + 101**3 / 3 + 7 * (t + e * 100 + 2 * 101**2)
    assert prediction_flops(100, 7, Neighbourhood(), 1) == pytest.approx(unique)
    assert cross_validation_flops(100, None, hood, 1) == prediction_flops(100, 100, hood, 1)
    assert cross_validation_flops(100, 10, hood, 1) == pytest.approx(10 * prediction_flops(90, 10, hood, 1))


def test_leave_one_out_memory_stays_within_the_budget():
    # 300 systems of 150 neighbours each: one batch of them all takes 300 x 150^2 x 2 x 8 bytes
    # (about 108 MB) for the separation vectors alone; the budget of 32 MiB caps the batch.
    samples = _samples(300)
    limits = Limits(memory_budget_bytes=32 * 2**20)
    tracemalloc.start()
    try:
        result = cross_validate(samples, MODEL, neighbourhood=Neighbourhood(max_points=150), limits=limits)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert result.statistics["count"] == 300
    assert peak < 2 * limits.memory_budget_bytes


def test_batching_does_not_change_the_numbers():
    samples = _samples(120)
    hood = Neighbourhood(max_points=40)
    small = cross_validate(samples, MODEL, neighbourhood=hood, limits=Limits(memory_budget_bytes=1))
    large = cross_validate(samples, MODEL, neighbourhood=hood)
    np.testing.assert_allclose(small.estimate, large.estimate, rtol=1e-12)
    np.testing.assert_allclose(small.standard_deviation, large.standard_deviation, rtol=1e-12)


@pytest.mark.parametrize(
    "scheme, hood", [(Scheme(), Neighbourhood(max_points=50)), (Scheme("k_fold", 5), Neighbourhood())]
)
def test_cross_validation_is_under_the_kriging_flops_limit(scheme, hood):
    with pytest.raises(LimitExceeded) as info:
        cross_validate(_samples(200), MODEL, neighbourhood=hood, scheme=scheme, limits=Limits(max_kriging_flops=10**6))
    assert info.value.limit == "LAGWISE_MAX_KRIGING_FLOPS" and info.value.requested > 10**6
    assert "max_points" in info.value.advice


def test_unique_matrices_beyond_the_budget_are_refused_up_front():
    limits = Limits(memory_budget_bytes=2**20)
    with pytest.raises(LimitExceeded) as info:
        cross_validate(_samples(300), MODEL, limits=limits)
    assert info.value.limit == "LAGWISE_MEMORY_BUDGET_BYTES" and info.value.pointer == "/neighbourhood"
    with pytest.raises(LimitExceeded):
        predict(_samples(300), MODEL, targets=np.zeros((1, 2)), limits=limits)


@pytest.mark.parametrize("hood", [Neighbourhood(max_points=64), Neighbourhood()])
def test_a_costly_model_stops_soon_after_its_deadline(hood):
    # Matern (Bessel function per entry) with many samples: the batches between deadline checks hold at
    # most BATCH_ENTRIES covariance entries, so the work stops within about a second of the deadline.
    samples = _samples(4000 if hood.unique else 3000)
    matern = VariogramModel(0.1, (Structure("matern", 1.0, 30.0, 1.5),))
    limits = Limits(max_kriging_flops=10**14, memory_budget_bytes=2**30, max_unique_samples=5000)
    start = time.perf_counter()
    with pytest.raises(DeadlineExceeded), deadline(0.5):
        cross_validate(samples, matern, neighbourhood=hood, limits=limits)
    assert time.perf_counter() - start < 0.5 + 2.0
    assert batch_rows(64, 1, 2, 2**30) * 64 * 64 <= BATCH_ENTRIES
