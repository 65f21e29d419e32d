"""Benchmark: kriging cross-validation and predictions at scale.

Cases (each in a fresh process, so that its peak RSS is its own):
* leave-one-out with the unique neighbourhood (closed form, Dubrule 1983) at n = 1k, 2k, 5k,
  10k against the brute-force baseline of n refits; the baseline's cost per refit is timed
  on 10 refits at 1k and 2k and multiplied by n, and extrapolated above 2k as n^4
  (n refits of an n^3 factorisation);
* leave-one-out with a 24-point moving neighbourhood at n = 100k;
* predictions at 1M grid targets with 16 neighbours from 100k samples.
Targets: >= 100x at 2k and 10k with 10k under 60 s; moving LOO under 30 s; predictions
under 60 s with peak RSS under 2 GB.
"""

from __future__ import annotations

import json
import resource
import subprocess
import sys
import time

import numpy as np

MODEL = {"nugget": 0.1, "family": "spherical", "sill": 1.0, "range": 30.0}


def _samples(n, side):
    from lagwise.core.data.samples import build_sample_set

    rng = np.random.default_rng(n)
    coords = rng.uniform(0, side, (n, 2))
    values = np.sin(coords[:, 0] / 17.0) + np.cos(coords[:, 1] / 23.0) + rng.normal(0, 0.3, n)
    return build_sample_set(values, coords[:, 0], coords[:, 1])


def _model():
    from lagwise.core.modelling.models import Structure, VariogramModel

    return VariogramModel(MODEL["nugget"], (Structure(MODEL["family"], MODEL["sill"], MODEL["range"]),))


def case_loo_unique(n):
    from lagwise.core.kriging.cross_validation import cross_validate

    samples = _samples(n, 100.0 * (n / 1000) ** 0.5)
    start = time.perf_counter()
    cross_validate(samples, _model())
    return time.perf_counter() - start


def case_refits(n, count=10):
    from lagwise.core.kriging.neighbourhood import Neighbourhood
    from lagwise.core.kriging.systems import Kriger, KrigingSpec

    samples = _samples(n, 100.0 * (n / 1000) ** 0.5)
    model = _model()
    start = time.perf_counter()
    for i in range(count):
        keep = np.ones(n, dtype=bool)
        keep[i] = False
        Kriger(samples.subset(keep), model, KrigingSpec(), Neighbourhood()).predict(samples.coords[i : i + 1])
    return (time.perf_counter() - start) / count * n


def case_loo_moving(n):
    import numba
    from lagwise.core.kriging.cross_validation import cross_validate
    from lagwise.core.kriging.neighbourhood import Neighbourhood

    samples = _samples(n, 1000.0)
    start = time.perf_counter()
    cross_validate(
        samples, _model(), neighbourhood=Neighbourhood(max_points=24, min_points=4), workers=numba.get_num_threads()
    )
    return time.perf_counter() - start


def case_predict(n, targets):
    import numba
    from lagwise.core.kriging.neighbourhood import Neighbourhood
    from lagwise.core.kriging.prediction import Grid, predict

    samples = _samples(n, 1000.0)
    side = int(round(targets**0.5))
    grid = Grid((0.0, 0.0), (1000.0 / side, 1000.0 / side), (side, side))
    start = time.perf_counter()
    result = predict(
        samples,
        _model(),
        neighbourhood=Neighbourhood(max_points=16, min_points=4),
        grid=grid,
        workers=numba.get_num_threads(),
    )
    assert np.isfinite(result.prediction.estimate).all()
    return time.perf_counter() - start


CASES = {"loo_unique": case_loo_unique, "refits": case_refits, "loo_moving": case_loo_moving, "predict": case_predict}


def _run(name, *args):
    out = subprocess.run([sys.executable, __file__, name, *map(str, args)], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main():
    print(f"{'case':<44} {'seconds':>9} {'peak MB':>8} {'baseline s':>11} {'speed-up':>9}")
    baseline = {}
    for n in (1000, 2000):
        baseline[n] = _run("refits", n)["seconds"]
    for n in (1000, 2000, 5000, 10000):
        ours = _run("loo_unique", n)
        base = baseline.get(n, baseline[2000] * (n / 2000) ** 4)
        note = "" if n in baseline else " (extrapolated)"
        print(
            f"{f'leave-one-out, unique, n={n}':<44} {ours['seconds']:>9.2f} {ours['peak_mb']:>8.0f} {base:>11.1f} {base / ours['seconds']:>8.0f}x{note}"
        )
    moving = _run("loo_moving", 100_000)
    print(
        f"{'leave-one-out, 24 neighbours, n=100000':<44} {moving['seconds']:>9.2f} {moving['peak_mb']:>8.0f} {'-':>11} {'-':>9}"
    )
    pred = _run("predict", 100_000, 1_000_000)
    print(
        f"{'1M targets, 16 neighbours, 100k samples':<44} {pred['seconds']:>9.2f} {pred['peak_mb']:>8.0f} {'-':>11} {'-':>9}"
    )


if __name__ == "__main__":
    if len(sys.argv) > 2:
        seconds = CASES[sys.argv[1]](*map(int, sys.argv[2:]))
        print(json.dumps({"seconds": seconds, "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0}))
    else:
        main()
