"""Cokriging: options, bad input, neighbourhood layouts and cost limits."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.errors import InvalidInput, LimitExceeded, SingularSystem
from lagwise.core.kriging.cokriging import Cokriger, CokrigingSpec, VariableColumns
from lagwise.core.kriging.cokriging_runs import cokrige, cross_validate_cokriging
from lagwise.core.kriging.neighbourhood import Neighbourhood
from lagwise.core.limits import Limits
from lagwise.core.modelling.coregionalisation import JointModel, JointStructure


@pytest.fixture
def columns():
    rng = np.random.default_rng(2)
    n = 50
    values = rng.normal(size=(n, 3))
    values[rng.random((n, 3)) < 0.3] = np.nan
    values[:3, 0] = [1.0, 2.0, 3.0]
    return VariableColumns(rng.uniform(0, 10, (n, 2)), ("lead", "zinc", "copper"), values, tuple(map(str, range(n))))


def _model(names=("lead", "zinc"), cross=0.5):
    sills = np.array([[1.0, cross], [cross, 1.0]])
    return JointModel(names, 0.1 * np.eye(2), (JointStructure("spherical", 4.0, sills),))


def test_model_naming_missing_variable(columns):
    with pytest.raises(InvalidInput) as caught:
        Cokriger(columns, _model(("lead", "nickel")), CokrigingSpec("ordinary", "lead"), Neighbourhood())
    assert caught.value.issues[0].pointer == "/model/variables/1"


def test_primary_not_in_model(columns):
    with pytest.raises(InvalidInput) as caught:
        Cokriger(columns, _model(), CokrigingSpec("ordinary", "copper"), Neighbourhood())
    assert caught.value.issues[0].pointer == "/primary"


def test_not_psd_model_refused(columns):
    with pytest.raises(InvalidInput) as caught:
        Cokriger(columns, _model(cross=1.5), CokrigingSpec("ordinary", "lead"), Neighbourhood())
    assert caught.value.issues[0].pointer == "/model/structures/0/sills"
    assert "smallest eigenvalue is -0.5" in caught.value.issues[0].detail


def test_too_few_measured_values(columns):
    values = columns.values.copy()
    values[1:, 1] = np.nan
    sparse = VariableColumns(columns.coords, columns.names, values, columns.ids)
    with pytest.raises(InvalidInput) as caught:
        Cokriger(sparse, _model(), CokrigingSpec("ordinary", "lead"), Neighbourhood())
    assert caught.value.issues[0].pointer == "/samples/variables/zinc"


def test_simple_needs_every_mean_and_type_checked(columns):
    with pytest.raises(InvalidInput) as caught:
        Cokriger(columns, _model(), CokrigingSpec("simple", "lead", {"lead": 0.0}), Neighbourhood())
    assert caught.value.issues[0].pointer == "/kriging/means" and "zinc" in caught.value.issues[0].detail
    with pytest.raises(InvalidInput) as caught:
        Cokriger(columns, _model(), CokrigingSpec("universal", "lead"), Neighbourhood())
    assert caught.value.issues[0].pointer == "/kriging/type"


def test_primary_order_does_not_matter(columns):
    """The model's variable order is free: the primary is moved first."""
    targets = np.array([[2.0, 3.0], [7.0, 1.0]])
    model = _model()
    swapped = model.subset(("zinc", "lead"))
    a = Cokriger(columns, model, CokrigingSpec("ordinary", "lead"), Neighbourhood()).predict(targets)
    b = Cokriger(columns, swapped, CokrigingSpec("ordinary", "lead"), Neighbourhood()).predict(targets)
    np.testing.assert_allclose(a.estimate, b.estimate, atol=1e-12)


def test_secondary_without_neighbours_drops_its_constraint(columns):
    """Within a small radius a target may see the primary only: the estimate is then ordinary kriging."""
    values = columns.values.copy()
    far = np.linalg.norm(columns.coords - [1.0, 1.0], axis=1) < 3.0
    values[far, 1] = np.nan
    values[far, 0] = np.where(np.isfinite(values[far, 0]), values[far, 0], 1.0)
    local = VariableColumns(columns.coords, columns.names, values, columns.ids)
    hood = Neighbourhood(max_points=5, radius=2.0)
    found = cokrige(local, _model(), CokrigingSpec("ordinary", "lead"), hood, np.array([[1.0, 1.0]]))
    assert np.isfinite(found.prediction.estimate).all()
    assert found.comparison.reduction == pytest.approx(0.0, abs=1e-10)


def test_no_primary_neighbour_gives_a_reason(columns):
    hood = Neighbourhood(max_points=5, radius=0.01)
    found = Cokriger(columns, _model(), CokrigingSpec("ordinary", "lead"), hood).predict(np.array([[50.0, 50.0]]))
    assert np.isnan(found.estimate[0]) and 0 in found.reasons


def test_cost_limits(columns):
    with pytest.raises(LimitExceeded):
        cokrige(
            columns,
            _model(),
            CokrigingSpec("ordinary", "lead"),
            Neighbourhood(),
            np.zeros((3, 2)),
            limits=Limits(max_unique_samples=20),
        )
    with pytest.raises(LimitExceeded):
        cross_validate_cokriging(
            columns, _model(), CokrigingSpec("ordinary", "lead"), limits=Limits(max_kriging_flops=1e3)
        )


def test_collocated_perfect_correlation_without_nugget_is_singular(columns):
    """Two variables perfectly correlated and measured at one place make the matrix singular."""
    model = JointModel(("lead", "zinc"), np.zeros((2, 2)), (JointStructure("spherical", 4.0, np.ones((2, 2))),))
    with pytest.raises(SingularSystem):
        Cokriger(columns, model, CokrigingSpec("ordinary", "lead"), Neighbourhood()).predict(np.zeros((1, 2)))


def test_distinct_locations_index_every_entry_at_its_own_coordinates():
    """Entries of one sample share a location; inert entries share one of their own."""
    from lagwise.core.kriging.cokriging import distinct_locations

    rng = np.random.default_rng(4)
    coords = rng.uniform(0, 10, (30, 2))
    rows = rng.integers(0, 30, (5, 12))
    valid = rng.random((5, 12)) < 0.8
    local, places = distinct_locations(rows, coords[rows], valid)
    for r in range(5):
        picked = places[r, local[r]]
        assert np.array_equal(picked[valid[r]], coords[rows[r, valid[r]]])
        distinct = np.unique(rows[r, valid[r]]).size + int((~valid[r]).any())
        assert np.unique(local[r]).size == distinct
