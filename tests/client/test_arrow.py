"""The SDK's Arrow form against a real service (``lagwise serve``: the front and gunicorn on 127.0.0.1).

References: the JSON form of the same call (same numbers, same ``provenance.input_sha256``) and
``hashlib.sha256`` over the float64 columns (the input hash convention of the HTTP contract).
"""

from __future__ import annotations

import hashlib

import numpy as np
import pytest
import requests
from lagwise_client import Lagwise, LimitError, ValidationError, columnar

MODEL = {"nugget": 0.1, "structures": [{"family": "exponential", "partial_sill": 1.0, "range": 30.0}]}


class RecordingSession(requests.Session):
    """A session that remembers the Content-Type of each request it sends."""

    def __init__(self):
        super().__init__()
        self.sent: list[str] = []

    def request(self, method, url, **kwargs):
        self.sent.append((kwargs.get("headers") or {}).get("Content-Type", ""))
        return super().request(method, url, **kwargs)


@pytest.fixture()
def field():
    rng = np.random.default_rng(21)
    n = 400
    x, y = rng.uniform(0, 200, n), rng.uniform(0, 200, n)
    return x, y, np.sin(x / 30) + np.cos(y / 40) + rng.normal(0, 0.2, n)


def test_arrow_and_json_give_the_same_results(service_url, field):
    x, y, v = field
    session = RecordingSession()
    with (
        Lagwise(service_url, arrow_above=100, session=session) as by_arrow,
        Lagwise(service_url, arrow_above=None) as by_json,
    ):
        lags = {"width": 10.0, "count": 8}
        a = by_arrow.experimental_variogram(x=x, y=y, values=v, lags=lags)
        j = by_json.experimental_variogram(x=x, y=y, values=v, lags=lags)
        assert session.sent[-1].startswith("multipart/form-data")
        assert [c.value for c in a.directions[0].classes] == [c.value for c in j.directions[0].classes]
        digest = hashlib.sha256(b"".join(c.astype("<f8").tobytes() for c in (x, y, v))).hexdigest()
        assert a.provenance["input_sha256"] == j.provenance["input_sha256"] == digest
        grid = {"origin": [0, 0], "spacing": [20, 20], "shape": [11, 11]}
        hood = {"max_points": 16}
        pa_ = by_arrow.predict(x=x, y=y, values=v, model=MODEL, grid=grid, neighbourhood=hood, arrow_answer=True)
        pj = by_json.predict(x=x, y=y, values=v, model=MODEL, grid=grid, neighbourhood=hood)
        assert pa_.estimate == pj.estimate and pa_.variance == pj.variance and pa_.x == pj.x
        assert pa_.grid == pj.grid and pa_.provenance["input_sha256"] == pj.provenance["input_sha256"]


def test_an_arrow_answer_to_json_samples(service_url, field):
    x, y, v = field
    targets = {"x": [10.0, 5000.0], "y": [10.0, 5000.0]}
    hood = {"max_points": 8, "radius": 20.0, "min_points": 3}
    with Lagwise(service_url, arrow_above=None) as lw:
        arrow = lw.predict(x=x, y=y, values=v, model=MODEL, targets=targets, neighbourhood=hood, arrow_answer=True)
        plain = lw.predict(x=x, y=y, values=v, model=MODEL, targets=targets, neighbourhood=hood)
    assert arrow.estimate == plain.estimate and arrow.estimate[1] is None
    assert arrow.unestimated == plain.unestimated


def test_more_samples_than_the_json_limit_go_as_arrow(service_url):
    # The service under test has LAGWISE_MAX_SAMPLES=5000; the Arrow form has its own row limit.
    rng = np.random.default_rng(3)
    n = 6000
    x, y, v = rng.uniform(0, 1000, n), rng.uniform(0, 1000, n), rng.normal(size=n)
    lags = {"width": 5.0, "count": 4}
    with Lagwise(service_url, arrow_above=None) as lw, pytest.raises(LimitError) as refused:
        lw.experimental_variogram(x=x, y=y, values=v, lags=lags)
    assert refused.value.limit == "LAGWISE_MAX_SAMPLES"
    with Lagwise(service_url, arrow_above=1000) as lw:
        result = lw.experimental_variogram(x=x, y=y, values=v, lags=lags)
    assert result.summary["samples"] == n


def test_without_pyarrow_or_with_bad_entries_the_request_is_json(service_url, field, monkeypatch):
    x, y, v = field
    session = RecordingSession()
    with Lagwise(service_url, arrow_above=10, session=session) as lw:
        values = v.tolist()
        values[5] = "high"
        with pytest.raises(ValidationError) as bad:
            lw.experimental_variogram(x=x, y=y, values=values)
        assert session.sent[-1] == "application/json"
        assert any(e["pointer"] == "/samples/values/5" for e in bad.value.errors)
        monkeypatch.setattr(columnar, "available", lambda: False)
        lw.experimental_variogram(x=x, y=y, values=v)
        assert session.sent[-1] == "application/json"


def test_pyarrow_is_imported_only_when_arrow_is_used():
    """The SDK still imports with requests alone (checked in a fresh process)."""
    import subprocess
    import sys

    code = "import sys, lagwise_client; print('pyarrow' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"


def test_a_simulation_answers_in_arrow_with_the_same_result(service_url, field):
    x, y, v = field
    options = {
        "model": {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 0.9, "range": 60.0}]},
        "grid": {"origin": [0, 0], "spacing": [25, 25], "shape": [8, 8]},
        "realisations": 4,
        "thresholds": [0.5],
        "return_realisations": True,
    }
    with Lagwise(service_url, arrow_above=100) as lw:
        arrow = lw.simulate(x=x, y=y, values=v, arrow_answer=True, **options)
        plain = lw.simulate(x=x, y=y, values=v, **options)
    assert arrow.mean == plain.mean and arrow.quantiles == plain.quantiles
    assert arrow.exceedance == plain.exceedance and arrow.realisations == plain.realisations
    assert arrow.provenance["input_sha256"] == plain.provenance["input_sha256"]


def test_numpy_columns_go_into_arrow_as_they_are(field):
    """The samples member keeps numpy columns as arrays; their Arrow stream equals the one from lists."""
    import pyarrow as pa
    from lagwise_client.samples import samples_document

    x, y, v = field
    document = samples_document(x=x, y=y, values=v, arrays=True)
    assert all(isinstance(document[k], np.ndarray) for k in ("x", "y", "values"))
    from_lists = columnar.samples_stream({"x": x.tolist(), "y": y.tolist(), "values": v.tolist()})
    table = pa.ipc.open_stream(columnar.samples_stream(document)).read_all()
    assert table.equals(pa.ipc.open_stream(from_lists).read_all())


def test_a_large_raster_goes_as_arrow_with_the_json_rasters_results(service_url):
    from lagwise_client import raster_samples

    rng = np.random.default_rng(5)
    x, y = np.meshgrid(np.arange(40), np.arange(25))
    grid = np.sin(x / 6.0) + np.cos(y / 5.0) + rng.normal(0, 0.2, x.shape)
    grid[rng.random(grid.shape) < 0.2] = np.nan
    samples = raster_samples(grid, origin=(10.0, 20.0), spacing=(2.0, 2.0))
    lags = {"width": 4.0, "count": 8}
    session = RecordingSession()
    with (
        Lagwise(service_url, arrow_above=500, session=session) as by_arrow,
        Lagwise(service_url, arrow_above=None) as by_json,
    ):
        a = by_arrow.experimental_variogram(samples, lags=lags)
        assert session.sent[-1].startswith("multipart/form-data")
        j = by_json.experimental_variogram(samples, lags=lags)
        assert [c.value for c in a.directions[0].classes] == [c.value for c in j.directions[0].classes]
        assert a.provenance["input_sha256"] == j.provenance["input_sha256"]
        grid[3, 4] = np.inf  # refused before sending, named by its cell (x fastest)
        with pytest.raises(ValidationError) as bad:
            by_arrow.experimental_variogram(raster_samples(grid, spacing=(2.0, 2.0)), lags=lags)
        assert [e["pointer"] for e in bad.value.errors] == [f"/samples/raster/values/{3 * 40 + 4}"]
