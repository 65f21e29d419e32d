"""Model families against their published closed forms and general-purpose libraries."""

from __future__ import annotations

import math

import numpy as np
import pytest
from lagwise.core.errors import InvalidInput
from lagwise.core.modelling.models import (
    BOUNDED_FAMILIES,
    Structure,
    VariogramModel,
    matern_practical_factor,
    unit_semivariance,
    validate_model,
)
from scipy.special import gamma as gamma_function
from scipy.special import kv
from sklearn.gaussian_process.kernels import Matern

A = 120.0
H = np.array([0.0, 15.0, 40.0, 60.0, 90.0, 119.0, 120.0, 180.0])


def closed_form(family, h, a):
    """Closed forms as published: Chilès & Delfiner (2012), Geostatistics: Modeling Spatial
    Uncertainty, 2nd ed., section 2.5; Webster & Oliver (2007), Geostatistics for Environmental
    Scientists, 2nd ed., chapter 6 (practical-range scaling for exponential and gaussian)."""
    r = h / a
    if family == "spherical":
        return 1.5 * r - 0.5 * r**3 if r < 1 else 1.0
    if family == "exponential":
        return 1 - math.exp(-3 * h / a)
    if family == "gaussian":
        return 1 - math.exp(-3 * (h / a) ** 2)
    if family == "cubic":
        return 7 * r**2 - 8.75 * r**3 + 3.5 * r**5 - 0.75 * r**7 if r < 1 else 1.0
    if family == "pentaspherical":
        return 1.875 * r - 1.25 * r**3 + 0.375 * r**5 if r < 1 else 1.0
    if family == "circular":
        return 1 - (2 / math.pi) * math.acos(r) + (2 / math.pi) * r * math.sqrt(1 - r * r) if r < 1 else 1.0
    raise AssertionError(family)


@pytest.mark.parametrize("family", ["spherical", "exponential", "gaussian", "cubic", "pentaspherical", "circular"])
def test_closed_forms(family):
    got = unit_semivariance(family, H, A)
    expected = [closed_form(family, h, A) for h in H]
    np.testing.assert_allclose(got, expected, rtol=1e-13, atol=1e-15)


@pytest.mark.parametrize("family", ["spherical", "cubic", "pentaspherical", "circular"])
def test_exact_range_families_reach_the_sill_at_range(family):
    assert unit_semivariance(family, np.array([A, 2 * A]), A).tolist() == [1.0, 1.0]
    assert unit_semivariance(family, np.array([0.999 * A]), A)[0] < 1.0


@pytest.mark.parametrize("family, extra", [("exponential", None), ("gaussian", None), ("stable", 0.7), ("stable", 1.6)])
def test_conventional_factor_families_reach_95_02_percent(family, extra):
    """1 - exp(-3) = 0.9502 at the practical range with scales a/3, a/sqrt(3), a/3^(1/alpha) (common practice)."""
    assert unit_semivariance(family, np.array([A]), A, extra)[0] == pytest.approx(1 - math.exp(-3), rel=1e-14)


@pytest.mark.parametrize("family, extra", [("matern", 0.3), ("matern", 1.5), ("matern", 4.0), ("cardinal_sine", None)])
def test_scaled_families_first_reach_95_percent_at_range(family, extra):
    assert unit_semivariance(family, np.array([A]), A, extra)[0] == pytest.approx(0.95, rel=1e-12)
    before = unit_semivariance(family, np.linspace(1, A * 0.999, 400), A, extra)
    assert before.max() < 0.95


@pytest.mark.parametrize("nu", [0.5, 1.5, 2.5])
def test_matern_against_sklearn(nu):
    """sklearn.gaussian_process.kernels.Matern(length_scale=l, nu) with l = s * sqrt(2 nu) (its parameterisation)."""
    scale = A / matern_practical_factor(nu)
    kernel = Matern(length_scale=scale * math.sqrt(2 * nu), nu=nu)
    x = H[:, None]
    expected = 1.0 - kernel(x, np.zeros((1, 1)))[:, 0]
    np.testing.assert_allclose(unit_semivariance("matern", H, A, nu), expected, rtol=1e-10, atol=1e-12)


def test_matern_against_bessel_for_non_half_integer():
    """rho(u) = 2^(1-nu)/Gamma(nu) u^nu K_nu(u) with scipy.special.kv, nu = 1.3 (Stein 1999)."""
    nu = 1.3
    u = H[1:] * matern_practical_factor(nu) / A
    expected = 1 - 2 ** (1 - nu) / gamma_function(nu) * u**nu * kv(nu, u)
    np.testing.assert_allclose(unit_semivariance("matern", H[1:], A, nu), expected, rtol=1e-12)


def test_matern_half_is_exponential():
    """nu = 1/2 gives the exponential model (Stein 1999); the practical ranges differ by ln(20)/3."""
    a_exponential = 90.0
    a_matern = a_exponential * math.log(20.0) / 3.0
    np.testing.assert_allclose(
        unit_semivariance("matern", H, a_matern, 0.5),
        unit_semivariance("exponential", H, a_exponential),
        rtol=1e-10,
        atol=1e-14,
    )


@pytest.mark.parametrize("family", [f for f in BOUNDED_FAMILIES if f != "circular"])
def test_covariance_is_positive_semidefinite_in_3d(family):
    """Permissibility: C = sill - gamma on a random 3-D point set has eigenvalues >= -1e-10 trace
    (numpy.linalg.eigvalsh)."""
    rng = np.random.default_rng(4)
    pts = rng.uniform(0, 100, (250, 3))
    extra = {"matern": 1.2, "stable": 1.5}.get(family)
    model = VariogramModel(0.0, (Structure(family, 1.0, 60.0, extra),))
    h = (pts[:, None, :] - pts[None, :, :]).reshape(-1, 3)
    cov = model.covariance(h).reshape(250, 250)
    eig = np.linalg.eigvalsh(cov)
    assert eig.min() >= -1e-10 * np.trace(cov)


def test_circular_refused_in_3d():
    with pytest.raises(InvalidInput) as info:
        validate_model(VariogramModel(0.0, (Structure("circular", 1.0, 10.0),)), 3)
    assert info.value.issues[0].pointer == "/model/structures/0/family"
