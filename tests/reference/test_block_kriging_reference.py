"""Block kriging against a dense solve written here from the published formulas.

Journel & Huijbregts (1978), Mining Geostatistics, ch. V: the block-kriging system of
a block V keeps the samples' covariance matrix and replaces the right-hand side by
the sample-to-block average covariances C(x_i, V); the block variance is
C(V, V) - sum lambda_i C(x_i, V) - mu (ordinary kriging). Averages are over the
discretisation points (centres of equal sub-cells, built here independently), with
the continuous part of the model (the nugget averages out over a block; DESIGN §11).
Also: the block estimate is the mean of the point estimates at the discretisation
points (kriging is linear in its right-hand side; unique neighbourhood) and the block
variance is below the mean point variance.
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.kriging.blocks import Blocks
from lagwise.core.kriging.neighbourhood import Neighbourhood
from lagwise.core.kriging.prediction import predict
from lagwise.core.kriging.systems import KrigingSpec
from lagwise.core.modelling.models import Structure, VariogramModel

NUGGET, SILL, RANGE = 0.2, 1.5, 35.0
MODEL = VariogramModel(NUGGET, (Structure("spherical", SILL, RANGE),))
BLOCKS = Blocks((20.0, 12.0), (4, 3))


def spherical_covariance(h):
    """C_s(h) = c (1 - 1.5 h/a + 0.5 (h/a)^3) for h < a, else 0 (the spherical model, from memory)."""
    u = np.minimum(h / RANGE, 1.0)
    return SILL * (1 - 1.5 * u + 0.5 * u**3)


def discretisation(centre, size=BLOCKS.size, counts=BLOCKS.discretisation):
    """Centres of counts[0] x counts[1] equal sub-cells of a block of ``size`` centred at ``centre``."""
    xs = centre[0] - size[0] / 2 + (np.arange(counts[0]) + 0.5) * size[0] / counts[0]
    ys = centre[1] - size[1] / 2 + (np.arange(counts[1]) + 0.5) * size[1] / counts[1]
    return np.array([(x, y) for y in ys for x in xs])


def dense_block_kriging(coords, values, centre, kind, mean=None):
    n = len(coords)
    K = spherical_covariance(np.linalg.norm(coords[:, None] - coords[None], axis=-1)) + NUGGET * np.eye(n)
    pts = discretisation(centre)
    k = spherical_covariance(np.linalg.norm(coords[:, None] - pts[None], axis=-1)).mean(axis=1)
    k00 = spherical_covariance(np.linalg.norm(pts[:, None] - pts[None], axis=-1)).mean()
    if kind == "simple":
        lam = np.linalg.solve(K, k)
        return mean + lam @ (values - mean), k00 - lam @ k
    F = np.ones((n, 1)) if kind == "ordinary" else np.column_stack([np.ones(n), coords])
    f = np.ones(1) if kind == "ordinary" else np.concatenate([[1.0], pts.mean(axis=0)])
    p = F.shape[1]
    A = np.block([[K, F], [F.T, np.zeros((p, p))]])
    solution = np.linalg.solve(A, np.concatenate([k, f]))
    lam, nu = solution[:n], solution[n:]
    return lam @ values, k00 - lam @ k - nu @ f


@pytest.fixture(scope="module")
def scene():
    rng = np.random.default_rng(5)
    coords = rng.uniform(0, 100, (70, 2))
    values = 2.0 + np.sin(coords[:, 0] / 20) + 0.3 * rng.normal(size=70)
    centres = rng.uniform(10, 90, (12, 2))
    return build_sample_set(values, coords[:, 0], coords[:, 1]), coords, values, centres


SPECS = {
    "simple": KrigingSpec("simple", mean=2.0),
    "ordinary": KrigingSpec(),
    "universal": KrigingSpec("universal", drift="linear"),
}


@pytest.mark.parametrize("kind", list(SPECS))
def test_unique_neighbourhood_equals_the_dense_solve(scene, kind):
    samples, coords, values, centres = scene
    result = predict(samples, MODEL, spec=SPECS[kind], targets=centres, blocks=BLOCKS)
    assert result.support == "block"
    for j, centre in enumerate(centres):
        est, var = dense_block_kriging(coords, values, centre, kind, mean=2.0)
        assert result.prediction.estimate[j] == pytest.approx(est, rel=1e-9, abs=1e-12)
        assert result.prediction.variance[j] == pytest.approx(var, rel=1e-8, abs=1e-12)


@pytest.mark.parametrize("kind", list(SPECS))
def test_moving_neighbourhood_chooses_neighbours_around_the_centre(scene, kind):
    samples, coords, values, centres = scene
    hood = Neighbourhood(max_points=16, min_points=4)
    result = predict(samples, MODEL, spec=SPECS[kind], neighbourhood=hood, targets=centres, blocks=BLOCKS)
    for j, centre in enumerate(centres):
        near = np.argsort(np.linalg.norm(coords - centre, axis=1))[:16]  # the 16 samples nearest the centre
        est, var = dense_block_kriging(coords[near], values[near], centre, kind, mean=2.0)
        assert result.prediction.estimate[j] == pytest.approx(est, rel=1e-8, abs=1e-12)
        assert result.prediction.variance[j] == pytest.approx(var, rel=1e-7, abs=1e-12)


@pytest.mark.parametrize("kind", list(SPECS))
def test_block_estimate_is_the_mean_of_point_estimates(scene, kind):
    """Linearity of kriging (unique neighbourhood): the block weights are the mean of the point weights."""
    samples, _, _, centres = scene
    blocks = predict(samples, MODEL, spec=SPECS[kind], targets=centres, blocks=BLOCKS).prediction
    for j, centre in enumerate(centres):
        points = predict(samples, MODEL, spec=SPECS[kind], targets=discretisation(centre)).prediction
        assert blocks.estimate[j] == pytest.approx(points.estimate.mean(), rel=1e-10)
        assert blocks.variance[j] < points.variance.mean()


def test_one_point_block_without_nugget_is_point_kriging(scene):
    samples, _, _, centres = scene
    model = VariogramModel(0.0, MODEL.structures)
    block = predict(samples, model, targets=centres, blocks=Blocks((10.0, 10.0), (1, 1))).prediction
    point = predict(samples, model, targets=centres).prediction
    np.testing.assert_allclose(block.estimate, point.estimate, rtol=1e-12)
    np.testing.assert_allclose(block.variance, point.variance, rtol=1e-10)


def test_finer_discretisation_converges(scene):
    """The block averages are Riemann sums of integrals: 8 x 8 and 16 x 16 points agree closely."""
    samples, _, _, centres = scene
    coarse = predict(samples, MODEL, targets=centres, blocks=Blocks(BLOCKS.size, (8, 8))).prediction
    fine = predict(samples, MODEL, targets=centres, blocks=Blocks(BLOCKS.size, (16, 16))).prediction
    np.testing.assert_allclose(coarse.estimate, fine.estimate, rtol=5e-3)
    np.testing.assert_allclose(coarse.variance, fine.variance, rtol=2e-2)
