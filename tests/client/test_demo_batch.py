"""The demo's invented twelve-analyte batch: its data, and (slow) its report section from a real service."""

from __future__ import annotations

import html

import numpy as np
import pytest
from lagwise.demo import ENGINE_SHED, depot_field, elmsworth_samples
from lagwise.demo_batch import ANALYTES, MERCURY_LIMIT, batch_html, batch_lines, elmsworth_batch, run_batch
from lagwise_client import Lagwise

from tests.live import running_service


@pytest.fixture(scope="module")
def samples():
    return elmsworth_batch(*depot_field(), ENGINE_SHED)


def test_the_batch_is_heterotopic_seeded_and_shares_the_demo_lead(samples):
    assert list(samples["variables"]) == list(ANALYTES) and len(ANALYTES) == 12
    assert samples == elmsworth_batch(*depot_field(), ENGINE_SHED)
    lead = elmsworth_samples()["values"]
    np.testing.assert_allclose(samples["variables"]["lead"], lead, atol=0.05 + 1e-9)  # the demo's 0.1 rounding
    counts = {name: sum(v is not None for v in column) for name, column in samples["variables"].items()}
    assert counts["zinc"] == len(samples["x"]) == 260
    assert 100 < counts["naphthalene"] < 200 and counts["naphthalene"] == counts["toluene"] == counts["xylene"]
    assert 80 < counts["sulfate"] < 180
    below = samples["censored"]["mercury"]
    assert any(below)
    for flag, value, limit in zip(
        below, samples["variables"]["mercury"], samples["detection_limits"]["mercury"], strict=True
    ):
        assert (limit == value == MERCURY_LIMIT) if flag else (limit is None and value >= MERCURY_LIMIT)


def test_metals_follow_the_lead_and_sulfate_follows_nothing(samples):
    """Pearson correlations of the logs (numpy.corrcoef): the metals share the lead's track pattern."""
    logs = {n: np.log(np.array([np.nan if v is None else v for v in c])) for n, c in samples["variables"].items()}
    assert np.corrcoef(logs["lead"], logs["zinc"])[0, 1] > 0.6
    measured = ~np.isnan(logs["sulfate"])
    assert abs(np.corrcoef(logs["lead"][measured], logs["sulfate"][measured])[0, 1]) < 0.25


@pytest.mark.slow
def test_the_batch_section_from_a_real_service(samples, tmp_path):
    """One analyses call for the twelve analytes; each gets a section with its figures; sulfate,
    generated as independent noise, is judged to have no structure (the honest answer)."""
    with running_service({"LAGWISE_DEADLINE_SECONDS": "900"}) as url, Lagwise(url, timeout=900.0) as client:
        result = run_batch(client, samples, tmp_path / "analytes")
    batch = result["batch"]
    assert batch.names == tuple(ANALYTES)
    assert batch["sulfate"].verdict["level"] == "no_structure"
    assert batch["naphthalene"].summary["samples"] == sum(v is not None for v in samples["variables"]["naphthalene"])
    page = batch_html(result)
    text = "\n".join(batch_lines(result))
    for name in ANALYTES:
        assert f'id="analyte-{name}"' in page and f"\n  {name} " in text
        assert (tmp_path / "analytes" / name / "variogram.svg").read_text().lstrip().startswith(("<?xml", "<svg"))
    assert html.escape("variable 'mercury'") in page.split('id="analyte-mercury"')[1].split("</section>")[0]
    model = result["joint"].model
    for matrix in [model.nugget, *(s["sills"] for s in model.structures)]:
        assert np.linalg.eigvalsh(np.array(matrix)).min() >= -1e-12  # PSD (numpy.linalg.eigvalsh)
