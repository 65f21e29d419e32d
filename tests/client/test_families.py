"""The client's family table: generated from the service's catalogue, and used to read, write,
check and evaluate models."""

from __future__ import annotations

import importlib.util
import math
from pathlib import Path

import numpy as np
import pytest
from lagwise_client import FAMILIES, Lagwise, ModelStructure, VariogramModel
from scipy.special import kv

ROOT = Path(__file__).resolve().parents[2]
GENERATOR = ROOT / "client" / "scripts" / "generate_families.py"


def generator():
    spec = importlib.util.spec_from_file_location("generate_families", GENERATOR)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_generated_module_is_current():
    tool = generator()
    assert tool.TARGET.read_text(encoding="utf-8") == tool.render(tool.family_catalogue()), (
        "client/lagwise_client/_families.py is stale: run .venv/bin/python client/scripts/generate_families.py"
    )
    assert tool.main(["--check"]) == 0


def test_table_follows_the_catalogue():
    from lagwise.core.modelling.models import family_catalogue

    catalogue = family_catalogue()
    assert list(FAMILIES) == [f["name"] for f in catalogue]
    for entry in catalogue:
        known = FAMILIES[entry["name"]]
        assert [p.name for p in known.parameters] == [p["name"] for p in entry["parameters"]]
        assert known.bounded == entry["bounded"] and known.max_dimension == entry["max_dimension"]
        # Roles by position: magnitude first, range for bounded families, at most one shape.
        assert known.has_range == known.bounded
        assert len(known.parameters) == 1 + known.has_range + (known.shape is not None)


def sample_structure(name: str) -> ModelStructure:
    known = FAMILIES[name]
    extra = None
    if known.shape:
        bounds = known.parameter(known.shape)
        extra = 0.5 * (bounds.minimum + bounds.maximum)
    return ModelStructure(name, 2.0, 30.0 if known.has_range else 1.0, extra)


@pytest.mark.parametrize("name", list(FAMILIES))
def test_every_family_round_trips_and_evaluates(name):
    structure = sample_structure(name).check(dimension=2)
    written = structure.to_dict()
    assert FAMILIES[name].magnitude in written and ("range" in written) == FAMILIES[name].has_range
    assert ModelStructure.from_dict(written) == structure
    model = VariogramModel(0.1, (structure,))
    assert model.semivariance(0.0) == 0.0 and model.semivariance(10.0) > 0.1


def test_check_names_the_parameter_and_its_bounds():
    with pytest.raises(ValueError, match=r"power: exponent = 2.0 must be in \(0, 2\)"):
        ModelStructure("power", 1.0, extra=2.0).check()
    with pytest.raises(ValueError, match="range = 0.0 must be > 0"):
        ModelStructure("spherical", 1.0, 0.0).check()
    with pytest.raises(ValueError, match="shape = None"):
        ModelStructure("stable", 1.0, 10.0).check()
    ModelStructure("stable", 1.0, 10.0, extra=2.0).check()  # stable's bounds are closed
    with pytest.raises(ValueError, match="up to 2 dimensions"):
        ModelStructure("circular", 1.0, 10.0).check(dimension=3)
    with pytest.raises(ValueError, match="nugget"):
        VariogramModel(-0.1).check()


def test_published_values():
    # Spherical at half its range: 1.5 r - 0.5 r^3 = 0.6875 (Chilès & Delfiner 2012, eq. 2.47).
    assert ModelStructure("spherical", 1.0, 10.0).semivariance(5.0) == pytest.approx(0.6875, rel=1e-15)
    # Exponential at its practical range: 1 - exp(-3) (Webster & Oliver 2007, eq. 6.14).
    assert ModelStructure("exponential", 1.0, 10.0).semivariance(10.0) == pytest.approx(1 - math.exp(-3), rel=1e-15)
    # Matérn: the client's Bessel function by quadrature against scipy.special.kv.
    nu, a = 1.7, 25.0
    structure = ModelStructure("matern", 1.0, a, nu)
    from lagwise_client.models import _matern_factor

    for h in (1.0, 7.0, 25.0, 60.0):
        u = h * _matern_factor(nu) / a
        expected = 1.0 - 2.0 ** (1 - nu) / math.gamma(nu) * u**nu * kv(nu, u)
        assert structure.semivariance(h) == pytest.approx(expected, rel=1e-10, abs=1e-13)


def test_evaluation_matches_the_service_for_every_family(service_url):
    """The service's model value at each class equals the client's evaluation of the fitted model."""
    rng = np.random.default_rng(3)
    distances = np.linspace(5.0, 95.0, 12)
    values = 0.2 + 1.0 * (1 - np.exp(-3 * distances / 40.0)) + rng.normal(0, 0.02, distances.size)
    experimental = {
        "directions": [
            {
                "azimuth": 0.0,
                "classes": [
                    {"mean_distance": float(h), "value": float(g), "pairs": 100}
                    for h, g in zip(distances, values, strict=True)
                ],
            }
        ]
    }
    with Lagwise(service_url) as lw:
        for name in FAMILIES:
            fit = lw.fit_model(experimental=experimental, families=[name])
            assert fit.model.structures[0].family == name
            for c in fit.experimental["directions"][0]["classes"]:
                assert fit.model.semivariance(c["mean_distance"]) == pytest.approx(
                    c["model_value"], rel=1e-9, abs=1e-12
                ), name
