"""Class uncertainty (lagwise.core.variography.uncertainty): delete-one-block jackknife."""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.variography.experimental import experimental_variogram
from lagwise.core.variography.lags import LagRequest
from lagwise.core.variography.uncertainty import spatial_blocks
from scipy.spatial.distance import pdist
from scipy.stats import t as student_t


def test_spatial_blocks_hold_nearly_equal_counts():
    coords = np.random.default_rng(1).uniform(0, 100, (317, 2))
    labels = spatial_blocks(coords, 12)
    counts = np.bincount(labels)
    assert counts.size == 12 and counts.max() - counts.min() <= 2


def test_jackknife_against_brute_force_recomputation():
    """Leave-one-block-out semivariances recomputed from scratch with scipy.spatial.distance.pdist,
    then the delete-a-group jackknife SE = sqrt((B-1)/B sum (theta_b - mean)^2) (Kuensch 1989)."""
    rng = np.random.default_rng(3)
    coords = rng.uniform(0, 200, (40, 2))
    values = rng.normal(size=40) + coords[:, 0] / 100
    result = experimental_variogram(
        build_sample_set(values, coords[:, 0], coords[:, 1]), lags=LagRequest(width=20.0, count=5)
    )
    blocks = result.uncertainty.blocks
    assert blocks == 6  # 40 samples // 6 per block
    labels = spatial_blocks(coords, blocks)
    factor = student_t.ppf(0.975, blocks - 1)
    for c, row in enumerate(result.directions[0].classes):
        replicates = []
        for b in range(blocks):
            keep = labels != b
            d = pdist(coords[keep])
            sq = pdist(values[keep, None], "sqeuclidean")
            sel = (d >= 20.0 * c) & (d < 20.0 * (c + 1))
            replicates.append(sq[sel].sum() / (2 * sel.sum()))
        replicates = np.array(replicates)
        se = np.sqrt((blocks - 1) / blocks * np.sum((replicates - replicates.mean()) ** 2))
        assert row.standard_error == pytest.approx(se, rel=1e-9)
        assert row.interval_95 == pytest.approx(
            (row.value * np.exp(-factor * se / row.value), row.value * np.exp(factor * se / row.value))
        )


def test_undefined_uncertainty_has_a_reason():
    rng = np.random.default_rng(2)
    coords = rng.uniform(0, 100, (30, 2))
    few = experimental_variogram(build_sample_set(rng.normal(size=30), coords[:, 0], coords[:, 1]))
    row = few.directions[0].classes[0]
    assert row.standard_error is None and "too few samples" in row.uncertainty_reason
    coords = rng.uniform(0, 100, (120, 2))
    median = experimental_variogram(
        build_sample_set(rng.normal(size=120), coords[:, 0], coords[:, 1]), statistic="semivariance_median"
    )
    assert all(r.standard_error is None and "median" in r.uncertainty_reason for r in median.directions[0].classes)
    covariance = experimental_variogram(
        build_sample_set(rng.normal(size=120), coords[:, 0], coords[:, 1]), statistic="covariance"
    )
    row = covariance.directions[0].classes[0]
    assert row.standard_error > 0 and row.interval_95[0] < row.value < row.interval_95[1]


def test_structure_evidence_tells_noise_from_structure():
    """Independent values (numpy normal draws) rarely show their short classes below the sill
    beyond their intervals; a spherical field (Cholesky simulation, scipy) does."""
    from lagwise.core.variography.uncertainty import structure_evidence

    from tests.reference.simulate import isotropic, simulate

    noise, structured = 0, 0
    for seed in range(8):
        rng = np.random.default_rng(seed)
        coords = rng.uniform(0, 1000, (250, 2))
        result = experimental_variogram(build_sample_set(rng.normal(size=250), coords[:, 0], coords[:, 1]))
        noise += structure_evidence(result.directions[0].classes, result.summary.reference_variance).resolved
        if seed < 3:
            values = simulate(isotropic("spherical", 1.0, 300.0, nugget=0.3), coords, rng)
            result = experimental_variogram(build_sample_set(values, coords[:, 0], coords[:, 1]))
            evidence = structure_evidence(result.directions[0].classes, result.summary.reference_variance)
            structured += evidence.resolved
            assert evidence.checked == 2
    assert noise <= 1 and structured == 3
