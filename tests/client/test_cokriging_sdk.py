"""SDK cokriging against a real gunicorn service: DataFrames in and out, results equal the core's."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from lagwise.core.kriging.cokriging import CokrigingSpec, VariableColumns
from lagwise.core.kriging.cokriging_runs import cokrige
from lagwise.core.kriging.neighbourhood import Neighbourhood
from lagwise.core.modelling.coregionalisation import JointModel as CoreJointModel
from lagwise.core.modelling.coregionalisation import JointStructure
from lagwise_client import Cokriging, CokrigingCrossValidation, ColumnsError, JointModel, Lagwise, ValidationError

MODEL = JointModel(
    ("lead", "zinc"),
    ((2.0, 1.0), (1.0, 40.0)),
    ({"family": "spherical", "range": 40.0, "sills": [[20.0, 60.0], [60.0, 360.0]]},),
)


@pytest.fixture()
def lw(service_url):
    with Lagwise(service_url) as client:
        yield client


@pytest.fixture()
def table():
    rng = np.random.default_rng(5)
    n = 60
    lead = rng.normal(50, 5, n)
    lead[::3] = np.nan
    return pd.DataFrame(
        {
            "east": rng.uniform(0, 100, n),
            "north": rng.uniform(0, 100, n),
            "lead": lead,
            "zinc": rng.normal(200, 20, n),
            "site": [f"s{i}" for i in range(n)],
        }
    )


def test_cokrige_from_a_dataframe_equals_the_core(lw, table):
    targets = pd.DataFrame({"x": [10.0, 50.0, 90.0], "y": [15.0, 45.0, 85.0]})
    result = lw.cokrige(
        table,
        variables=["lead", "zinc"],
        columns={"x": "east", "y": "north", "ids": "site"},
        model=MODEL,
        primary="lead",
        targets={"x": targets["x"], "y": targets["y"]},
        neighbourhood={"max_points": 12},
    )
    assert isinstance(result, Cokriging)
    columns = VariableColumns(
        table[["east", "north"]].to_numpy(), ("lead", "zinc"), table[["lead", "zinc"]].to_numpy(), tuple(table["site"])
    )
    model = CoreJointModel(
        ("lead", "zinc"),
        np.array(MODEL.nugget),
        (JointStructure("spherical", 40.0, np.array([[20.0, 60.0], [60.0, 360.0]])),),
    )
    expected = cokrige(
        columns,
        model,
        CokrigingSpec("ordinary", "lead"),
        Neighbourhood(max_points=12, min_points=4),
        targets.to_numpy(),
    )
    np.testing.assert_allclose(result.estimate, expected.prediction.estimate, rtol=1e-12)
    frame = result.to_dataframe()
    assert list(frame.columns) == ["x", "y", "estimate", "variance", "variance_primary_only"]
    assert (frame["variance"] <= frame["variance_primary_only"] + 1e-9).all()
    assert result.variance_reduction == pytest.approx(expected.comparison.reduction, rel=1e-12)


def test_cross_validate_cokriging_dataframe(lw, table):
    result = lw.cross_validate_cokriging(
        table,
        variables=["lead", "zinc"],
        columns={"x": "east", "y": "north", "ids": "site"},
        model=MODEL.to_dict(),
        neighbourhood={"max_points": 12},
    )
    assert isinstance(result, CokrigingCrossValidation)
    frame = result.to_dataframe()
    assert len(frame) == int(table["lead"].notna().sum())
    assert frame["id"].iloc[0] == "s1"
    assert result.cokriging["statistics_primary_only"]["count"] == len(frame)


def test_refusals(lw, table):
    with pytest.raises(ColumnsError):
        lw.cokrige(
            table,
            variables=["lead", "tin"],
            columns={"x": "east", "y": "north"},
            model=MODEL,
            targets={"x": [1.0], "y": [1.0]},
        )
    bad = JointModel(MODEL.variables, MODEL.nugget, ({**MODEL.structures[0], "sills": [[20.0, 90.0], [90.0, 360.0]]},))
    with pytest.raises(ValidationError) as caught:
        lw.cokrige(
            table,
            variables=["lead", "zinc"],
            columns={"x": "east", "y": "north"},
            model=bad,
            targets={"x": [1.0], "y": [1.0]},
        )
    assert "smallest eigenvalue" in str(caught.value.errors)


def test_fit_joint_model_then_cokrige(lw, table):
    """The joint fit's model (PSD matrices, numpy.linalg.eigvalsh >= -1e-12) goes straight into cokrige."""
    from tests.api.test_cokriging_api import _several_experimental

    fit = lw.fit_joint_model(experimental=_several_experimental(), families=["spherical"])
    assert isinstance(fit.model, JointModel) and fit.model.variables == ("lead", "zinc")
    for structure in fit.model.structures:
        assert np.linalg.eigvalsh(np.array(structure["sills"])).min() >= -1e-12
    assert fit.to_dataframe()["selected"].sum() == 1
    classes = fit.classes()
    assert set(zip(classes["variable"], classes["with"], strict=True)) == {
        ("lead", "lead"),
        ("zinc", "zinc"),
        ("lead", "zinc"),
    }
    result = lw.cokrige(
        table,
        variables=["lead", "zinc"],
        columns={"x": "east", "y": "north"},
        model=fit.model,
        targets={"x": [5.0], "y": [5.0]},
    )
    assert result.estimate[0] is not None


def test_fit_joint_model_from_a_dataframe(lw, table):
    fit = lw.fit_joint_model(
        table,
        variables=["lead", "zinc"],
        columns={"x": "east", "y": "north"},
        lags={"width": 10.0, "count": 6},
        families=["spherical"],
        min_pairs=10,
    )
    assert fit.model.variables == ("lead", "zinc")
    assert sum(c["selected"] for c in fit.candidates) == 1
    with pytest.raises(TypeError):
        lw.fit_joint_model(table, experimental={"variables": []})
