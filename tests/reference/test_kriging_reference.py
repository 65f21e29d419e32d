"""Kriging against outside references.

* Simple kriging is the posterior mean and variance of a Gaussian process with the same
  covariance (sklearn.gaussian_process.GaussianProcessRegressor, optimizer=None);
  ordinary kriging is its limit with an added constant kernel of very large variance
  (an unknown mean with a flat prior).
* Kriging interpolates exactly at data locations without nugget, weights of ordinary
  kriging sum to 1, universal kriging with a linear drift reproduces a linear field
  (standard properties: Chilès & Delfiner 2012, section 3.4).
* Closed-form leave-one-out (Dubrule 1983, Math. Geology 15(6)) equals refitting without
  each sample.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.kriging.cross_validation import Scheme, cross_validate, summarise
from lagwise.core.kriging.neighbourhood import Neighbourhood
from lagwise.core.kriging.systems import Kriger, KrigingSpec
from lagwise.core.modelling.models import Structure, VariogramModel, matern_practical_factor
from sklearn.gaussian_process import GaussianProcessRegressor
from sklearn.gaussian_process.kernels import ConstantKernel, Matern

from .simulate import isotropic, simulate

UNIQUE = Neighbourhood()


@pytest.fixture(scope="module")
def scene():
    rng = np.random.default_rng(17)
    coords = rng.uniform(0, 100, (80, 2))
    values = 3.0 + rng.normal(size=80)
    targets = rng.uniform(5, 95, (25, 2))
    return build_sample_set(values, coords[:, 0], coords[:, 1]), coords, values, targets


def _matern_kernel(nu, sill, practical_range):
    """sklearn's Matern(length_scale=l, nu) equals rho(u) with u = h sqrt(2 nu) / l, so l = s sqrt(2 nu)."""
    scale = practical_range / matern_practical_factor(nu)
    return ConstantKernel(sill, "fixed") * Matern(
        length_scale=scale * math.sqrt(2 * nu), nu=nu, length_scale_bounds="fixed"
    )


@pytest.mark.parametrize("nu", [0.5, 1.5, 2.5])
def test_simple_kriging_is_the_gaussian_process_posterior(scene, nu):
    samples, coords, values, targets = scene
    model = VariogramModel(0.0, (Structure("matern", 2.0, 60.0, nu),))
    result = Kriger(samples, model, KrigingSpec("simple", mean=3.0), UNIQUE).predict(targets)
    gp = GaussianProcessRegressor(_matern_kernel(nu, 2.0, 60.0), alpha=1e-12, optimizer=None).fit(coords, values - 3.0)
    mean, sd = gp.predict(targets, return_std=True)
    np.testing.assert_allclose(result.estimate, mean + 3.0, rtol=1e-6)
    np.testing.assert_allclose(result.variance, sd**2, rtol=1e-6)


def test_ordinary_kriging_is_the_limit_with_an_unknown_mean(scene):
    samples, coords, values, targets = scene
    model = VariogramModel(0.0, (Structure("matern", 2.0, 60.0, 1.5),))
    result = Kriger(samples, model, KrigingSpec("ordinary"), UNIQUE).predict(targets, weights_for=tuple(range(25)))
    kernel = _matern_kernel(1.5, 2.0, 60.0) + ConstantKernel(1e5, "fixed")
    gp = GaussianProcessRegressor(kernel, alpha=1e-12, optimizer=None).fit(coords, values)
    mean, sd = gp.predict(targets, return_std=True)
    np.testing.assert_allclose(result.estimate, mean, rtol=1e-5)
    np.testing.assert_allclose(result.variance, sd**2, rtol=1e-5)
    for w in result.weights:
        assert abs(w["weights"].sum() - 1.0) < 1e-12


@pytest.mark.parametrize("kind", ["simple", "ordinary", "universal"])
def test_exact_at_samples_without_nugget(scene, kind):
    samples, coords, values, _ = scene
    spec = KrigingSpec(kind, mean=3.0 if kind == "simple" else None, drift="linear" if kind == "universal" else None)
    result = Kriger(samples, VariogramModel(0.0, (Structure("spherical", 1.0, 50.0),)), spec, UNIQUE).predict(
        coords[:10]
    )
    np.testing.assert_allclose(result.estimate, values[:10], rtol=1e-9)
    np.testing.assert_allclose(result.variance, 0.0, atol=1e-9)


def test_nugget_roles(scene):
    samples, coords, values, targets = scene
    model = VariogramModel(0.3, (Structure("spherical", 1.0, 50.0),))
    micro = Kriger(samples, model, KrigingSpec("ordinary"), UNIQUE)
    noise = Kriger(samples, model, KrigingSpec("ordinary", nugget_as="measurement_error"), UNIQUE)
    at_samples = micro.predict(coords[:5])
    np.testing.assert_allclose(at_samples.estimate, values[:5], rtol=1e-9)  # micro-scale: still exact
    smoothed = noise.predict(coords[:5])
    assert np.all(np.abs(smoothed.estimate - values[:5]) > 1e-6)  # measurement error: smoothed
    away_micro, away_noise = micro.predict(targets), noise.predict(targets)
    np.testing.assert_allclose(away_micro.estimate, away_noise.estimate, rtol=1e-12)
    np.testing.assert_allclose(away_micro.variance - away_noise.variance, 0.3, rtol=1e-9)


def test_universal_kriging_reproduces_a_linear_field(scene):
    samples, coords, _, targets = scene
    linear = 5.0 + 0.3 * coords[:, 0] - 0.7 * coords[:, 1]
    trend = build_sample_set(linear, coords[:, 0], coords[:, 1])
    model = VariogramModel(0.1, (Structure("exponential", 1.0, 40.0),))
    result = Kriger(trend, model, KrigingSpec("universal", drift="linear"), UNIQUE).predict(targets)
    np.testing.assert_allclose(result.estimate, 5.0 + 0.3 * targets[:, 0] - 0.7 * targets[:, 1], rtol=1e-9)
    moving = Kriger(trend, model, KrigingSpec("universal", drift="quadratic"), Neighbourhood(max_points=16)).predict(
        targets
    )
    np.testing.assert_allclose(moving.estimate, 5.0 + 0.3 * targets[:, 0] - 0.7 * targets[:, 1], rtol=1e-8)


SPECS = [
    KrigingSpec("simple", mean=3.0),
    KrigingSpec("ordinary"),
    KrigingSpec("universal", drift="linear"),
    KrigingSpec("universal", drift="quadratic"),
]


@pytest.mark.parametrize("spec", SPECS, ids=["simple", "ordinary", "universal-linear", "universal-quadratic"])
@pytest.mark.parametrize(
    "model",
    [
        VariogramModel(0.2, (Structure("exponential", 1.0, 40.0),)),
        VariogramModel(0.0, (Structure("power", 0.05, 1.0, 1.4),)),
    ],
    ids=["exponential", "power"],
)
def test_closed_form_leave_one_out_equals_refits(scene, spec, model):
    samples, coords, values, _ = scene
    if spec.type == "simple" and not model.bounded:
        pytest.skip("simple kriging needs a sill")
    fast = cross_validate(samples, model, spec, UNIQUE)
    for i in range(samples.size):
        keep = np.ones(samples.size, dtype=bool)
        keep[i] = False
        refit = Kriger(samples.subset(keep), model, spec, UNIQUE).predict(coords[i : i + 1])
        assert fast.estimate[i] == pytest.approx(refit.estimate[0], rel=1e-8)
        assert fast.standard_deviation[i] == pytest.approx(math.sqrt(refit.variance[0]), rel=1e-8)


def test_moving_leave_one_out_equals_refits(scene):
    samples, coords, _, _ = scene
    model = VariogramModel(0.1, (Structure("spherical", 1.0, 45.0),))
    hood = Neighbourhood(max_points=12, min_points=3)
    fast = cross_validate(samples, model, KrigingSpec("ordinary"), hood)
    for i in range(0, samples.size, 7):
        keep = np.ones(samples.size, dtype=bool)
        keep[i] = False
        refit = Kriger(samples.subset(keep), model, KrigingSpec("ordinary"), hood).predict(coords[i : i + 1])
        assert fast.estimate[i] == pytest.approx(refit.estimate[0], rel=1e-10)


def _replicates(model_for_kriging, count=12):
    """Leave-one-out on simulated fields (Cholesky factorisation, scipy), nugget 0.2, spherical."""
    truth = isotropic("spherical", 1.0, 30.0, 0.2)
    rmsse, coverage = [], []
    for seed in range(count):
        rng = np.random.default_rng(500 + seed)
        coords = rng.uniform(0, 100, (300, 2))
        samples = build_sample_set(simulate(truth, coords, rng), coords[:, 0], coords[:, 1])
        stats = cross_validate(samples, model_for_kriging or truth, KrigingSpec("ordinary"), UNIQUE).statistics
        rmsse.append(stats["root_mean_square_standardized_error"])
        coverage.append(stats["interval_coverage_95"])
    return np.mean(rmsse), np.mean(coverage)


def test_true_model_gives_honest_variances():
    """With the true model, RMSSE is within 0.85-1.15 and 95 % coverage within 0.90-0.98."""
    rmsse, coverage = _replicates(None)
    assert 0.85 <= rmsse <= 1.15
    assert 0.90 <= coverage <= 0.98


def test_halved_sill_understates_uncertainty():
    rmsse, coverage = _replicates(VariogramModel(0.1, (Structure("spherical", 0.5, 30.0),)))
    assert rmsse > 1.3 and coverage < 0.9


def test_statistics_on_a_five_sample_hand_example():
    """Observed 1, 2, 3, 4, 5; estimates 1.5, 2, 2.5, 4.5, 4; standard deviations 0.5, 1, 0.25, 0.5, 2.
    Errors 0.5, 0, -0.5, 0.5, -1: ME -0.1, MAE 0.5, RMSE sqrt(1.75/5); standardized 1, 0, -2, 1, -0.5:
    MSE -0.1, RMSSE sqrt(6.25/5); GP 1 - 1.75/10; coverage 4/5 (|-2| > 1.96); correlation by hand
    (numpy.corrcoef as the reference)."""
    observed = np.array([1.0, 2.0, 3.0, 4.0, 5.0])
    estimate = np.array([1.5, 2.0, 2.5, 4.5, 4.0])
    sd = np.array([0.5, 1.0, 0.25, 0.5, 2.0])
    s = summarise(observed, estimate, sd, 1.5, {}, "hand").statistics
    assert s["count"] == 5
    assert s["mean_error"] == pytest.approx(-0.1)
    assert s["mean_absolute_error"] == pytest.approx(0.5)
    assert s["root_mean_square_error"] == pytest.approx(math.sqrt(0.35))
    assert s["mean_standardized_error"] == pytest.approx(-0.1)
    assert s["root_mean_square_standardized_error"] == pytest.approx(math.sqrt(1.25))
    assert s["goodness_of_prediction"] == pytest.approx(0.825)
    assert s["interval_coverage_95"] == pytest.approx(0.8)
    assert s["correlation"] == pytest.approx(np.corrcoef(observed, estimate)[0, 1])
    assert s["outliers"] == 1


def test_k_fold_is_seeded_and_complete(scene):
    samples, _, _, _ = scene
    model = VariogramModel(0.2, (Structure("exponential", 1.0, 40.0),))
    a = cross_validate(samples, model, KrigingSpec("ordinary"), UNIQUE, Scheme("k_fold", 5, 3))
    b = cross_validate(samples, model, KrigingSpec("ordinary"), UNIQUE, Scheme("k_fold", 5, 3))
    assert np.array_equal(a.estimate, b.estimate) and np.all(np.isfinite(a.estimate))
