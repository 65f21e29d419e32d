"""Cokriging and the joint fit against outside references.

* Ordinary and simple cokriging equal a dense solve of the published cokriging system,
  written here entry by entry (Wackernagel 2003, *Multivariate Geostatistics*, 3rd ed.,
  ch. 24-25: primary weights sum to 1, each secondary's to 0 for ordinary cokriging).
* A secondary uncorrelated with the primary (zero cross sills) gets zero weights:
  cokriging equals ordinary kriging of the primary (Wackernagel 2003, ch. 25).
* A secondary perfectly correlated with the primary (rank-one matrices) and measured at
  the target: simple cokriging follows it exactly, m_0 + (z_1 - m_1) / c, variance 0.
* Closed-form leave-one-out (Dubrule 1983, Math. Geology 15(6)) equals a dense solve
  without each primary value.
* The joint fit recovers the coregionalisation of a simulated bivariate Gaussian field
  (Cholesky factor of the joint covariance, scipy.linalg.cholesky) within sampling
  tolerance; every fitted matrix is PSD (numpy.linalg.eigvalsh >= -1e-12).
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.kriging.cokriging import Cokriger, CokrigingSpec, VariableColumns
from lagwise.core.kriging.cokriging_runs import cokrige, cross_validate_cokriging
from lagwise.core.kriging.cross_validation import Scheme
from lagwise.core.kriging.neighbourhood import Neighbourhood
from lagwise.core.kriging.systems import Kriger, KrigingSpec
from lagwise.core.modelling.coregionalisation import JointModel, JointStructure
from lagwise.core.modelling.fitting import ExperimentalPoints
from lagwise.core.modelling.joint_fitting import JointExperimental, fit_joint_model
from scipy.linalg import cholesky
from scipy.spatial.distance import pdist, squareform

MEANS = {"a": 0.1, "b": -0.2}


def _spherical(h, a):
    r = np.minimum(h / a, 1.0)
    return 1.5 * r - 0.5 * r**3


@pytest.fixture(scope="module")
def scene():
    rng = np.random.default_rng(1)
    n = 60
    coords = rng.uniform(0, 10, (n, 2))
    values = rng.normal(size=(n, 2))
    values[rng.random(n) < 0.4, 0] = np.nan
    values[rng.random(n) < 0.3, 1] = np.nan
    model = JointModel(
        ("a", "b"),
        np.array([[0.1, 0.02], [0.02, 0.2]]),
        (
            JointStructure("spherical", 4.0, np.array([[1.0, 0.6], [0.6, 0.8]])),
            JointStructure("exponential", 8.0, np.array([[0.3, 0.1], [0.1, 0.4]])),
        ),
    )
    columns = VariableColumns(coords, ("a", "b"), values, tuple(str(i) for i in range(n)))
    return columns, model, rng.uniform(0, 10, (7, 2))


def _covariance(model, u, v, h):
    """C_uv(h) of the model written out: spherical and exponential structures plus the nugget at h = 0."""
    first, second = model.structures
    return (
        first.sills[u, v] * (1.0 - _spherical(h, first.range))
        + second.sills[u, v] * np.exp(-3.0 * h / second.range)
        + model.nugget[u, v] * (h == 0)
    )


def _dense(columns, model, kind, target, drop=None):
    """The cokriging system built entry by entry and solved with numpy.linalg.solve."""
    coords, values = columns.coords, columns.values
    entries = [(i, v) for v in (0, 1) for i in range(len(coords)) if np.isfinite(values[i, v]) and (i, v) != drop]
    m = len(entries)
    A, b = np.zeros((m + 2, m + 2)), np.zeros(m + 2)
    for r, (i, u) in enumerate(entries):
        for c, (j, w) in enumerate(entries):
            A[r, c] = _covariance(model, u, w, np.linalg.norm(coords[i] - coords[j]))
        b[r] = _covariance(model, u, 0, np.linalg.norm(coords[i] - target))
        if kind == "ordinary":
            A[r, m + u] = A[m + u, r] = 1.0
    z = np.array([values[i, u] for i, u in entries])
    if kind == "ordinary":
        b[m] = 1.0
        solution = np.linalg.solve(A, b)
        estimate = solution[:m] @ z
    else:
        solution = np.r_[np.linalg.solve(A[:m, :m], b[:m]), 0.0, 0.0]
        centred = z - np.array([MEANS["ab"[u]] for _, u in entries])
        estimate = MEANS["a"] + solution[:m] @ centred
    return estimate, _covariance(model, 0, 0, 0.0) - solution[:m] @ b[:m] - solution[m:] @ b[m:]


@pytest.mark.parametrize("kind", ["ordinary", "simple"])
@pytest.mark.parametrize("hood", [Neighbourhood(), Neighbourhood(max_points=100)], ids=["unique", "moving"])
def test_cokriging_equals_dense_system(scene, kind, hood):
    """Wackernagel (2003), ch. 24-25: the cokriging system solved densely."""
    columns, model, targets = scene
    spec = CokrigingSpec(kind, "a", MEANS if kind == "simple" else None)
    found = Cokriger(columns, model, spec, hood).predict(targets)
    reference = np.array([_dense(columns, model, kind, t) for t in targets])
    np.testing.assert_allclose(found.estimate, reference[:, 0], atol=1e-10)
    np.testing.assert_allclose(found.variance, reference[:, 1], atol=1e-10)


@pytest.mark.parametrize("kind", ["ordinary", "simple"])
def test_leave_one_out_equals_dense_refit(scene, kind):
    """Dubrule (1983): the closed form equals solving without each primary value."""
    columns, model, _ = scene
    spec = CokrigingSpec(kind, "a", MEANS if kind == "simple" else None)
    result = cross_validate_cokriging(columns, model, spec).result
    rows = np.flatnonzero(np.isfinite(columns.values[:, 0]))
    for k in (0, 5, len(rows) - 1):
        i = rows[k]
        estimate, variance = _dense(columns, model, kind, columns.coords[i], drop=(i, 0))
        assert result.estimate[k] == pytest.approx(estimate, abs=1e-10)
        assert result.standard_deviation[k] ** 2 == pytest.approx(variance, abs=1e-10)  # C_00(0) holds the nugget
    moving = cross_validate_cokriging(columns, model, spec, Neighbourhood(max_points=100)).result
    np.testing.assert_allclose(moving.estimate, result.estimate, atol=1e-10)
    np.testing.assert_allclose(moving.standard_deviation, result.standard_deviation, atol=1e-10)
    folds = cross_validate_cokriging(columns, model, spec, scheme=Scheme("k_fold", len(rows), 1)).result
    np.testing.assert_allclose(folds.estimate, result.estimate, atol=1e-10)


@pytest.mark.parametrize("hood", [Neighbourhood(), Neighbourhood(max_points=10)], ids=["unique", "moving"])
def test_uncorrelated_secondary_equals_ordinary_kriging(scene, hood):
    """Zero cross sills: the secondary's weights vanish (Wackernagel 2003, ch. 25)."""
    columns, model, targets = scene
    independent = JointModel(
        model.variables,
        np.diag(np.diag(model.nugget)),
        tuple(JointStructure(s.family, s.range, np.diag(np.diag(s.sills))) for s in model.structures),
    )
    found = cokrige(columns, independent, CokrigingSpec("ordinary", "a"), hood, targets)
    rows = np.flatnonzero(np.isfinite(columns.values[:, 0]))
    samples = build_sample_set(columns.values[rows, 0], columns.coords[rows, 0], columns.coords[rows, 1])
    alone = Kriger(samples, independent.direct(0), KrigingSpec("ordinary"), hood).predict(targets)
    np.testing.assert_allclose(found.prediction.estimate, alone.estimate, atol=1e-10)
    np.testing.assert_allclose(found.prediction.variance, alone.variance, atol=1e-10)
    assert found.comparison.reduction == pytest.approx(0.0, abs=1e-10)


def test_perfectly_correlated_secondary_at_targets_is_followed_exactly():
    """z_1 = c z_0 exactly (rank-one matrices, no nugget), the secondary measured at the
    targets and the primary elsewhere: simple cokriging returns m_0 + (z_1 - m_1) / c."""
    rng = np.random.default_rng(4)
    n, c = 40, 2.0
    coords = rng.uniform(0, 10, (n, 2))
    values = np.full((n, 2), np.nan)
    values[:20, 0] = rng.normal(size=20)
    values[20:, 1] = rng.normal(size=20)
    model = JointModel(
        ("a", "b"), np.zeros((2, 2)), (JointStructure("exponential", 5.0, np.array([[1.0, c], [c, c * c]])),)
    )
    columns = VariableColumns(coords, ("a", "b"), values, tuple(str(i) for i in range(n)))
    means = {"a": 0.3, "b": -0.5}
    targets = coords[20:]
    found = Cokriger(columns, model, CokrigingSpec("simple", "a", means), Neighbourhood()).predict(targets)
    np.testing.assert_allclose(found.estimate, means["a"] + (values[20:, 1] - means["b"]) / c, atol=1e-8)
    np.testing.assert_allclose(found.variance, 0.0, atol=1e-8)


def _experimental(coords, a, b, edges):
    """Cross-semivariance (1/2N) sum (a_j - a_i)(b_j - b_i) per class by brute force (scipy pdist)."""
    h = pdist(coords)
    i, j = np.triu_indices(len(coords), 1)
    product = (a[j] - a[i]) * (b[j] - b[i])
    k = np.digitize(h, edges) - 1
    inside = (k >= 0) & (k < len(edges) - 1)
    bins = len(edges) - 1
    pairs = np.bincount(k[inside], minlength=bins)
    value = np.bincount(k[inside], weights=product[inside], minlength=bins) / (2 * pairs)
    distance = np.bincount(k[inside], weights=h[inside], minlength=bins) / pairs
    zeros = np.zeros(bins)
    return ExperimentalPoints(distance, value, pairs, zeros, zeros.astype(int), np.arange(bins), pairs >= 30)


def test_joint_fit_recovers_simulated_coregionalisation():
    """A bivariate field with nugget N and spherical B (range 10) simulated through the
    Cholesky factor of its joint covariance (scipy.linalg.cholesky); the fitted matrices
    are PSD and near the truth (tolerance about twice the spread seen over realisations)."""
    rng = np.random.default_rng(3)
    n = 1500
    coords = rng.uniform(0, 100, (n, 2))
    nugget = np.array([[0.1, 0.05], [0.05, 0.2]])
    sills = np.array([[1.0, 0.7], [0.7, 0.9]])
    correlation = 1.0 - _spherical(squareform(pdist(coords)), 10.0)
    joint = np.kron(sills, correlation) + np.kron(nugget, np.eye(n))
    field = cholesky(joint, lower=True) @ rng.standard_normal(2 * n)
    a, b = field[:n], field[n:]
    edges = np.arange(0.0, 24.0, 2.0)
    points = {
        (0, 0): _experimental(coords, a, a, edges),
        (0, 1): _experimental(coords, a, b, edges),
        (1, 1): _experimental(coords, b, b, edges),
    }
    result = fit_joint_model(
        JointExperimental(("a", "b"), points, 2, (float(a.var()), float(b.var()))), families=["spherical"]
    )
    model = result.best.model
    for matrix in (model.nugget, model.structures[0].sills):
        assert np.linalg.eigvalsh(matrix).min() >= -1e-12
    assert model.structures[0].range == pytest.approx(10.0, rel=0.2)
    np.testing.assert_allclose(model.structures[0].sills, sills, atol=0.25)
    np.testing.assert_allclose(model.nugget, nugget, atol=0.12)
    np.testing.assert_allclose(model.nugget + model.structures[0].sills, nugget + sills, atol=0.15)
