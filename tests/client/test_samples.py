"""How the SDK builds the ``samples`` member: tables, censoring, ids, ``columns`` checks."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from lagwise_client import ColumnsError, Lagwise, LagwiseError, ValidationError, raster_samples, samples_document
from lagwise_client.client import request_body


@pytest.fixture()
def lab_table():
    """Six results, two below their detection limit (value missing there, limit given)."""
    return pd.DataFrame(
        {
            "east": [0.0, 10.0, 20.0, 30.0, 40.0, 50.0],
            "north": [0.0, 5.0, 0.0, 5.0, 0.0, 5.0],
            "lead": [12.0, np.nan, 13.0, 18.0, np.nan, 21.0],
            "below": [False, True, False, False, True, False],
            "limit": [np.nan, 4.0, np.nan, np.nan, 2.0, np.nan],
            "sample": [101, 102, 103, 104, 105, 106],
        }
    )


LAB_COLUMNS = {
    "x": "east",
    "y": "north",
    "values": "lead",
    "censored": "below",
    "detection_limits": "limit",
    "ids": "sample",
}


def test_censoring_flags_and_limits_pass_through_from_a_dataframe(lab_table):
    document = samples_document(lab_table, columns=LAB_COLUMNS)
    assert document["censored"] == [False, True, False, False, True, False]
    assert document["detection_limits"] == [None, 4.0, None, None, 2.0, None]
    # The service ignores a censored sample's value; a missing one is sent as its limit.
    assert document["values"] == [12.0, 4.0, 13.0, 18.0, 2.0, 21.0]
    assert document["ids"] == ["101", "102", "103", "104", "105", "106"]


def test_default_column_names_are_read_without_columns():
    table = {"x": [0, 1, 2], "values": [1.0, 0.5, 2.0], "censored": [False, True, False]}
    table["detection_limits"] = [None, 0.5, None]
    assert samples_document(table) == table


def test_integer_ids_are_sent_as_text():
    assert samples_document(x=[0, 1, 2], values=[1, 2, 3], ids=range(7, 10))["ids"] == ["7", "8", "9"]
    from_numpy = samples_document(x=[0, 1], values=[1, 2], ids=[np.int64(4), "B-5"])["ids"]
    assert from_numpy == ["4", "B-5"]
    frame = pd.DataFrame({"x": [0.0, 1.0], "value": [1.0, 2.0], "ids": [3, 4]})
    assert samples_document(frame) == {"x": [0.0, 1.0], "values": [1.0, 2.0], "ids": ["3", "4"]}


def test_unknown_member_in_columns_is_refused_naming_it(lab_table):
    with pytest.raises(ColumnsError) as info:
        samples_document(lab_table, columns={"x": "east", "value": "lead"})
    error = info.value
    assert error.key == "value" and error.column is None and "detection_limits" in error.available
    assert "'value' is not a sample member" in str(error) and "x, y, z, values" in str(error)
    assert isinstance(error, ValidationError) and isinstance(error, ValueError) and isinstance(error, LagwiseError)
    assert error.status is None


def test_column_missing_from_the_table_is_refused_naming_the_columns(lab_table):
    with pytest.raises(ColumnsError) as info:
        samples_document(lab_table, columns={"x": "east", "values": "lead_mg_kg"})
    error = info.value
    assert error.key == "values" and error.column == "lead_mg_kg"
    assert error.available == tuple(lab_table.columns)
    assert "'lead_mg_kg', which the table lacks; its columns are east, north, lead, below" in str(error)


def test_ambiguous_calls_are_refused(lab_table):
    with pytest.raises(TypeError, match="not both"):
        samples_document(lab_table, censored=[True] * 6)
    with pytest.raises(TypeError, match="no table"):
        samples_document(x=[0, 1], values=[1, 2], columns={"x": "east"})
    with pytest.raises(TypeError, match="GeoJSON"):
        samples_document({"geojson": {}, "value_property": "v"}, columns={"values": "v"})
    with pytest.raises(TypeError, match="mapping of columns or a pandas DataFrame"):
        samples_document([[0, 1], [1, 2]])


def test_geojson_is_sent_as_given():
    geojson = {"geojson": {"type": "FeatureCollection", "features": []}, "value_property": "lead"}
    assert samples_document(geojson) == geojson


def test_a_several_variable_document_is_sent_as_given():
    """A built document with variables keeps its per-variable units and censoring (a table's
    columns would lose them); a table column that happens to be called variables stays a column."""
    document = {
        "x": [0.0, 1.0, 2.0],
        "y": [0.0, 1.0, 0.0],
        "variables": {"lead": [1.0, None, 3.0], "zinc": [2.0, 2.5, None]},
        "units": {"lead": "mg/kg", "zinc": "mg/kg"},
        "censored": {"zinc": [False, True, False]},
    }
    assert samples_document(document) == document
    with pytest.raises(TypeError, match="samples document with variables"):
        samples_document(document, columns={"x": "x"})
    table = {"x": [0.0, 1.0], "variables": [4.0, 5.0]}
    assert samples_document(table, columns={"values": "variables"}) == {"x": [0.0, 1.0], "values": [4.0, 5.0]}


def test_request_body_from_method_arguments(lab_table):
    body = request_body(
        dict(
            self=None,
            samples=lab_table,
            columns=LAB_COLUMNS,
            x=None,
            model={"nugget": 0.5, "structures": []},
            figure_size=(640, 480),
            targets={"x": np.array([1.0, 2.0])},
            censoring="limit",
            lags=None,
        )
    )
    assert sorted(body) == ["censoring", "figure_size", "model", "samples", "targets"]
    assert body["figure_size"] == [640, 480] and body["targets"] == {"x": [1.0, 2.0]}
    assert body["samples"]["censored"][1] is True


def test_nan_values_outside_censored_samples_are_still_refused(lab_table):
    lab_table.loc[0, "lead"] = np.nan
    with pytest.raises(ValidationError, match="NaN"):
        Lagwise("http://127.0.0.1:9").experimental_variogram(lab_table, columns=LAB_COLUMNS)


def test_censored_values_reach_the_service(service_url):
    rng = np.random.default_rng(5)
    n = 80
    frame = pd.DataFrame({"x": rng.uniform(0, 100, n), "y": rng.uniform(0, 100, n)})
    frame["value"] = rng.lognormal(2.0, 0.5, n)
    frame["censored"] = frame["value"] < 5.0
    frame["detection_limits"] = np.where(frame["censored"], 5.0, np.nan)
    frame.loc[frame["censored"], "value"] = np.nan
    frame["ids"] = np.arange(1000, 1000 + n)
    flagged = int(frame["censored"].sum())
    assert 5 < flagged < n - 5
    with Lagwise(service_url) as lw:
        result = lw.cross_validate(
            frame, model={"nugget": 1.0, "structures": [{"family": "exponential", "partial_sill": 20.0, "range": 40.0}]}
        )
    # half_limit (the service's default): each censored value counts as half its limit (common practice).
    substituted = np.where(frame["censored"], 2.5, frame["value"])
    assert result.samples["observed"] == pytest.approx(substituted.tolist(), rel=1e-12)
    assert result.samples["id"] == [str(i) for i in range(1000, 1000 + n)]
    assert math.isclose(result.statistics["count"], n)


def test_raster_samples_from_rows_with_missing_cells():
    grid = np.array([[1.0, np.nan, 3.0], [4.0, 5.0, np.nan]])
    document = request_body({"samples": raster_samples(grid, origin=(10, 20), spacing=(2, 0.5)), "method": "auto"})
    assert document == {
        "samples": {
            "raster": {
                "origin": [10.0, 20.0],
                "spacing": [2.0, 0.5],
                "shape": [3, 2],
                "values": [1.0, None, 3.0, 4.0, 5.0, None],
            }
        },
        "method": "auto",
    }
    with pytest.raises(TypeError, match="rectangle"):
        raster_samples([[1.0, 2.0], [3.0]])
    for flat in (np.arange(5.0), [1.0, 2.0], 3.0, []):
        with pytest.raises(TypeError, match="non-empty rectangle"):
            raster_samples(flat)


def test_analyze_sends_the_variogram_map_stage(monkeypatch):
    """The map stage goes under its own name, as the other stages (no service needed)."""
    from lagwise_client import Lagwise

    sent = {}

    def capture(self, method, path, body=None, **kwargs):
        sent.update(path=path, body=body)
        raise RuntimeError("captured")

    monkeypatch.setattr(Lagwise, "request", capture)
    with Lagwise("http://127.0.0.1:9") as lw, pytest.raises(RuntimeError, match="captured"):
        lw.analyze(
            x=[0.0, 1.0],
            y=[0.0, 1.0],
            values=[1.0, 2.0],
            figures=["variogram_map"],
            variogram_map={"method": "grid", "tolerance": 0.05},
        )
    assert sent["path"] == "/v1/analyses"
    assert sent["body"]["variogram_map"] == {"method": "grid", "tolerance": 0.05}
    assert sent["body"]["figures"] == ["variogram_map"]
