"""Unit tests of lagwise.core.modelling.models and lagwise.core.modelling.fitting: validation and edge cases."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.errors import InvalidInput
from lagwise.core.modelling.fitting import ExperimentalPoints, fit_model
from lagwise.core.modelling.models import Anisotropy, Structure, VariogramModel, family_catalogue, validate_model


def _points(values, pairs=100, h=None):
    values = np.asarray(values, dtype=float)
    n = values.size
    h = np.linspace(10, 10 * n, n) if h is None else np.asarray(h, dtype=float)
    return ExperimentalPoints(
        h, values, np.full(n, pairs), np.zeros(n), np.zeros(n, int), np.arange(n), np.full(n, pairs >= 30)
    )


@pytest.mark.parametrize(
    "structure, pointer",
    [
        (Structure("blob", 1.0, 10.0), "/model/structures/0/family"),
        (Structure("spherical", -1.0, 10.0), "/model/structures/0/partial_sill"),
        (Structure("spherical", 1.0, 0.0), "/model/structures/0/range"),
        (Structure("matern", 1.0, 10.0, None), "/model/structures/0/smoothness"),
        (Structure("stable", 1.0, 10.0, 2.5), "/model/structures/0/shape"),
        (Structure("power", 1.0, 1.0, 2.0), "/model/structures/0/exponent"),
        (Structure("spherical", 1.0, 10.0, None, Anisotropy(30.0, 1.5)), "/model/structures/0/anisotropy/ratio"),
        (Structure("spherical", 1.0, 10.0, None, Anisotropy(30.0, 0.0)), "/model/structures/0/anisotropy/ratio"),
    ],
)
def test_invalid_structures(structure, pointer):
    with pytest.raises(InvalidInput) as info:
        validate_model(VariogramModel(0.0, (structure,)), 2)
    assert info.value.issues[0].pointer == pointer


def test_unknown_family_lists_the_valid_ones():
    with pytest.raises(InvalidInput, match="valid: spherical, exponential"):
        validate_model(VariogramModel(0.0, (Structure("blob", 1.0, 10.0),)), 2)


def test_nested_model_is_a_sum_and_covariance_needs_a_sill():
    a, b = Structure("spherical", 0.5, 30.0), Structure("exponential", 1.0, 90.0)
    model = VariogramModel(0.2, (a, b))
    h = np.array([0.0, 5.0, 50.0, 500.0])
    expected = np.where(h > 0, 0.2, 0.0) + a.semivariance(h) + b.semivariance(h)
    np.testing.assert_allclose(model.semivariance(h), expected)
    assert model.sill == pytest.approx(1.7)
    np.testing.assert_allclose(model.covariance(h), 1.7 - expected)
    with pytest.raises(InvalidInput, match="no sill"):
        VariogramModel(0.0, (Structure("power", 1.0, 1.0, 1.5),)).covariance(h)


def test_anisotropic_distances():
    aniso = Anisotropy(azimuth=90.0, ratio=0.5)
    along_east = aniso.distances(np.array([[10.0, 0.0]]))
    across = aniso.distances(np.array([[0.0, 10.0]]))
    assert along_east[0] == pytest.approx(10.0) and across[0] == pytest.approx(20.0)
    vertical = Anisotropy(0.0, 1.0, 0.25).distances(np.array([[0.0, 0.0, 5.0]]))
    assert vertical[0] == pytest.approx(20.0)


def test_catalogue_lists_every_family_with_units():
    names = [f["name"] for f in family_catalogue()]
    assert names[:3] == ["spherical", "exponential", "gaussian"] and "power" in names
    circular = next(f for f in family_catalogue() if f["name"] == "circular")
    assert circular["max_dimension"] == 2


def test_constant_data_gives_a_zero_pure_nugget():
    fit = fit_model(_points(np.zeros(8)), dimension=2)
    assert fit.best.model.nugget == 0.0 and fit.best.model.structures == ()
    assert "zero pure nugget" in fit.warnings[0]


def test_too_few_classes_explains_how_many_are_needed():
    with pytest.raises(InvalidInput, match="at least 4 are needed"):
        fit_model(_points([0.5, 0.8, 0.9]), dimension=2, families=["spherical"], nugget="fit")


def test_classes_without_pairs_are_left_out():
    points = _points([0.2, 0.5, 0.7, 0.9, 1.0, 1.0], pairs=10)
    with pytest.raises(InvalidInput, match="no class has a value and enough pairs"):
        fit_model(points, dimension=2)


@pytest.mark.parametrize(
    "options, pointer",
    [
        (dict(families=["blob"]), "/families/0"),
        (dict(families=["circular"]), "/families/0"),
        (dict(families=[]), "/families"),
        (dict(weighting="heavy"), "/weighting"),
        (dict(nugget="guess"), "/nugget"),
        (dict(nugget=-1.0), "/nugget"),
        (dict(anisotropy="fit"), "/anisotropy"),
        (dict(structures=3), "/structures"),
    ],
)
def test_bad_fit_options(options, pointer):
    with pytest.raises(InvalidInput) as info:
        fit_model(_points(np.linspace(0.1, 1.0, 10)), dimension=3, **options)
    assert info.value.issues[0].pointer == pointer


def test_fixed_nugget_and_ranking():
    truth = VariogramModel(0.25, (Structure("spherical", 1.0, 60.0),))
    h = np.linspace(5, 120, 16)
    fit = fit_model(_points(truth.semivariance(h), h=h), dimension=2, nugget=0.25)
    assert fit.best.model.nugget == 0.25
    criteria = [c.criterion for c in fit.candidates if c.criterion is not None]
    assert criteria == sorted(criteria)
    assert fit.best.families == ("spherical",)


def test_range_beyond_the_classes_is_flagged():
    h = np.linspace(10, 100, 10)
    fit = fit_model(_points(0.01 * h, h=h), dimension=2, families=["spherical"])
    assert any("has not levelled off" in w for w in fit.warnings)


def test_range_beyond_the_classes_is_flagged_when_held_at_its_automatic_bound():
    """Automatic mode caps practical ranges at AUTO_RANGE_REACH times the largest class distance;
    a variogram still rising at its last class (here linear, which has no sill: common practice)
    pins the range at that cap, and the warning must still say so."""
    h = np.linspace(10, 100, 10)
    fit = fit_model(_points(0.01 * h, h=h), dimension=2)
    longest = max(s.range for s in fit.best.model.structures)
    assert longest == pytest.approx(1.5 * 100.0, rel=1e-6)
    assert any("has not levelled off" in w for w in fit.warnings), fit.warnings
