"""Outcome check of exceedance probabilities on simulated fields with a known truth.

Lognormal fields Z = exp(Y), Y Gaussian with a known model, simulated jointly at the
samples and the targets (Cholesky factor, scipy.linalg.cholesky). Kriging the log
values with the true model and reading P(Z > t) in the log space (the multi-Gaussian
reading) must be calibrated: among targets given a probability near p, about a share
p truly exceeds t, within binomial tolerance (common practice: four standard errors
of a proportion, sqrt(p (1 - p) / N)). With simple kriging and the true model the
reading is exact, so only sampling noise remains.
"""

from __future__ import annotations

import numpy as np
import pytest
from lagwise.core.data.samples import build_sample_set
from lagwise.core.kriging.systems import KrigingSpec
from lagwise.core.kriging.transformed import working_samples
from lagwise.core.limits import Limits
from lagwise.core.stages import PredictionOptions, run_transformed_prediction

from .simulate import isotropic, simulate

MODEL = isotropic("exponential", 1.0, 50.0, nugget=0.1)
THRESHOLD = 1.5  # original units; ln 1.5 = 0.41 lies about 0.4 sd above the log mean 0


def _outcomes(kind: str, replicates: int = 40, n: int = 60, m: int = 60):
    rng = np.random.default_rng(2024)
    probabilities, truths = [], []
    for _ in range(replicates):
        coords = rng.uniform(0, 200, (n + m, 2))
        y = simulate(MODEL, coords, rng)
        z = np.exp(y)
        samples = build_sample_set(z[:n], coords[:n, 0], coords[:n, 1])
        working = working_samples(samples, "log")
        spec = KrigingSpec("simple", mean=0.0) if kind == "simple" else KrigingSpec()
        stage = PredictionOptions(
            targets=coords[n:], thresholds=(THRESHOLD,), transform="log", kriging=spec, model=MODEL
        )
        found = run_transformed_prediction(working, stage, limits=Limits())
        assert found.exceedance is not None
        probabilities.append(found.exceedance.probability[0])
        truths.append(z[n:] > THRESHOLD)
    return np.concatenate(probabilities), np.concatenate(truths)


@pytest.mark.parametrize("kind", ["simple", "ordinary"])
def test_probabilities_are_calibrated(kind):
    p, truth = _outcomes(kind)
    edges = np.array([0.0, 0.1, 0.3, 0.5, 0.7, 0.9, 1.0])
    checked = 0
    for low, high in zip(edges[:-1], edges[1:], strict=True):
        inside = (p >= low) & (p < high)
        count = int(inside.sum())
        if count < 60:
            continue
        expected, observed = float(p[inside].mean()), float(truth[inside].mean())
        tolerance = 4 * np.sqrt(expected * (1 - expected) / count)
        assert abs(observed - expected) <= tolerance, (low, high, count, expected, observed)
        checked += 1
    assert checked >= 4
    # Overall: the mean probability is the expected share above the threshold.
    assert abs(truth.mean() - p.mean()) <= 4 * np.sqrt(p.mean() * (1 - p.mean()) / p.size)


def test_a_wrong_model_is_miscalibrated():
    """The check can fail: kriging with a far too small sill makes probabilities overconfident."""
    rng = np.random.default_rng(7)
    n, m = 60, 60
    wrong = isotropic("exponential", 0.05, 50.0, nugget=0.005)
    extreme, truths = [], []
    for _ in range(30):
        coords = rng.uniform(0, 200, (n + m, 2))
        z = np.exp(simulate(MODEL, coords, rng))
        working = working_samples(build_sample_set(z[:n], coords[:n, 0], coords[:n, 1]), "log")
        stage = PredictionOptions(targets=coords[n:], thresholds=(THRESHOLD,), transform="log", model=wrong)
        found = run_transformed_prediction(working, stage, limits=Limits())
        assert found.exceedance is not None
        extreme.append(found.exceedance.probability[0])
        truths.append(z[n:] > THRESHOLD)
    p, truth = np.concatenate(extreme), np.concatenate(truths)
    confident = p > 0.9
    assert truth[confident].mean() < 0.8
