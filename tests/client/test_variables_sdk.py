"""SDK with several variables against a real gunicorn service: DataFrames with several value
columns in, tidy frames per variable and cross pair out; the invented 12-analyte batch
(tests/batch_data.py) analysed in one call.

Outside reference: each direct variogram equals the single-variable request on that
variable's measured samples, and the cross-semivariance equals a brute-force enumeration of
every pair with ``scipy.spatial.distance.pdist``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from lagwise_client import BatchAnalysis, ColumnsError, Lagwise, SeveralVariograms
from scipy.spatial.distance import pdist

from tests.batch_data import ANALYTES, batch
from tests.live import running_service

EDGES = [0.0, 60.0, 120.0, 180.0, 240.0]


@pytest.fixture(scope="module")
def lw():
    with running_service({"LAGWISE_DEADLINE_SECONDS": "900"}) as url, Lagwise(url, timeout=900.0) as client:
        yield client


@pytest.fixture(scope="module")
def table():
    samples = batch()
    frame = pd.DataFrame({"x": samples["x"], "y": samples["y"], **samples["variables"]})
    return frame.astype({name: float for name in ANALYTES})  # None becomes NaN, as a table read from a file


def test_several_value_columns_give_direct_and_cross_frames(lw, table):
    result = lw.experimental_variogram(table, columns={"values": ["lead", "nitrate", "toluene"]}, lags={"edges": EDGES})
    assert isinstance(result, SeveralVariograms)
    assert [v.name for v in result.variables] == ["lead", "nitrate", "toluene"]
    tidy = result.to_dataframe()
    assert set(tidy["kind"]) == {"direct", "cross"}
    assert len(tidy) == 6 * (len(EDGES) - 1)
    frames = result.frames()
    assert set(frames) == {
        "lead",
        "nitrate",
        "toluene",
        ("lead", "nitrate"),
        ("lead", "toluene"),
        ("nitrate", "toluene"),
    }
    measured = table.dropna(subset=["nitrate"])
    alone = lw.experimental_variogram(
        x=measured["x"], y=measured["y"], values=measured["nitrate"], lags={"edges": EDGES}
    )
    np.testing.assert_allclose(frames["nitrate"]["value"], alone.to_dataframe()["value"], rtol=1e-9)
    np.testing.assert_array_equal(frames["nitrate"]["pairs"], alone.to_dataframe()["pairs"])
    # Class standard errors and intervals as the single-variable request's (its own blocks).
    assert result.variable("nitrate").class_uncertainty == alone.parameters["class_uncertainty"]
    for column in ("standard_error", "interval_95", "uncertainty_reason"):
        assert list(frames["nitrate"][column]) == list(alone.to_dataframe()[column])
    assert result.cross[0].class_uncertainty["blocks"] is not None
    # Cross-semivariance by brute force (pdist), over the pairs with both measured at both ends.
    coords = table[["x", "y"]].to_numpy()
    a, b = table["lead"].to_numpy(), table["toluene"].to_numpy()
    i, j = np.triu_indices(len(table), 1)
    d = pdist(coords)
    product = (a[j] - a[i]) * (b[j] - b[i])
    cross = frames[("lead", "toluene")]
    for k in range(len(EDGES) - 1):
        keep = ~np.isnan(product) & (d >= EDGES[k]) & (d < EDGES[k + 1])
        assert cross["pairs"][k] == keep.sum()
        assert cross["value"][k] == pytest.approx(product[keep].sum() / (2 * keep.sum()), rel=1e-9)


def test_one_variable_of_several_by_name(lw, table):
    result = lw.experimental_variogram(
        table, columns={"values": ["lead", "zinc"]}, variable="zinc", lags={"edges": EDGES}
    )
    assert result.summary["samples"] == 90 and len(result.directions) == 1


def test_a_value_column_the_table_lacks_is_refused_before_sending(lw, table):
    with pytest.raises(ColumnsError, match="tin"):
        lw.experimental_variogram(table, columns={"values": ["lead", "tin"]})


def test_twelve_analyte_batch_through_the_sdk(lw, table):
    result = lw.analyze(
        table,
        columns={"values": list(ANALYTES)},
        transform="log",
        fit={"compare": False},
        cross_validation={"kriging": {"type": "ordinary"}},
    )
    assert isinstance(result, BatchAnalysis)
    assert result.names == ANALYTES
    summary = result.to_dataframe()
    assert list(summary["name"]) == list(ANALYTES) and summary["samples"].iloc[0] == 90
    assert set(summary["verdict"]) <= {"no_structure", "weak", "usable", "review"}
    assert result["nitrate"].summary["samples"] == int(table["nitrate"].notna().sum())


def test_batch_frames_per_variable(lw, table):
    """Per-variable DataFrames of a batch: each holds that variable's measured samples only, and
    the summary's RMSE is the root mean square of the frame's errors (definition, common practice)."""
    names = ["lead", "nitrate", "xylene"]
    result = lw.analyze(
        table, columns={"values": names}, fit={"compare": False}, cross_validation={"kriging": {"type": "ordinary"}}
    )
    frames = result.frames()
    assert list(frames) == names
    summary = result.to_dataframe().set_index("name")
    for name in names:
        frame = frames[name]
        measured = table[name].dropna().to_numpy()
        assert len(frame) == len(measured) == summary.loc[name, "samples"] == summary.loc[name, "count"]
        np.testing.assert_allclose(np.sort(frame["observed"]), np.sort(measured), rtol=1e-12)
        np.testing.assert_allclose(frame["error"], frame["estimate"] - frame["observed"], rtol=1e-9, atol=1e-12)
        rmse = float(np.sqrt(np.mean(frame["error"].to_numpy() ** 2)))
        assert summary.loc[name, "rmse"] == pytest.approx(rmse, rel=1e-9)
        assert summary.loc[name, "sill"] == pytest.approx(
            summary.loc[name, "nugget"] + sum(s.partial_sill for s in result[name].model.structures)
        )
    # A variable of the batch gives what the single-variable request on its measured samples gives.
    rows = table.dropna(subset=["nitrate"])
    alone = lw.analyze(
        x=rows["x"],
        y=rows["y"],
        values=rows["nitrate"],
        fit={"compare": False},
        cross_validation={"kriging": {"type": "ordinary"}},
    )
    assert result["nitrate"].cross_validation["statistics"] == alone.cross_validation["statistics"]
    assert result["nitrate"].model == alone.model


def test_joint_fit_from_a_several_variogram_result(lw, table):
    """fit_joint_model takes the SeveralVariograms result itself, as it takes its document."""
    several = lw.experimental_variogram(table, columns={"values": ["lead", "zinc"]}, lags={"edges": EDGES})
    typed = lw.fit_joint_model(experimental=several, families=["spherical"])
    plain = lw.fit_joint_model(experimental=several.to_dict(), families=["spherical"])
    assert typed.model == plain.model and typed.model.variables == ("lead", "zinc")
