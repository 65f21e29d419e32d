"""The selection rule: gains, paired tests, the likelihood-ratio test of the anisotropy, the order of comparison."""

from __future__ import annotations

import math

import numpy as np
import pytest
from lagwise.core.kriging.cross_validation import summarise
from lagwise.core.kriging.systems import KrigingSpec
from lagwise.core.modelling.models import VariogramModel
from lagwise.core.selection import LIKELIHOOD_RATIO_CRITICAL, Strategy, select

RNG = np.random.default_rng(3)
OBSERVED = RNG.normal(size=200)
NOISE = RNG.normal(size=200)


def _strategy(name: str, error_scale: float, likelihood_ratio: float | None = None) -> Strategy:
    """A strategy whose leave-one-out errors are ``error_scale`` times one fixed error vector."""
    error = error_scale * NOISE
    cv = summarise(OBSERVED, OBSERVED + error, np.full(200, error_scale), 2.5, {}, "test")
    return Strategy(name, VariogramModel(1.0, ()), KrigingSpec(), None, cv, likelihood_ratio=likelihood_ratio)


def test_the_critical_value_is_the_chi_square_quantile():
    # chi-square with 2 degrees of freedom is exponential with mean 2: quantile -2 ln(level) (common practice)
    assert LIKELIHOOD_RATIO_CRITICAL == pytest.approx(-2.0 * math.log(0.01), rel=1e-12)


def test_a_clear_gain_replaces_the_simpler_strategy():
    chosen = select([_strategy("pure_nugget", 1.0), _strategy("isotropic", 0.6)]).selected
    assert chosen.name == "isotropic" and chosen.why.startswith("selected: lowers")


def test_anisotropy_needs_the_likelihood_ratio_when_it_has_one():
    # Every error 10 % smaller: the paired tests are overwhelming, but the likelihood does not support it.
    weak = select([_strategy("pure_nugget", 1.0), _strategy("isotropic", 0.6), _strategy("anisotropic", 0.54, 3.0)])
    assert weak.selected.name == "isotropic"
    assert "likelihood ratio >= 9.21" in weak.named("anisotropic").why
    strong = select([_strategy("pure_nugget", 1.0), _strategy("isotropic", 0.6), _strategy("anisotropic", 0.54, 12.0)])
    assert strong.selected.name == "anisotropic" and "likelihood ratio 12.0" in strong.selected.why


def test_anisotropy_still_needs_the_cross_validation_gain():
    small = select([_strategy("pure_nugget", 1.0), _strategy("isotropic", 0.6), _strategy("anisotropic", 0.597, 40.0)])
    assert small.selected.name == "isotropic"


def test_without_a_likelihood_ratio_the_paired_tests_decide():
    chosen = select([_strategy("pure_nugget", 1.0), _strategy("isotropic", 0.6), _strategy("anisotropic", 0.54)])
    assert chosen.selected.name == "anisotropic"


def test_anisotropy_never_replaces_the_pure_nugget():
    chosen = select([_strategy("pure_nugget", 1.0), _strategy("isotropic", 0.999), _strategy("anisotropic", 0.5, 50.0)])
    assert chosen.selected.name == "pure_nugget"
    assert chosen.named("anisotropic").why.startswith("not compared")
