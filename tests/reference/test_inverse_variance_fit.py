"""Fits weighted by the classes' standard errors against scipy.optimize.curve_fit with sigma."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.errors import InvalidInput
from lagwise.core.modelling.fitting import SE_FLOOR_SHARE, fit_model, points_from_experimental
from lagwise.core.variography.experimental import experimental_variogram
from scipy.optimize import curve_fit

from .simulate import isotropic, simulate


def _spherical(h, nugget, sill, range_):
    r = np.minimum(h / range_, 1.0)
    return nugget + sill * (1.5 * r - 0.5 * r**3)


def test_inverse_variance_weights_match_curve_fit_with_sigma():
    """Weighted least squares with weights 1/SE^2 is curve_fit with sigma = SE (scipy.optimize.curve_fit);
    the same floor (SE_FLOOR_SHARE x median SE) is applied on both sides."""
    rng = np.random.default_rng(4)
    coords = rng.uniform(0, 1000, (300, 2))
    values = simulate(isotropic("spherical", 1.0, 350.0, nugget=0.2), coords, rng)
    experimental = experimental_variogram(build_sample_set(values, coords[:, 0], coords[:, 1]))
    points = points_from_experimental(experimental, 30)
    fit = fit_model(points, dimension=2, families=["spherical"], weighting="inverse_variance")
    use = points.usable
    se = points.standard_error[use]
    sigma = np.maximum(se, SE_FLOOR_SHARE * np.median(se))
    expected, _ = curve_fit(
        _spherical, points.distance[use], points.value[use], p0=[0.1, 1.0, 300.0], sigma=sigma, maxfev=20000
    )
    model = fit.best.model
    got = [model.nugget, model.structures[0].partial_sill, model.structures[0].range]
    np.testing.assert_allclose(got, expected, rtol=1e-3)
    assert fit.weighting == "inverse_variance"


def test_inverse_variance_needs_standard_errors():
    rng = np.random.default_rng(5)
    coords = rng.uniform(0, 100, (30, 2))  # too few samples for spatial blocks
    experimental = experimental_variogram(build_sample_set(rng.normal(size=30), coords[:, 0], coords[:, 1]))
    with pytest.raises(InvalidInput) as info:
        fit_model(points_from_experimental(experimental, 1), dimension=2, weighting="inverse_variance")
    assert info.value.issues[0].pointer == "/weighting"
