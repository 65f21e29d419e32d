"""Kriging at scale: compiled covariances, targets in chunks, and a dense reference per target.

References: ``scipy.spatial.cKDTree`` for each target's 16 nearest samples and
``scipy.spatial.distance.cdist`` + ``numpy.linalg.solve`` for the ordinary kriging system
written out in full (Matheron's bordered system with a Lagrange multiplier; the
covariance C(h) = sill - gamma(h) from the model's own formulas); the numpy formulas of
:mod:`lagwise.core.modelling.models` for the compiled covariance kernel.
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.kriging.compiled import COMPILED_FAMILIES, compiled_covariances
from lagwise.core.kriging.neighbourhood import Neighbourhood
from lagwise.core.kriging.prediction import predict
from lagwise.core.limits import Limits
from lagwise.core.modelling.models import Anisotropy, Structure, VariogramModel
from scipy.spatial import cKDTree
from scipy.spatial.distance import cdist


@pytest.mark.parametrize("family", sorted(COMPILED_FAMILIES))
@pytest.mark.parametrize("dimension", [1, 2, 3])
def test_compiled_covariances_follow_the_model_formulas(family, dimension):
    rng = np.random.default_rng(4)
    a = rng.uniform(0, 100, (50, 9, dimension))
    b = rng.uniform(0, 100, (50, 3, dimension))
    anisotropy = Anisotropy(35.0, 0.4, 0.7) if dimension > 1 else Anisotropy()
    structures = (Structure(family, 0.7, 60.0, anisotropy=anisotropy), Structure("spherical", 0.3, 25.0))
    c0 = 1.0
    got = compiled_covariances(a, b, structures, c0)
    h = (a[:, :, None, :] - b[:, None, :, :]).reshape(-1, dimension)
    expected = (c0 - VariogramModel(0.0, structures).semivariance(h)).reshape(got.shape)
    np.testing.assert_allclose(got, expected, rtol=0, atol=1e-13)


def test_families_without_a_compiled_formula_use_numpy():
    a = np.zeros((2, 3, 2))
    assert compiled_covariances(a, a, (Structure("matern", 1.0, 10.0, extra=1.5),), 1.0) is None


def _field(n, seed=9):
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, 1000, n), rng.uniform(0, 1000, n)
    return build_sample_set(np.sin(x / 90) + np.cos(y / 130) + rng.normal(0, 0.1, n), x, y)


MODEL = VariogramModel(0.05, (Structure("spherical", 1.0, 300.0, anisotropy=Anisotropy(30.0, 0.6)),))


def test_targets_in_chunks_give_the_same_predictions():
    samples = _field(3000)
    targets = np.random.default_rng(2).uniform(0, 1000, (4000, 2))
    hood = Neighbourhood(max_points=16)
    whole = predict(samples, MODEL, neighbourhood=hood, targets=targets, limits=Limits(), workers=2)
    # A budget this small cuts the targets into chunks of a few dozen and the solves into small batches.
    tiny = Limits(memory_budget_bytes=200_000)
    chunked = predict(samples, MODEL, neighbourhood=hood, targets=targets, limits=tiny, workers=2)
    np.testing.assert_array_equal(chunked.prediction.estimate, whole.prediction.estimate)
    np.testing.assert_array_equal(chunked.prediction.variance, whole.prediction.variance)


def test_moving_neighbourhood_matches_the_dense_system_of_the_16_nearest_samples():
    samples = _field(2000, seed=3)
    targets = np.random.default_rng(8).uniform(0, 1000, (60, 2))
    iso = VariogramModel(0.05, (Structure("exponential", 1.0, 250.0),))
    result = predict(samples, iso, neighbourhood=Neighbourhood(max_points=16), targets=targets, workers=1)
    _, neighbours = cKDTree(samples.coords).query(targets, k=16)
    sill = iso.sill
    for t, idx in enumerate(neighbours):
        pts = samples.coords[idx]
        K = sill - iso.semivariance(cdist(pts, pts).ravel()).reshape(16, 16)
        np.fill_diagonal(K, sill)
        k0 = sill - iso.semivariance(cdist(pts, targets[t : t + 1]).ravel())
        A = np.block([[K, np.ones((16, 1))], [np.ones((1, 16)), np.zeros((1, 1))]])
        solution = np.linalg.solve(A, np.append(k0, 1.0))
        weights, multiplier = solution[:16], solution[16]
        estimate = weights @ samples.values[idx]
        variance = sill - weights @ k0 - multiplier
        assert result.prediction.estimate[t] == pytest.approx(estimate, rel=1e-10, abs=1e-12)
        assert result.prediction.variance[t] == pytest.approx(variance, rel=1e-9, abs=1e-12)
