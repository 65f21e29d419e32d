"""Strategies of the unattended analysis against outside references.

* Universal kriging with a linear drift equals the generalised-least-squares form written
  out densely here (Cressie 1993, *Statistics for Spatial Data*, section 3.4.5): the GLS
  drift b = (F' K^-1 F)^-1 F' K^-1 z plus simple kriging of the residuals, variance
  C(0) - k' K^-1 k + (f - F' K^-1 k)' (F' K^-1 F)^-1 (f - F' K^-1 k).
* The GLS drift coefficients of the trend module equal numpy.linalg.lstsq of the whitened
  system L^-1 F b = L^-1 z, K = L L' (Aitken's generalised least squares, common practice).
* Rotating the coordinates by theta rotates the fitted azimuth by theta and leaves the
  ratio and the cross-validation statistics unchanged (a geometric anisotropy is a
  property of the field, not of the axes: common practice). The fan of direction classes
  (every 30 degrees) maps onto itself under rotations by multiples of 30 degrees.
* The restricted likelihood refinement is the maximum of the restricted likelihood
  written out densely here (Cressie 1993, section 2.6.1), and its profiled sill is the
  closed form r' R^-1 r / (n - p).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from lagwise.core.analysis import AnalysisOptions, analyse
from lagwise.core.data.samples import build_sample_set
from lagwise.core.kriging.neighbourhood import Neighbourhood
from lagwise.core.kriging.systems import Covariance, Kriger, KrigingSpec
from lagwise.core.modelling.likelihood import refine
from lagwise.core.modelling.models import Anisotropy, Structure, VariogramModel
from lagwise.core.modelling.trend import _gls, design
from lagwise.core.stages import VariogramOptions

from .simulate import anisotropic, simulate

MODEL = VariogramModel(0.1, (Structure("exponential", 1.0, 40.0, None, Anisotropy(30.0, 0.5)),))


@pytest.fixture(scope="module")
def drifting():
    rng = np.random.default_rng(23)
    coords = rng.uniform(0, 100, (90, 2))
    values = 2.0 + 0.05 * coords[:, 0] - 0.03 * coords[:, 1] + simulate(MODEL, coords, rng)
    targets = rng.uniform(0, 100, (30, 2))
    return build_sample_set(values, coords[:, 0], coords[:, 1]), coords, values, targets


def _dense_universal(coords, values, targets, model):
    """Universal kriging in the GLS form, every matrix written out (module docstring)."""
    cov = Covariance(model, KrigingSpec())
    K = cov.matrix(coords)
    k = cov.between(coords, targets)
    F = np.column_stack([np.ones(len(coords)), coords])
    f = np.column_stack([np.ones(len(targets)), targets])
    Ki = np.linalg.inv(K)
    gram = F.T @ Ki @ F
    b = np.linalg.solve(gram, F.T @ Ki @ values)
    estimate = f @ b + k.T @ Ki @ (values - F @ b)
    c0 = model.nugget + sum(s.partial_sill for s in model.structures)
    excess = f.T - F.T @ Ki @ k
    variance = c0 - np.einsum("it,ij,jt->t", k, Ki, k) + np.einsum("pt,pq,qt->t", excess, np.linalg.inv(gram), excess)
    return estimate, variance


def test_universal_kriging_equals_the_dense_gls_form(drifting):
    samples, coords, values, targets = drifting
    result = Kriger(samples, MODEL, KrigingSpec("universal", drift="linear"), Neighbourhood()).predict(targets)
    estimate, variance = _dense_universal(coords, values, targets, MODEL)
    np.testing.assert_allclose(result.estimate, estimate, rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(result.variance, variance, rtol=1e-7, atol=1e-10)


def test_gls_drift_equals_whitened_least_squares(drifting):
    samples, coords, values, _ = drifting
    F = design(coords, 1)
    K = Covariance(MODEL, KrigingSpec()).matrix(coords)
    L = np.linalg.cholesky(K)
    whitened, *_ = np.linalg.lstsq(np.linalg.solve(L, F), np.linalg.solve(L, values), rcond=None)
    np.testing.assert_allclose(_gls(samples, F, MODEL), whitened, rtol=1e-9)


def _dense_restricted(model: VariogramModel, coords, values) -> float:
    """-0.5 [ln det K + ln det F'K^-1F + r'K^-1r] for a constant mean, matrices written out."""
    K = Covariance(model, KrigingSpec()).matrix(coords)
    F = np.ones((len(coords), 1))
    Ki = np.linalg.inv(K)
    gram = F.T @ Ki @ F
    r = values - F @ np.linalg.solve(gram, F.T @ Ki @ values)
    return -0.5 * (np.linalg.slogdet(K)[1] + np.linalg.slogdet(gram)[1] + r @ Ki @ r)


def test_refinement_maximises_the_dense_restricted_likelihood():
    rng = np.random.default_rng(5)
    coords = rng.uniform(0, 100, (150, 2))
    values = simulate(MODEL, coords, rng)
    start = VariogramModel(0.3, (Structure("exponential", 0.7, 60.0, None, Anisotropy(0.0, 0.8)),))
    found = refine([start], coords, values, np.ones((150, 1)), anisotropic=True, reach=60.0)
    assert found is not None and found.samples == 150
    best = _dense_restricted(found.model, coords, values)
    # The profiled sill is at its optimum: scaling nugget and partial sill together lowers the likelihood.
    for factor in (0.9, 1.1):
        scaled = VariogramModel(
            found.model.nugget * factor,
            tuple(
                Structure(s.family, s.partial_sill * factor, s.range, s.extra, s.anisotropy)
                for s in found.model.structures
            ),
        )
        assert _dense_restricted(scaled, coords, values) < best
    # And the refinement beats its start and the truth's neighbourhood is where it lands.
    assert best > _dense_restricted(start, coords, values)
    assert abs((found.model.structures[0].anisotropy.azimuth - 30.0 + 90.0) % 180.0 - 90.0) < 20.0


def _rotate(coords: np.ndarray, theta: float) -> np.ndarray:
    """Rotate points clockwise by theta degrees about the centre (azimuth a becomes a + theta)."""
    t = math.radians(theta)
    centred = coords - coords.mean(axis=0)
    x = centred[:, 0] * math.cos(t) + centred[:, 1] * math.sin(t)
    y = -centred[:, 0] * math.sin(t) + centred[:, 1] * math.cos(t)
    return np.column_stack([x, y]) + 500.0


@pytest.mark.parametrize("theta", [30.0, 90.0])
def test_rotating_the_coordinates_rotates_the_anisotropy(theta):
    rng = np.random.default_rng(11)
    coords = rng.uniform(0, 100, (220, 2))
    truth = anisotropic("exponential", 0.95, 50.0, 30.0, 0.35, 0.05)
    values = simulate(truth, coords, rng)
    options = AnalysisOptions(variogram=VariogramOptions(directions="auto"))
    results = []
    for points in (coords, _rotate(coords, theta)):
        results.append(analyse(build_sample_set(values, points[:, 0], points[:, 1]), options))
    plain, rotated = results
    assert plain.selection.selected.name == rotated.selection.selected.name == "anisotropic"
    a, b = plain.model.structures[0].anisotropy, rotated.model.structures[0].anisotropy
    assert abs((b.azimuth - a.azimuth - theta + 90.0) % 180.0 - 90.0) < 1.0
    assert b.ratio == pytest.approx(a.ratio, abs=0.02)
    for name in ("root_mean_square_error", "root_mean_square_standardized_error", "correlation"):
        assert rotated.cross_validation.statistics[name] == pytest.approx(
            plain.cross_validation.statistics[name], rel=0.01
        )
