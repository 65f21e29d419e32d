"""Benchmark: ranking every candidate model (families="auto") on 20 experimental classes.

The classes come from a simulated Gaussian field (Cholesky factorisation, 600 samples,
nugget + spherical truth). Prints the seconds each candidate takes and the total of a
full fit_model call (median of 5), against the target of 1 s.
"""

from __future__ import annotations

import statistics
import time

import numpy as np
from scipy.linalg import cholesky
from scipy.spatial.distance import cdist


def _points():
    from lagwise.core.data.samples import build_sample_set
    from lagwise.core.modelling.fitting import points_from_experimental
    from lagwise.core.variography.experimental import experimental_variogram
    from lagwise.core.variography.lags import LagRequest

    rng = np.random.default_rng(3)
    coords = rng.uniform(0, 100, (600, 2))
    h = cdist(coords, coords) / 25.0
    cov = np.where(h < 1, 1 - 1.5 * h + 0.5 * h**3, 0.0) + 0.1 * np.eye(600)
    values = cholesky(cov, lower=True) @ rng.standard_normal(600)
    samples = build_sample_set(values, coords[:, 0], coords[:, 1])
    return points_from_experimental(experimental_variogram(samples, lags=LagRequest(width=2.5, count=20)), 30)


def main():
    from lagwise.core import fitting

    points = _points()
    specs = fitting._candidate_specs("auto", "fit", "none", 1, 2)
    print(f"{'candidate':<42} {'seconds':>8} {'criterion':>10}")
    for spec in specs:
        start = time.perf_counter()
        candidate = fitting._fit_candidate(spec, points, "pairs", None)
        print(f"{spec.label:<42} {time.perf_counter() - start:>8.4f} {candidate.criterion:>10.2f}")
    totals = []
    for _ in range(5):
        start = time.perf_counter()
        result = fitting.fit_model(points, dimension=2)
        totals.append(time.perf_counter() - start)
    total = statistics.median(totals)
    print(
        f"{len(specs)} candidates on {int(points.usable.sum())} classes: {total:.3f} s in all (median of 5), "
        f"{total / len(specs) * 1000:.1f} ms per candidate; target 1 s -> {'met' if total < 1.0 else 'MISSED'}"
    )
    print(f"selected: {result.best.label}")


if __name__ == "__main__":
    main()
