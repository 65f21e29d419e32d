"""SDK tests against a real gunicorn service on 127.0.0.1."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from lagwise_client import ExperimentalVariogram, Lagwise, LimitError, TransportError, ValidationError, VariogramMap
from lagwise_client.retry import RetryPolicy


@pytest.fixture()
def lw(service_url):
    with Lagwise(service_url) as client:
        yield client


@pytest.fixture()
def columns():
    rng = np.random.default_rng(8)
    return rng.uniform(0, 100, 120), rng.uniform(0, 100, 120), rng.normal(5, 1, 120)


def test_lists_arrays_and_dataframes_agree(lw, columns):
    x, y, v = columns
    lags = {"width": 10.0, "count": 5}
    from_arrays = lw.experimental_variogram(x=x, y=y, values=v, lags=lags)
    from_lists = lw.experimental_variogram(x=x.tolist(), y=y.tolist(), values=v.tolist(), lags=lags)
    frame = pd.DataFrame({"east": x, "north": y, "lead": v})
    from_frame = lw.experimental_variogram(frame, columns={"x": "east", "y": "north", "values": "lead"}, lags=lags)
    assert isinstance(from_arrays, ExperimentalVariogram)
    values = [[c.value for c in r.directions[0].classes] for r in (from_arrays, from_lists, from_frame)]
    assert values[0] == values[1] == values[2]
    assert from_arrays.provenance["input_sha256"] == from_frame.provenance["input_sha256"]
    table = from_arrays.to_dataframe()
    assert list(table["pairs"]) == [c.pairs for c in from_arrays.directions[0].classes]


def test_directions_and_statistic(lw, columns):
    x, y, v = columns
    result = lw.experimental_variogram(
        x=x, y=y, values=v, directions=[{"azimuth": 45, "tolerance": 22.5}, {"azimuth": 135}], statistic="madogram"
    )
    assert [d.azimuth for d in result.directions] == [45.0, 135.0]
    assert result.parameters["statistic"] == "madogram"


def test_variogram_map(lw, columns):
    x, y, v = columns
    result = lw.variogram_map(x=x, y=y, values=v, cell_size=10.0, cells=2)
    assert isinstance(result, VariogramMap) and len(result.hx) == 5 and len(result.values) == 5
    assert len(result.to_dataframe()) == 25


def test_variogram_map_by_the_grid_method(lw, columns):
    """Reference: the exact map of the same samples; each grid cell within its stated bound of it."""
    x, y, v = columns
    grid = lw.variogram_map(x=x, y=y, values=v, cell_size=10.0, cells=2, method="grid", tolerance=0.05)
    exact = lw.variogram_map(x=x, y=y, values=v, cell_size=10.0, cells=2)
    assert grid.parameters["method"] == "grid" and grid.parameters["grid"]["tolerance"] == 0.05
    assert exact.parameters["method"] == "exact" and exact.error_bound == ()
    assert len(grid.error_bound) == len(grid.pair_bound) == len(grid.bound_exceeded) == 5
    for r in range(5):
        for c in range(5):
            assert abs(grid.pairs[r][c] - exact.pairs[r][c]) <= grid.pair_bound[r][c]
            g, e, bound = grid.values[r][c], exact.values[r][c], grid.error_bound[r][c]
            if g is not None and e is not None and bound is not None:
                assert abs(g - e) <= bound * abs(g) + 1e-12
    assert {"error_bound", "pair_bound", "bound_exceeded"} <= set(grid.to_dataframe().columns)


def test_validation_error_names_fields(lw):
    with pytest.raises(ValidationError) as info:
        lw.experimental_variogram(x=[0, 1, 2], values=[1, 2, "x"])
    error = info.value
    assert error.status == 422 and error.errors[0]["pointer"] == "/samples/values/2"
    assert error.request_id and "ValidationError(status=422" in repr(error)
    assert isinstance(error, ValueError)


def test_nan_refused_before_sending(lw):
    with pytest.raises(ValidationError, match="NaN"):
        lw.experimental_variogram(x=[0.0, 1.0], values=[1.0, float("nan")])


def test_limit_error(lw):
    with pytest.raises(LimitError) as info:
        lw.experimental_variogram(x=list(range(5001)), values=[1.0] * 5001)
    assert info.value.limit == "LAGWISE_MAX_SAMPLES" and info.value.allowed == 5000


def test_health(lw):
    assert lw.health() == {"status": "alive"} and lw.ready()


def test_transport_error_after_retries():
    slept = []
    client = Lagwise("http://127.0.0.1:9", retries=RetryPolicy(retries=2, sleep=slept.append), timeout=2)
    with pytest.raises(TransportError, match="after 3 attempts"):
        client.health()
    assert len(slept) == 2 and slept[1] >= slept[0] * 0.5


def test_fit_model_and_local_evaluation(lw):
    from lagwise.core.modelling.models import Structure, VariogramModel

    from tests.reference.simulate import isotropic, simulate

    rng = np.random.default_rng(30)
    coords = rng.uniform(0, 100, (400, 2))
    values = simulate(isotropic("spherical", 1.0, 20.0), coords, rng)
    fit = lw.fit_model(x=coords[:, 0], y=coords[:, 1], values=values, lags={"width": 3, "count": 12})
    assert fit.candidates[0].rank == 1 and len(fit.candidates) >= 16
    structure = fit.model.structures[0]
    assert abs(structure.range - 20.0) / 20.0 < 0.3
    # The SDK evaluates the model in pure Python exactly as the service does.
    core = VariogramModel(
        fit.model.nugget, tuple(Structure(s.family, s.partial_sill, s.range, s.extra) for s in fit.model.structures)
    )
    for c in fit.experimental["directions"][0]["classes"]:
        assert fit.model.semivariance(c["mean_distance"]) == pytest.approx(c["model_value"], rel=1e-12)
        assert fit.model.semivariance(c["mean_distance"]) == pytest.approx(
            float(core.semivariance(np.array([c["mean_distance"]]))[0]), rel=1e-12
        )
    assert fit.model.covariance(0.0) == pytest.approx(fit.model.sill)
    refit = lw.fit_model(
        experimental=lw.experimental_variogram(
            x=coords[:, 0], y=coords[:, 1], values=values, lags={"width": 3, "count": 12}
        ),
        families=["spherical"],
    )
    assert refit.parameters["families"] == ["spherical"]


def test_model_families(lw):
    families = lw.model_families()
    assert [f["name"] for f in families][:3] == ["spherical", "exponential", "gaussian"]


def test_cross_validate_and_predict(lw):
    from lagwise_client import VariogramModel

    rng = np.random.default_rng(40)
    x, y = rng.uniform(0, 100, 150), rng.uniform(0, 100, 150)
    v = np.sin(x / 20) + np.cos(y / 25) + rng.normal(0, 0.1, 150)
    model = VariogramModel.from_dict(
        {"nugget": 0.01, "structures": [{"family": "gaussian", "partial_sill": 1.0, "range": 60.0}]}
    )
    cv = lw.cross_validate(x=x, y=y, values=v, model=model)
    assert cv.statistics["count"] == 150 and cv.assessment
    assert len(cv.to_dataframe()) == 150
    grid = lw.predict(
        x=x,
        y=y,
        values=v,
        model=model,
        grid={"origin": [0, 0], "spacing": [10, 20], "shape": [11, 6]},
        neighbourhood={"max_points": 16},
    )
    surface = grid.to_grid()
    assert surface.shape == (6, 11) and np.isfinite(surface).all()
    assert grid.to_grid("variance").min() >= 0
    points = lw.predict(x=x, y=y, values=v, model=model, targets={"x": x[:3], "y": y[:3]})
    np.testing.assert_allclose(points.estimate, v[:3], rtol=1e-6)


def test_analyze_with_figures(lw, tmp_path):
    from lagwise.demo import elmsworth_samples

    result = lw.analyze(
        elmsworth_samples(),
        transform="log",
        variogram={"directions": "auto"},
        figures=["variogram", "cross_validation"],
        figure_format="png",
    )
    assert result.verdict["text"].startswith("Spatial structure found") and result.model.structures
    assert result.verdict["level"] in ("weak", "usable", "review")
    assert sum(s["selected"] for s in result.selection["strategies"]) == 1
    assert result.cross_validation["statistics"]["count"] == 260
    paths = result.save_figures(tmp_path)
    assert sorted(p.name for p in paths) == ["cross_validation.png", "variogram.png"]
    assert paths[0].read_bytes()[:4] == b"\x89PNG"


def test_raster_variogram_through_the_sdk(lw):
    from lagwise_client import raster_samples

    rng = np.random.default_rng(3)
    grid = rng.normal(size=(12, 16))
    grid[rng.random(grid.shape) < 0.2] = np.nan
    result = lw.experimental_variogram(
        raster_samples(grid, origin=(0, 0), spacing=(5, 5)), lags={"width": 10, "count": 4}
    )
    assert isinstance(result, ExperimentalVariogram)
    assert result.parameters["method"] == "grid" and result.parameters["grid"]["source"] == "raster"
