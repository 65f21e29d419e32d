"""Coverage of the classes' 95 % intervals across replicate simulated fields."""

from __future__ import annotations

import numpy as np
from lagwise.core.data.samples import build_sample_set
from lagwise.core.variography.experimental import experimental_variogram
from scipy.spatial.distance import pdist

from .simulate import isotropic, simulate

REPLICATES = 40


def test_class_intervals_cover_the_model_semivariance_at_about_the_nominal_rate():
    """Fields simulated by Cholesky factorisation (scipy.linalg.cholesky) on fixed random
    locations; the target of each class is the model's semivariance averaged over that
    class's pairs (scipy.spatial.distance.pdist), which the Matheron estimator estimates
    without bias. The delete-one-block jackknife interval should cover it about 95 % of
    the time (accepted band 0.85-0.99; observed 0.915 here over 40 fields x 23 classes,
    0.92-0.97 with other seeds, 0.90-0.93 for a spherical range of 600 m)."""
    rng = np.random.default_rng(0)
    coords = rng.uniform(0, 1000, (250, 2))
    model = isotropic("exponential", 1.0, 250.0, nugget=0.2)
    distances = pdist(coords)
    gamma = model.semivariance(distances)
    hits = []
    for _ in range(REPLICATES):
        values = simulate(model, coords, rng)
        result = experimental_variogram(build_sample_set(values, coords[:, 0], coords[:, 1]))
        row_hits = []
        for row in result.directions[0].classes:
            target = gamma[(distances >= row.lower) & (distances < row.upper)].mean()
            lower, upper = row.interval_95
            row_hits.append(lower <= target <= upper)
        hits.append(row_hits)
    hits = np.array(hits)
    assert 0.85 <= hits.mean() <= 0.99, hits.mean()
    assert hits.mean(axis=0).min() >= 0.7
