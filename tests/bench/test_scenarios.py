"""The benchmark's simulated fields have the intended variogram and designs.

Reference: a Gaussian vector with covariance C is simulated as L·w, C = L·Lᵀ (Cholesky,
scipy.linalg.cholesky), w standard normal (common practice); across many realisations the
empirical semivariance ½·E[(Z(a) − Z(b))²] then estimates the model's gamma(b − a), with a
standard error of gamma·sqrt(2/N) (Δ ~ N(0, 2·gamma) so Δ²/2 has variance 2·gamma², common
practice). The model formulas are the service's published conventions (practical range;
azimuth clockwise from north), checked against the service: its ordinary kriging estimates
and variances equal a numpy solve of the ordinary kriging system built from this module's
semivariance (common practice).
"""

from __future__ import annotations

import numpy as np
import pytest
import scenarios as sim

REALISATIONS = 20_000

ANISOTROPIC = {
    "nugget": 0.1,
    "structures": [
        {"family": "spherical", "partial_sill": 0.5, "range": 200.0},
        {"family": "exponential", "partial_sill": 0.4, "range": 300.0, "anisotropy": {"azimuth": 30.0, "ratio": 0.3}},
    ],
}
SMOOTH = {"nugget": 0.02, "structures": [{"family": "gaussian", "partial_sill": 0.98, "range": 150.0}]}


def _offsets():
    """Separations (metres) along, across and oblique to azimuth 30, short and long."""
    along = np.array([np.sin(np.radians(30.0)), np.cos(np.radians(30.0))])
    across = np.array([along[1], -along[0]])
    return np.array([40 * along, 150 * along, 40 * across, 120 * across, 80 * (along + across), [0.0, 250.0]])


@pytest.mark.parametrize("model", [ANISOTROPIC, SMOOTH], ids=["nested_anisotropic", "smooth"])
def test_empirical_semivariance_of_many_realisations_matches_the_model(model):
    offsets = _offsets()
    points = np.vstack([[0.0, 0.0], offsets])
    fields = sim.simulate(model, points, np.random.default_rng(7), REALISATIONS)
    empirical = 0.5 * np.mean((fields[1:] - fields[0]) ** 2, axis=1)
    expected = sim.semivariance(model, offsets[:, 0], offsets[:, 1])
    standard_error = expected * np.sqrt(2.0 / REALISATIONS)
    assert np.all(np.abs(empirical - expected) < 4.5 * standard_error), (empirical, expected)
    # and the field's variance is the sill
    assert abs(fields[0].var() - sim.sill(model)) < 4.5 * sim.sill(model) * np.sqrt(2.0 / REALISATIONS)


def test_the_unit_shapes_follow_the_practical_range_convention():
    """At the practical range: spherical reaches the sill; exponential and gaussian 1 − e⁻³ of it."""
    for family, share in (("spherical", 1.0), ("exponential", 1 - np.exp(-3)), ("gaussian", 1 - np.exp(-3))):
        model = {"nugget": 0.0, "structures": [{"family": family, "partial_sill": 2.0, "range": 100.0}]}
        assert sim.semivariance(model, np.array([100.0]), np.array([0.0]))[0] == pytest.approx(2.0 * share)
    spherical = {"nugget": 0.0, "structures": [{"family": "spherical", "partial_sill": 1.0, "range": 100.0}]}
    assert sim.semivariance(spherical, np.array([50.0]), np.array([0.0]))[0] == pytest.approx(0.6875)  # 1.5/2 - 0.5/8


def test_the_simulator_and_the_service_read_models_alike(client):
    """Ordinary kriging variances from the service equal a numpy solve of the ordinary kriging
    system (common practice) written with this module's semivariance, for the anisotropic model."""
    offsets = _offsets()
    data = np.array(sim.ORIGIN) + np.array([[500.0, 500.0], [640.0, 380.0], [420.0, 610.0]])
    targets = data[0] + offsets
    body = {
        "samples": {"x": data[:, 0].tolist(), "y": data[:, 1].tolist(), "values": [1.0, 2.0, 0.5]},
        "model": ANISOTROPIC,
        "kriging": {"type": "ordinary"},
        "targets": {"x": targets[:, 0].tolist(), "y": targets[:, 1].tolist()},
    }
    response = client.post("/v1/predictions", json=body)
    assert response.status_code == 200, response.json

    def gamma(a, b):
        return sim.semivariance(ANISOTROPIC, a[:, None, 0] - b[None, :, 0], a[:, None, 1] - b[None, :, 1])

    n = len(data)
    system = np.ones((n + 1, n + 1))
    system[:n, :n], system[n, n] = gamma(data, data), 0.0
    right = np.vstack([gamma(data, targets), np.ones(len(targets))])
    solution = np.linalg.solve(system, right)
    expected = np.sum(solution[:n] * right[:n], axis=0) + solution[n]
    np.testing.assert_allclose(response.json["variance"], expected, rtol=1e-9)
    np.testing.assert_allclose(response.json["estimate"], solution[:n].T @ np.array([1.0, 2.0, 0.5]), rtol=1e-9)


def test_hot_spot_design_over_samples_high_values_and_noise_is_independent():
    hot = next(s for s in sim.SCENARIOS if s.design == "hot_spot")
    gaps = []
    for seed in (1, 2, 3):
        field = sim.realise(hot, seed, nodes=10)
        assert field.coords.shape == (hot.samples, 2) and len(np.unique(field.coords, axis=0)) == hot.samples
        gaps.append(field.values.mean() - field.truth.mean())
    assert np.mean(gaps) > 0.4  # preferential: the sample mean sits well above the field's
    noise = next(s for s in sim.SCENARIOS if s.noise)
    field = sim.realise(noise, 1)
    # lag-1 correlation of values sorted along x: independent values give about 0 (sd 1/sqrt(n))
    ordered = field.values[np.argsort(field.coords[:, 0])]
    assert abs(np.corrcoef(ordered[:-1], ordered[1:])[0, 1]) < 4.0 / np.sqrt(len(ordered))


def test_the_grid_nodes_run_x_fastest_inside_the_square():
    grid, nodes = sim.grid_nodes(4)
    assert nodes.shape == (16, 2)
    assert nodes[1, 0] > nodes[0, 0] and nodes[1, 1] == nodes[0, 1]
    assert grid["shape"] == [4, 4] and nodes[0].tolist() == grid["origin"]
    assert np.all((nodes > np.array(sim.ORIGIN)) & (nodes < np.array(sim.ORIGIN) + sim.SIDE))
