"""The benchmark's baseline is a real sequential Gaussian simulation.

Reference: sequential simulation draws each node from its simple-kriging distribution given the
data and the nodes drawn before it, so (with a neighbourhood that screens little) its fields
have the model's variance and variogram (Journel & Huijbregts 1978, section VII.B; common
practice); checked here by the empirical variance and lag-one semivariance over realisations,
with standard errors sigma^2 sqrt(2/N).
"""

from __future__ import annotations

import numpy as np
import simulation as bench
from lagwise.core.modelling.models import Structure, VariogramModel


def test_sequential_loop_reproduces_the_model_variance_and_variogram():
    model = VariogramModel(0.1, (Structure("spherical", 0.9, 5.0),))
    xs = np.arange(6) + 0.5
    nodes = np.column_stack([np.tile(xs, 6), np.repeat(xs, 6)])
    far = np.array([[500.0, 500.0], [520.0, 500.0]])  # data beyond the range: unconditional
    fields = bench.sequential_simulation(far, np.zeros(2), model, nodes, 600, np.random.default_rng(3), k=16)
    variance = fields.var(axis=0).mean()
    assert abs(variance - 1.0) < 5 * np.sqrt(2 / 600) / 2
    grid = fields.reshape(600, 6, 6)
    lag_one = 0.5 * np.mean((grid[:, :, 1:] - grid[:, :, :-1]) ** 2)
    expected = float(model.semivariance(np.array([[1.0, 0.0]]))[0])
    assert abs(lag_one - expected) < 0.08
