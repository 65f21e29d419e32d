"""Benchmark: conditional simulation, 100 realisations on a 200 x 200 grid from 1,000 samples.

Cases (each in a fresh process, so that its peak RSS is its own):
* the service's method (circulant embedding, joint draw at the samples, kriging of the
  residuals with weights found once) with the unique and with a 24-point moving
  neighbourhood, normal scores, two thresholds and 10 x 10 blocks, realisations
  streamed (not returned);
* the baseline: a plain sequential Gaussian simulation loop -- a random path over the
  nodes, at each node one simple-kriging solve from its 16 nearest conditioning
  points (samples and nodes simulated before it, found by brute force), one draw --
  timed on a 40 x 40 part of the grid for 2 realisations and extrapolated per node and
  realisation to 100 realisations of 40,000 nodes (linear: favourable to the loop,
  whose brute-force search grows with the nodes already simulated).
Targets: under 10 s and under 1 GB of peak RSS. CPU seconds (user + system) of the
case's process are printed beside the wall time. The machine is small (2 cores) and
shared with other jobs: figures vary with their load.
"""

from __future__ import annotations

import json
import os
import resource
import subprocess
import sys
import time

import numpy as np

SIDE, SAMPLES, REALISATIONS = 200, 1000, 100
TARGET_SECONDS, TARGET_MB = 10.0, 1024.0


def _samples():
    from lagwise.core.data.samples import build_sample_set

    rng = np.random.default_rng(7)
    xy = rng.uniform(0, SIDE, (SAMPLES, 2))
    values = np.exp(np.sin(xy[:, 0] / 30.0) + np.cos(xy[:, 1] / 40.0) + rng.normal(0, 0.3, SAMPLES))
    return build_sample_set(values, xy[:, 0], xy[:, 1])


def _model():
    from lagwise.core.modelling.models import Structure, VariogramModel

    return VariogramModel(0.1, (Structure("spherical", 0.9, 40.0),))


def case_simulation(max_points: int) -> float:
    import numba
    from lagwise.core.kriging.neighbourhood import Neighbourhood
    from lagwise.core.kriging.prediction import Grid
    from lagwise.core.simulation import simulate

    samples = _samples()
    hood = Neighbourhood(max_points=max_points, min_points=4) if max_points else Neighbourhood()
    start = time.perf_counter()
    result = simulate(
        samples,
        _model(),
        grid=Grid((0.5, 0.5), (1.0, 1.0), (SIDE, SIDE)),
        neighbourhood=hood,
        realisations=REALISATIONS,
        thresholds=(2.0, 4.0),
        block_size=(10.0, 10.0),
        workers=numba.get_num_threads(),
    )
    elapsed = time.perf_counter() - start
    assert np.isfinite(result.mean).all() and result.realisations is None
    return elapsed


def sequential_simulation(coords, data, model, nodes, realisations, rng, k=16):
    """A plain sequential Gaussian simulation loop (mean 0, simple kriging): fields (R, nodes).

    Random path over the nodes; at each node the k nearest conditioning points (data and
    nodes simulated before it, by brute force), one simple-kriging solve, one draw.
    """
    sill = model.sill
    out = np.empty((realisations, len(nodes)))
    for r in range(realisations):
        points = np.vstack([coords, np.empty_like(nodes)])
        values = np.concatenate([data, np.empty(len(nodes))])
        known = len(coords)
        for node in rng.permutation(len(nodes)):
            target = nodes[node]
            distance = np.hypot(*(points[:known] - target).T)
            near = np.argpartition(distance, min(k, known - 1))[:k]
            h = points[near][:, None, :] - points[near][None, :, :]
            K = sill - model.semivariance(h.reshape(-1, 2)).reshape(len(near), len(near))
            c = sill - model.semivariance(points[near] - target)
            weights = np.linalg.solve(K, c)
            sd = np.sqrt(max(sill - weights @ c, 0.0))
            points[known] = target
            values[known] = out[r, node] = weights @ values[near] + sd * rng.standard_normal()
            known += 1
    return out


def case_sequential(side: int, realisations: int) -> float:
    """Seconds per node and realisation of the plain loop, conditioned on the benchmark's samples."""
    from lagwise.core.data.transforms import fit_transform

    samples = _samples()
    data = fit_transform("normal_score", samples.values).forward(samples.values)
    xs = np.arange(side) + 0.5
    nodes = np.column_stack([np.tile(xs, side), np.repeat(xs, side)])
    start = time.perf_counter()
    sequential_simulation(samples.coords, data, _model(), nodes, realisations, np.random.default_rng(1))
    return (time.perf_counter() - start) / (realisations * len(nodes))


CASES = {"simulation": case_simulation, "sequential": case_sequential}


def _run(name, *args):
    out = subprocess.run([sys.executable, __file__, name, *map(str, args)], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main():
    print(
        f"{REALISATIONS} realisations, {SIDE} x {SIDE} grid, {SAMPLES} samples; targets < {TARGET_SECONDS:g} s and "
        f"< {TARGET_MB:g} MB peak RSS (2-core machine shared with other jobs: figures vary with their load)"
    )
    per_node = _run("sequential", 40, 2)["seconds"]
    baseline = per_node * REALISATIONS * SIDE * SIDE
    print(
        f"{'case':<42} {'seconds':>8} {'target':>7} {'CPU s':>6} {'peak MB':>8} {'target':>7} {'SGS loop s':>11} "
        f"{'speed-up':>9}"
    )
    for label, max_points in (
        ("embedding, unique neighbourhood", 0),
        ("embedding, 24 neighbours", 24),
    ):
        ours = _run("simulation", max_points)
        print(
            f"{label:<42} {ours['seconds']:>8.2f} {TARGET_SECONDS:>7.0f} {ours['cpu']:>6.1f} {ours['peak_mb']:>8.0f} "
            f"{TARGET_MB:>7.0f} "
            f"{baseline:>11.0f} {baseline / ours['seconds']:>8.0f}x"
        )
        met = ours["seconds"] < TARGET_SECONDS and ours["peak_mb"] < TARGET_MB
        print(
            f"  {label}: time {'MET' if ours['seconds'] < TARGET_SECONDS else 'MISSED'}, "
            f"memory {'MET' if ours['peak_mb'] < TARGET_MB else 'MISSED'}" + ("" if met else " (see the load below)")
        )
    print(
        f"load average (1, 5, 15 min) at the end: {', '.join(f'{v:.1f}' for v in os.getloadavg())} on {os.cpu_count()} cores"
    )
    print(
        f"SGS loop: {per_node * 1e6:.0f} us per node and realisation, measured on 40 x 40 nodes x 2 realisations, "
        f"extrapolated linearly to {REALISATIONS} x {SIDE * SIDE}"
    )


if __name__ == "__main__":
    if len(sys.argv) > 2 or (len(sys.argv) == 2 and sys.argv[1] in CASES):
        seconds = CASES[sys.argv[1]](*map(int, sys.argv[2:]))
        usage = resource.getrusage(resource.RUSAGE_SELF)
        print(
            json.dumps(
                {"seconds": seconds, "peak_mb": usage.ru_maxrss / 1024.0, "cpu": usage.ru_utime + usage.ru_stime}
            )
        )
    else:
        main()
