"""Conditional simulation against outside references.

* Simple-kriging estimates and variances are written here from the published formulas
  (Journel & Huijbregts 1978, *Mining Geostatistics*, ch. V; the spherical covariance
  of Matheron 1962 / Chilès & Delfiner 2012, eq. 2.47), independently of the service's
  kriging code. Without transform, realisations conditioned by simple kriging are draws
  from N(estimate, kriging variance) at each node (Journel 1974; Chilès & Delfiner
  2012, section 7.3.1), so the ensemble mean's z-scores are N(0, 1)
  (scipy.stats.kstest), R times the ensemble variance over the kriging variance is
  chi-squared with R - 1 degrees of freedom (scipy.stats.chi2), exceedance counts are
  binomial with the Gaussian probability (scipy.stats.binom, scipy.stats.norm) and
  block averages are Gaussian with the block simple-kriging estimate and variance.
  Conditioned by ordinary kriging, the ensemble converges to the ordinary-kriging estimate
  and variance (dense solve with the Lagrange multiplier, same chapter).
* Without nugget, kriging -- hence every conditional realisation -- equals the data
  at the samples (exact interpolation, Chilès & Delfiner 2012, section 3.3).
* The variogram of weakly conditioned realisations, computed here by brute force on
  the grid with numpy, is the model's; the normal-score back-transform reproduces the
  data's histogram (two-sample Kolmogorov-Smirnov, scipy.stats.ks_2samp).
* The circulant embedding's fields have the model's covariance (Dietrich & Newsam
  1997): empirical covariances over many fields, and so do the values drawn at
  off-lattice sample locations.
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.kriging.prediction import Grid
from lagwise.core.kriging.systems import KrigingSpec
from lagwise.core.modelling.models import Anisotropy, Structure, VariogramModel
from lagwise.core.simulation import simulate
from lagwise.core.simulation.embedding import embed
from lagwise.core.simulation.points import prepare
from scipy import stats

SILL, RANGE = 1.0, 6.0


def spherical_covariance(h: np.ndarray, sill: float = SILL, a: float = RANGE) -> np.ndarray:
    """C(h) = c (1 - 1.5 h/a + 0.5 (h/a)^3) for h < a, 0 beyond (Matheron 1962)."""
    r = np.minimum(np.asarray(h) / a, 1.0)
    return sill * (1.0 - 1.5 * r + 0.5 * r**3)


def covariance(a: np.ndarray, b: np.ndarray, nugget: float) -> np.ndarray:
    """Point covariance with a micro-scale nugget on coincident points."""
    h = np.linalg.norm(a[:, None, :] - b[None, :, :], axis=-1)
    return spherical_covariance(h) + nugget * (h == 0)


def simple_kriging(coords, values, mean, targets, nugget):
    """Simple kriging, Journel & Huijbregts (1978) ch. V: lambda = K^-1 k, sigma^2 = C(0) - lambda' k."""
    K = covariance(coords, coords, nugget)
    k = covariance(coords, targets, nugget)
    lam = np.linalg.solve(K, k)
    estimate = mean + lam.T @ (values - mean)
    variance = SILL + nugget - np.einsum("nm,nm->m", lam, k)
    return estimate, variance


def block_simple_kriging(coords, values, mean, blocks, nugget):
    """Block simple kriging over node sets (ch. V): averaged point-to-block and within-block covariances."""
    K = covariance(coords, coords, nugget)
    estimates, variances = [], []
    for nodes in blocks:
        k = covariance(coords, nodes, nugget).mean(axis=1)
        within = covariance(nodes, nodes, nugget).mean()
        lam = np.linalg.solve(K, k)
        estimates.append(mean + lam @ (values - mean))
        variances.append(within - lam @ k)
    return np.array(estimates), np.array(variances)


def model(nugget: float = 0.0) -> VariogramModel:
    return VariogramModel(nugget, (Structure("spherical", SILL, RANGE),))


@pytest.fixture(scope="module")
def scene():
    rng = np.random.default_rng(5)
    coords = rng.uniform(2, 46, (14, 2))
    values = rng.normal(0.3, 1.0, 14)
    samples = build_sample_set(values, coords[:, 0], coords[:, 1])
    grid = Grid((0.0, 0.0), (1.0, 1.0), (48, 48))
    return samples, coords, values, grid


@pytest.fixture(scope="module")
def ensemble(scene):
    samples, _, _, grid = scene
    return simulate(
        samples,
        model(0.1),
        grid=grid,
        transform="none",
        spec=KrigingSpec(type="simple", mean=0.0),
        realisations=1500,
        seed=11,
        thresholds=(0.5,),
        block_size=(4.0, 4.0),
    )


def _spread_nodes(grid: Grid, step: int) -> np.ndarray:
    """Node indexes step nodes apart (step >= range: nearly independent kriging errors)."""
    nx, ny = grid.shape
    ix, iy = np.meshgrid(np.arange(1, nx, step), np.arange(1, ny, step))
    return (iy * nx + ix).ravel()


def test_ensemble_mean_and_variance_converge_to_simple_kriging(scene, ensemble):
    """z-scores of the ensemble mean ~ N(0, 1) (scipy.stats.kstest); R s^2 / sigma^2 ~ chi2(R - 1) (scipy.stats.chi2)."""
    samples, coords, values, grid = scene
    picked = _spread_nodes(grid, 7)
    estimate, variance = simple_kriging(coords, values, 0.0, grid.points()[picked], 0.1)
    r = 1500
    z = (ensemble.mean[picked] - estimate) / np.sqrt(variance / r)
    assert stats.kstest(z, "norm").pvalue > 1e-3
    assert np.abs(z).max() < 4.5
    scaled = r * ensemble.variance[picked] / variance
    assert stats.kstest(stats.chi2.cdf(scaled, r - 1), "uniform").pvalue > 1e-3
    # all nodes: the kriging variance is reproduced within 5 standard errors of a variance estimate
    est_all, var_all = simple_kriging(coords, values, 0.0, grid.points(), 0.1)
    assert np.all(np.abs(ensemble.variance / var_all - 1) < 5 * np.sqrt(2 / r))
    assert np.all(np.abs(ensemble.mean - est_all) < 5 * np.sqrt(var_all / r))


def test_node_exceedance_is_binomial_around_the_gaussian_probability(scene, ensemble):
    """Counts above t ~ Binomial(R, norm.sf((t - estimate) / sd)) (scipy.stats.binom, scipy.stats.norm)."""
    _, coords, values, grid = scene
    estimate, variance = simple_kriging(coords, values, 0.0, grid.points(), 0.1)
    probability = stats.norm.sf((0.5 - estimate) / np.sqrt(variance))
    threshold, share = ensemble.exceedance[0]
    assert threshold == 0.5
    counts = np.rint(share * 1500)
    alpha = 1e-4 / grid.size  # Bonferroni over every node
    low, high = stats.binom.ppf(alpha / 2, 1500, probability), stats.binom.isf(alpha / 2, 1500, probability)
    assert np.all((counts >= low) & (counts <= high))


def test_block_exceedance_matches_dense_block_simple_kriging(scene, ensemble):
    """Block averages ~ N(block SK estimate, block SK variance): binomial exceedance counts (scipy.stats.binom)."""
    _, coords, values, grid = scene
    points = grid.points().reshape(48, 48, 2)
    blocks = [points[4 * j : 4 * j + 4, 4 * i : 4 * i + 4].reshape(-1, 2) for j in range(12) for i in range(12)]
    estimate, variance = block_simple_kriging(coords, values, 0.0, blocks, 0.1)
    assert ensemble.blocks is not None
    centres = ensemble.blocks.grid.points()
    assert np.allclose(centres, [b.mean(axis=0) for b in blocks])
    z = (ensemble.blocks.mean - estimate) / np.sqrt(variance / 1500)
    assert stats.kstest(z[::3], "norm").pvalue > 1e-3
    probability = stats.norm.sf((0.5 - estimate) / np.sqrt(variance))
    counts = np.rint(ensemble.blocks.exceedance[0][1] * 1500)
    alpha = 1e-4 / len(blocks)
    low, high = stats.binom.ppf(alpha / 2, 1500, probability), stats.binom.isf(alpha / 2, 1500, probability)
    assert np.all((counts >= low) & (counts <= high))


@pytest.mark.parametrize("nugget", [0.0, 0.2])
def test_data_are_honoured_at_samples_on_nodes(nugget):
    """Exact interpolation at the samples (Chilès & Delfiner 2012, section 3.3); a micro-scale nugget keeps it."""
    rng = np.random.default_rng(2)
    nodes = rng.choice(30 * 30, 20, replace=False)
    coords = np.column_stack([nodes % 30 * 2.0 + 1.0, nodes // 30 * 2.0 + 1.0])
    values = rng.normal(size=20)
    samples = build_sample_set(values, coords[:, 0], coords[:, 1])
    result = simulate(
        samples,
        VariogramModel(nugget, (Structure("exponential", 1.0, 15.0),)),
        grid=Grid((1.0, 1.0), (2.0, 2.0), (30, 30)),
        transform="none",
        realisations=6,
        return_realisations=True,
        spec=KrigingSpec(type="ordinary"),
    )
    assert result.realisations is not None
    assert np.allclose(result.realisations[:, nodes], values[None, :], atol=1e-7)
    far = np.setdiff1d(np.arange(900), nodes)
    assert result.realisations[:, far].std(axis=0).min() > 0


def _variogram_along(fields: np.ndarray, lag: int, axis: int) -> float:
    """Brute-force semivariance at a lag (nodes) along one axis of (R, ny, nx) fields."""
    if axis == 1:
        d = fields[:, :, lag:] - fields[:, :, :-lag]
    else:
        d = fields[:, lag:, :] - fields[:, :-lag, :]
    return float(0.5 * np.mean(d**2))


@pytest.mark.parametrize(
    "structure",
    [Structure("spherical", 0.8, 12.0), Structure("gaussian", 0.8, 10.0, None, Anisotropy(90.0, 0.5))],
)
def test_variogram_of_weakly_conditioned_realisations_reproduces_the_model(structure):
    """numpy brute force on the grid; tolerance: ergodic fluctuation of 24 realisations of a 100 x 100 field."""
    samples = build_sample_set(np.array([0.2, -0.1]), np.array([10.3, 80.7]), np.array([70.2, 20.1]))
    m = VariogramModel(0.2, (structure,))
    result = simulate(
        samples,
        m,
        grid=Grid((0.0, 0.0), (1.0, 1.0), (100, 100)),
        transform="none",
        spec=KrigingSpec(type="simple", mean=0.0),
        realisations=24,
        seed=3,
        return_realisations=True,
    )
    assert result.realisations is not None
    fields = result.realisations.reshape(24, 100, 100)
    for lag in (1, 3, 6, 10, 16):
        for axis, vector in ((1, [lag, 0.0]), (0, [0.0, lag])):
            expected = float(m.semivariance(np.array([vector]))[0])
            assert abs(_variogram_along(fields, lag, axis) - expected) < 0.06 + 0.06 * expected, (lag, axis)


def test_normal_score_reproduces_the_data_histogram():
    """Pooled back-transformed values vs the data: scipy.stats.ks_2samp."""
    rng = np.random.default_rng(8)
    coords = rng.uniform(0, 120, (150, 2))
    values = rng.lognormal(1.0, 0.8, 150)
    samples = build_sample_set(values, coords[:, 0], coords[:, 1])
    result = simulate(
        samples,
        VariogramModel(0.1, (Structure("spherical", 0.9, 15.0),)),
        grid=Grid((0.0, 0.0), (2.0, 2.0), (60, 60)),
        realisations=20,
        seed=4,
        return_realisations=True,
    )
    assert result.transform.kind == "normal_score"
    assert result.realisations is not None
    pooled = result.realisations[:, ::7].ravel()
    assert stats.ks_2samp(pooled[::5], values).pvalue > 1e-3
    assert pooled.min() >= values.min() and pooled.max() <= values.max()


def test_embedding_covariance_matches_the_model():
    """Empirical covariance over 4000 fields against C(h), anisotropic model (Dietrich & Newsam 1997)."""
    structural = VariogramModel(0.0, (Structure("exponential", 1.0, 8.0, None, Anisotropy(30.0, 0.5)),))
    embedding = embed(structural, (1.0, 1.0), (16, 12), max_nodes=1 << 20)
    rng = np.random.default_rng(1)
    fields = np.concatenate([np.stack(embedding.draw_pair(rng)) for _ in range(2000)])
    assert fields.shape == (4000, 12, 16)
    flat = fields.reshape(4000, -1)
    empirical = flat.T @ flat[:, 0] / 4000  # mean zero: covariance with node (0, 0)
    iy, ix = np.divmod(np.arange(16 * 12), 16)
    expected = structural.covariance(np.column_stack([ix, iy]).astype(float))
    assert np.abs(empirical - expected).max() < 5 / np.sqrt(4000)
    corner = flat[:, 11 * 16 + 15]  # far corner: covariance with every node
    expected_corner = structural.covariance(np.column_stack([ix - 15, iy - 11]).astype(float))
    assert np.abs(flat.T @ corner / 4000 - expected_corner).max() < 5 / np.sqrt(4000)


def test_values_at_off_lattice_samples_have_the_model_covariance():
    """Joint draw of samples with the lattice: Cov(Y(s), Y(node)) and Cov(Y(s), Y(s')) against C(h)."""
    structural = VariogramModel(0.0, (Structure("spherical", 1.0, 7.0),))
    shape = (20, 20)
    embedding = embed(structural, (1.0, 1.0), shape, max_nodes=1 << 20)
    positions = np.array([[6.3, 7.7], [6.9, 7.2], [12.5, 12.5], [9.01, 4.99]])
    draw = prepare(structural, positions, (1.0, 1.0), shape)
    rng = np.random.default_rng(4)
    lattices, rights = [], []
    for _ in range(1500):
        for field in embedding.draw_pair(rng):
            lattices.append(field.ravel())
            rights.append(draw.draw(field, rng))
    lattice = np.array(lattices)
    at = draw.solve(np.array(rights).T).T  # (N, 4)
    count = lattice.shape[0]
    iy, ix = np.divmod(np.arange(400), 20)
    nodes = np.column_stack([ix, iy]).astype(float)
    tolerance = 5 / np.sqrt(count)
    for s in range(4):
        empirical = lattice.T @ at[:, s] / count
        expected = structural.covariance(nodes - positions[s])
        assert np.abs(empirical - expected).max() < tolerance
    empirical = at.T @ at / count
    h = positions[:, None, :] - positions[None, :, :]
    expected = structural.covariance(h.reshape(-1, 2)).reshape(4, 4)
    assert np.abs(empirical - expected).max() < tolerance


def ordinary_kriging(coords, values, targets, nugget):
    """Ordinary kriging, Journel & Huijbregts (1978) ch. V: [[K, 1], [1', 0]] [lambda; mu] = [k; 1]."""
    n = len(values)
    A = np.ones((n + 1, n + 1))
    A[:n, :n] = covariance(coords, coords, nugget)
    A[n, n] = 0.0
    k = covariance(coords, targets, nugget)
    solution = np.linalg.solve(A, np.vstack([k, np.ones(targets.shape[0])]))
    lam, mu = solution[:n], solution[n]
    return lam.T @ values, SILL + nugget - np.einsum("nm,nm->m", lam, k) - mu


def test_ordinary_kriging_conditioning_converges_to_ordinary_kriging(scene):
    """Mean and variance over 1500 realisations against the dense ordinary-kriging solve (5 standard errors)."""
    samples, coords, values, grid = scene
    result = simulate(
        samples,
        model(0.1),
        grid=grid,
        transform="none",
        spec=KrigingSpec(type="ordinary"),
        realisations=1500,
        seed=12,
    )
    estimate, variance = ordinary_kriging(coords, values, grid.points(), 0.1)
    assert np.all(np.abs(result.mean - estimate) < 5 * np.sqrt(variance / 1500))
    assert np.all(np.abs(result.variance / variance - 1) < 5 * np.sqrt(2 / 1500))
