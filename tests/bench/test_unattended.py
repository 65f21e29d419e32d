"""The unattended-analysis benchmark harness runs end to end and reads both response shapes."""

from __future__ import annotations

import numpy as np
import pytest
import scenarios as sim
import unattended as bench


@pytest.fixture()
def service(app):
    return bench.Service(app)


def test_the_harness_scores_one_tiny_scenario(service):
    """80 samples, a 6 × 6 grid, one seed: a scored run and a printed report with every target."""
    runs = bench.run_all(service, sim.SCENARIOS[:1], seeds=(5,), samples=80, nodes=6)
    (run,) = runs
    assert run.status == 200 and run.missing == 0
    # true-model kriging is the best linear unbiased map; an analysis of 80 samples cannot beat
    # it by much, and a map that carries any information is not hopeless either
    assert 0.3 < run.efficiency < 1.2
    assert 0.0 <= run.coverage <= 1.0
    assert run.level in {"no_structure", "weak", "usable", "review"}
    text = bench.report(runs, service, timed=bench.Timing(2.0, 1.0, 1.5, 0.8))
    assert text.count("MET") + text.count("MISSED") == 8
    assert "ratio 2.00" in text and "isotropic" in text.splitlines()[1]


def test_efficiency_is_one_when_the_analysis_is_given_the_true_model(service, monkeypatch):
    """Sanity of the scoring: the true model's map scores efficiency 1 against itself.

    The analysis is replaced by true-model kriging (same request through /v1/predictions), so
    the ratio of the two RMSEs must be exactly 1.
    """
    field = sim.realise(sim.SCENARIOS[0], 4, samples=60, nodes=5)
    truth = bench.true_kriging(service, field)
    variance = np.ones_like(truth)

    def as_if_true(path, body, options):
        return 200, {"prediction": {"estimate": truth.tolist(), "variance": variance.tolist()}, "verdict": "x"}

    monkeypatch.setattr(service, "post_with_options", as_if_true)
    run = bench.score(service, field)
    assert run.efficiency == pytest.approx(1.0, rel=1e-12)
    expected = np.mean(np.abs(truth - field.truth) <= bench.Z95)
    assert run.coverage == pytest.approx(expected)


def test_refused_options_are_dropped_and_remembered(service):
    field = sim.realise(sim.SCENARIOS[0], 2, samples=60, nodes=4)
    body = {"samples": bench.samples_body(field), "variogram": {"bogus_option": 1}}
    status, document = service.post_with_options("/v1/analyses", body, bench.UNATTENDED)
    assert status == 422 and "/variogram/bogus_option" not in service.refused  # not ours: kept
    status, document = service.post_with_options("/v1/analyses", {"samples": body["samples"]}, bench.UNATTENDED)
    assert status == 200
    offered = {bench._pointer(keys) for keys, _ in bench.UNATTENDED}
    assert service.refused <= offered
    assert document["parameters"] is not None


def test_new_response_fields_are_preferred_and_old_ones_still_read():
    aniso = {"azimuth": 30.0, "ratio": 0.3}
    new = {
        "selection": {
            "strategies": [
                {"name": "isotropic", "model": {"nugget": 0, "structures": [{"range": 1}]}, "selected": False},
                {
                    "name": "anisotropic",
                    "model": {"nugget": 0, "structures": [{"anisotropy": aniso}]},
                    "selected": True,
                },
            ]
        },
        "fit": {"model": {"nugget": 0, "structures": []}},
        "experimental": {"anisotropy": {"azimuth": 10.0, "ratio": 0.5, "supported": False}},
        "verdict": {"usable": False, "level": "review", "text": "..."},
    }
    model, name = bench.map_model(new)
    assert name == "anisotropic" and bench.model_anisotropy(model) == aniso
    assert bench.verdict_level(new["verdict"]) == ("review", False)
    assert bench.reported_anisotropy(new, None) is None  # marked unsupported
    old = {
        "fit": {"model": {"nugget": 1.0, "structures": []}},
        "experimental": {"anisotropy": {"azimuth": 140.0, "ratio": 0.2}},
    }
    model, name = bench.map_model(old)
    assert name == "" and bench.model_anisotropy(model) is None
    assert bench.reported_anisotropy(old, None)["azimuth"] == 140.0
    assert bench.verdict_level("No spatial structure: the values vary ...") == ("no_structure", True)
    assert bench.verdict_level("Spatial structure found ... fit for mapping.") == ("usable", True)


def test_envelope_and_targets():
    low, high = bench.envelope(np.array([8.0, 14.0, 10.0]))
    assert (low, high) == (5.0, 17.0)
    run = bench.Run("noise", 1, 200, 0.99, 0.95, None, False, "no_structure", False, 0, 0, "", 1.0)
    far = bench.Run(
        "isotropic", 1, 200, 0.5, 0.5, {"azimuth": 1.0, "ratio": 0.2}, False, "usable", False, 3, 0, "", 1.0
    )
    met = {t.wording: t.met for t in bench.targets([run, far], bench.Timing(4.0, 1.0, 2.5, 0.8))}
    assert met["pure noise -> no_structure every time"]
    assert not met["worst efficiency >= 0.90"]
    assert not met["no run outside the plausible envelope (or failing)"]
    assert not met["anisotropy reported on isotropic fields in <= 1 of 6 runs"]
    assert met["one analysis of 500 samples < 3 s (CPU; wall)"]  # judged on CPU time (2.5 s)
