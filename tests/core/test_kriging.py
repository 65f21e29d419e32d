"""Unit tests of lagwise.core.kriging.systems, neighbourhood, validation and prediction: options and refusals."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.errors import InvalidInput, LimitExceeded
from lagwise.core.kriging.cross_validation import Scheme, cross_validate
from lagwise.core.kriging.neighbourhood import Neighbourhood, NeighbourSearch
from lagwise.core.kriging.prediction import Grid, predict
from lagwise.core.kriging.systems import Kriger, KrigingSpec
from lagwise.core.limits import Limits
from lagwise.core.modelling.models import Anisotropy, Structure, VariogramModel

MODEL = VariogramModel(0.1, (Structure("spherical", 1.0, 40.0),))


@pytest.fixture()
def samples(rng):
    coords = rng.uniform(0, 100, (60, 2))
    return build_sample_set(rng.normal(size=60), coords[:, 0], coords[:, 1])


@pytest.mark.parametrize(
    "spec, model, pointer",
    [
        (KrigingSpec("simple"), MODEL, "/kriging/mean"),
        (KrigingSpec("simple", mean=0.0), VariogramModel(0.0, (Structure("power", 1.0, 1.0, 1.5),)), "/model"),
        (KrigingSpec("universal"), MODEL, "/kriging/drift"),
        (KrigingSpec("kriging"), MODEL, "/kriging/type"),
        (KrigingSpec("ordinary", nugget_as="noise"), MODEL, "/kriging/nugget_as"),
    ],
)
def test_bad_specs(samples, spec, model, pointer):
    with pytest.raises(InvalidInput) as info:
        Kriger(samples, model, spec, Neighbourhood())
    assert info.value.issues[0].pointer == pointer


@pytest.mark.parametrize(
    "hood, pointer",
    [
        (Neighbourhood(max_points=4, min_points=8), "/neighbourhood/min_points"),
        (Neighbourhood(max_points=0), "/neighbourhood/max_points"),
        (Neighbourhood(max_points=8, radius=-1.0), "/neighbourhood/radius"),
        (Neighbourhood(max_points=8, sectors=12), "/neighbourhood/sectors"),
    ],
)
def test_bad_neighbourhoods(samples, hood, pointer):
    with pytest.raises(InvalidInput) as info:
        Kriger(samples, MODEL, KrigingSpec(), hood)
    assert info.value.issues[0].pointer == pointer


def test_targets_without_neighbours_get_a_reason(samples):
    result = Kriger(samples, MODEL, KrigingSpec(), Neighbourhood(max_points=8, min_points=3, radius=15.0)).predict(
        np.array([[50.0, 50.0], [1000.0, 1000.0]])
    )
    assert np.isfinite(result.estimate[0]) and np.isnan(result.estimate[1])
    assert "min_points" in result.reasons[1]


def test_sectors_balance_neighbours():
    rng = np.random.default_rng(1)
    # Many samples to the east, a few elsewhere: 4 sectors keep at most 2 per sector.
    east = np.column_stack([rng.uniform(1, 5, 40), rng.uniform(-1, 1, 40)])
    others = np.array([[0.0, 3.0], [0.5, 4.0], [-3.0, 0.0], [-4.0, 0.5], [0.0, -3.0], [-0.3, -4.0]])
    coords = np.vstack([east, others])
    search = NeighbourSearch(coords, MODEL, Neighbourhood(max_points=8, sectors=4))
    idx, valid = search.query(np.zeros((1, 2)))
    chosen = coords[idx[0][valid[0]]]
    angles = np.mod(np.degrees(np.arctan2(chosen[:, 0], chosen[:, 1])), 360)
    assert np.bincount((angles // 90).astype(int), minlength=4).tolist() == [2, 2, 2, 2]


def test_anisotropic_search_prefers_the_major_axis():
    coords = np.array([[0.0, 10.0], [10.0, 0.0]])  # north and east of the target
    model = VariogramModel(0.0, (Structure("spherical", 1.0, 40.0, None, Anisotropy(0.0, 0.25)),))
    idx, _ = NeighbourSearch(coords, model, Neighbourhood(max_points=1)).query(np.zeros((1, 2)))
    assert idx[0, 0] == 0


def test_collinear_samples_with_linear_drift_are_refused():
    x = np.linspace(0, 10, 12)
    samples = build_sample_set(np.sin(x), x, 2 * x + 1)
    with pytest.raises(InvalidInput, match="drift cannot be estimated"):
        Kriger(samples, MODEL, KrigingSpec("universal", drift="linear"), Neighbourhood())


def test_singular_local_systems_are_named():
    x = np.linspace(0, 10, 12)
    samples = build_sample_set(np.sin(x), x, 2 * x + 1)
    result = Kriger(samples, MODEL, KrigingSpec("universal", drift="linear"), Neighbourhood(max_points=6)).predict(
        np.array([[5.0, 5.0]])
    )
    assert np.isnan(result.estimate[0]) and "singular" in result.reasons[0] and "samples" in result.reasons[0]


def test_unique_limit_suggests_a_moving_neighbourhood(samples):
    with pytest.raises(LimitExceeded, match="max_points"):
        Kriger(samples, MODEL, KrigingSpec(), Neighbourhood(), max_unique=10)


def test_k_fold_needs_fewer_folds_than_samples(samples):
    with pytest.raises(InvalidInput) as info:
        cross_validate(samples, MODEL, scheme=Scheme("k_fold", 100))
    assert info.value.issues[0].pointer == "/scheme/folds"


def test_predict_targets_dimension_and_grid_order(samples):
    with pytest.raises(InvalidInput, match="need 2 coordinates"):
        predict(samples, MODEL, targets=np.zeros((3, 1)))
    result = predict(samples, MODEL, grid=Grid((0.0, 0.0), (10.0, 20.0), (3, 2)))
    assert result.targets.tolist() == [[0, 0], [10, 0], [20, 0], [0, 20], [10, 20], [20, 20]]
    with pytest.raises(LimitExceeded):
        predict(samples, MODEL, grid=Grid((0.0, 0.0), (1.0, 1.0), (100, 100)), limits=Limits(max_targets=1000))


def test_geographic_targets_are_projected():
    rng = np.random.default_rng(3)
    lon, lat = 6 + rng.uniform(0, 0.1, 40), 46 + rng.uniform(0, 0.1, 40)
    samples = build_sample_set(rng.normal(size=40), lon, lat, coordinates="geographic")
    model = VariogramModel(0.0, (Structure("exponential", 1.0, 3000.0),))
    result = predict(samples, model, targets=np.column_stack([lon[:3], lat[:3]]))
    np.testing.assert_allclose(result.prediction.estimate, samples.values[:3], rtol=1e-8)
