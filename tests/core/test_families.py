"""Unit tests of lagwise.core.modelling.families: the one family table and who reads it."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from lagwise.core.errors import InvalidInput
from lagwise.core.modelling.families import (
    ANISOTROPY,
    FAMILIES,
    FIT_SCALES,
    NUGGET,
    SLOTS,
    UNIT_KINDS,
    Interval,
    family_catalogue,
)
from lagwise.core.modelling.fitting import ExperimentalPoints, _Problem, _Spec, fit_model
from lagwise.core.modelling.models import UNIT_SHAPES, Structure, VariogramModel, unit_semivariance, validate_model

A = 30.0


def _points(n=12, seed=5):
    rng = np.random.default_rng(seed)
    h = np.linspace(4.0, 60.0, n)
    value = 0.2 + 1.0 * (1.0 - np.exp(-3.0 * h / A)) + rng.normal(0.0, 0.02, n)
    azimuth = np.where(np.arange(n) % 2 == 0, 0.0, 90.0)
    return ExperimentalPoints(
        h, value, np.full(n, 80), azimuth, (azimuth > 0).astype(int), np.arange(n), np.ones(n, dtype=bool)
    )


def _structure(family, **values):
    """A structure with the table's parameters: given values, else a value inside the documented bounds."""
    slots = {}
    for p in FAMILIES[family].parameters:
        b = p.bounds
        inside = 1.0 if b.contains(1.0) else 0.5 * (b.minimum + b.maximum)
        slots[p.slot] = values.get(p.name, inside)
    return Structure(family, slots["sill"], slots.get("range", A) if "range" in slots else 1.0, slots.get("shape"))


def test_every_family_has_a_formula_and_well_formed_parameters():
    assert list(UNIT_SHAPES) == list(FAMILIES)
    for family in FAMILIES.values():
        slots = [p.slot for p in family.parameters]
        assert slots[0] == "sill" and len(set(slots)) == len(slots) and set(slots) <= set(SLOTS)
        assert ("range" in slots) == family.bounded, family.name
        assert family.max_dimension in (1, 2, 3) and family.formula and family.source
        for p in family.parameters:
            assert p.kind in UNIT_KINDS and p.fit_low and p.fit_high and p.start
            assert {p.fit_low.scale, p.fit_high.scale, p.start.scale} <= set(FIT_SCALES)


@pytest.mark.parametrize("family", list(FAMILIES))
def test_every_family_is_evaluable(family):
    """Zero at zero and finite everywhere; a bounded structure levels off at its unit sill far beyond the
    range and an unbounded one is its power law (definitions of sill and power model, common practice)."""
    s = _structure(family)
    h = np.array([0.0, 0.25 * A, A, 3.0 * A, 1e4 * A])
    gamma = unit_semivariance(family, h, s.range, s.extra)
    assert np.all(np.isfinite(gamma)) and gamma[0] == 0.0 and np.all(gamma[1:] > 0.0)
    if FAMILIES[family].bounded:
        assert gamma[-1] == pytest.approx(1.0, abs=1e-3)
    else:
        exponent = 1.0 if s.extra is None else s.extra
        np.testing.assert_allclose(gamma, h**exponent, rtol=1e-14)
    validate_model(VariogramModel(0.1, (s,)), FAMILIES[family].max_dimension)


@pytest.mark.parametrize("family", list(FAMILIES))
@pytest.mark.parametrize("nugget, anisotropy", [(True, False), (False, True)])
def test_fit_bounds_and_starts_are_consistent_with_the_documented_bounds(family, nugget, anisotropy):
    problem = _Problem(_Spec((family,), nugget, 0.0, anisotropy), _points(), 1.2)
    assert np.all(problem.low < problem.high)
    parameters = [p for _, p, _ in problem.layout]
    for p, low, high in zip(parameters, problem.low, problem.high, strict=True):
        assert p.bounds.contains(low) or (low == p.bounds.minimum == 0.0), (p.name, low)
        assert p.bounds.contains(high), (p.name, high)
    for start in problem.starts():
        assert np.all(start >= problem.low) and np.all(start <= problem.high)


def test_fitting_packs_the_table_parameters_of_each_structure():
    problem = _Problem(_Spec(("matern", "power"), True, 0.0, True), _points(), None)
    expected = [NUGGET] + list(FAMILIES["matern"].parameters) + list(FAMILIES["power"].parameters)
    assert [p for _, p, _ in problem.layout] == expected + list(ANISOTROPY[:2])
    fit = fit_model(_points(), dimension=2, families=["stable"])
    names = [k for k in fit.best.model.structures[0].as_dict() if k != "family"]
    assert names == [p.name for p in FAMILIES["stable"].parameters]


def test_a_bound_changed_in_the_table_changes_validation_and_fitting(monkeypatch):
    model = VariogramModel(0.0, (Structure("matern", 1.0, A, 8.0),))
    validate_model(model, 2)
    matern = FAMILIES["matern"]
    smoothness = matern.shape_parameter
    narrower = dataclasses.replace(
        smoothness,
        bounds=Interval(0.05, 5.0, minimum_exclusive=True, maximum_exclusive=True),
        fit_high=dataclasses.replace(smoothness.fit_high, factor=4.0),
    )
    monkeypatch.setitem(FAMILIES, "matern", dataclasses.replace(matern, parameters=(*matern.parameters[:2], narrower)))
    with pytest.raises(InvalidInput) as caught:
        validate_model(model, 2)
    issue = caught.value.issues[0]
    assert issue.pointer == "/model/structures/0/smoothness" and "(0.05, 5)" in issue.detail
    problem = _Problem(_Spec(("matern",), False, 0.0, False), _points(), None)
    assert problem.high[problem.names.index("e0")] == 4.0


def test_the_nugget_is_validated_against_its_table_entry(monkeypatch):
    capped = dataclasses.replace(NUGGET, bounds=Interval(0.0, 0.5))
    monkeypatch.setattr("lagwise.core.modelling.models.NUGGET", capped)
    with pytest.raises(InvalidInput, match=r"must lie in \[0, 0.5\]"):
        validate_model(VariogramModel(0.8, (Structure("spherical", 1.0, A),)), 2)


def test_catalogue_keeps_its_keys_and_adds_the_new_ones():
    for entry, family in zip(family_catalogue(), FAMILIES.values(), strict=True):
        assert {"name", "bounded", "max_dimension", "parameters", "formula", "source"} <= set(entry)
        assert entry["formula"] == f"{family.formula} ({family.source})"
        for given, p in zip(entry["parameters"], family.parameters, strict=True):
            assert given["name"] == p.name and given["unit"] == p.unit and given["kind"] == p.kind
            assert given["minimum"] == p.bounds.minimum and given.get("maximum") == p.bounds.maximum
            assert given["fit"]["high"] == {"factor": p.fit_high.factor, "scale": p.fit_high.scale}


@pytest.mark.parametrize(
    "interval, inside, outside, words",
    [
        (Interval(0.0), [0.0, 5.0], [-1e-9, math.inf, math.nan, None], "must be zero or positive"),
        (Interval(0.0, minimum_exclusive=True), [1e-9], [0.0], "must be positive"),
        (Interval(0.05, 2.0, minimum_exclusive=True), [2.0, 0.06], [0.05, 2.01], "must lie in (0.05, 2]"),
        (Interval(0.0, 360.0, maximum_exclusive=True), [0.0, 359.9], [360.0, -0.1], "must lie in [0, 360)"),
    ],
)
def test_interval_membership_and_wording(interval, inside, outside, words):
    assert all(interval.contains(v) for v in inside)
    assert not any(interval.contains(v) for v in outside)
    assert interval.requirement("dimensionless") == words
