"""Benchmark: experimental variograms against the brute-force pdist + histogram baseline.

Each case runs in a fresh process so that its peak RSS is its own. Samples are
uniform in a 1000 x 1000 square; 15 equal classes up to half the side; the
omnidirectional class, and 4 direction classes of tolerance 22.5 degrees.
Prints seconds (median of the repeats), pairs in range per second, peak RSS and
the ratio baseline seconds / lagwise seconds (baseline only where it fits in memory).
"""

from __future__ import annotations

import json
import resource
import statistics
import subprocess
import sys
import time

SIDE = 1000.0
CLASSES = 15
SIZES = (2_000, 10_000, 20_000, 50_000)
BASELINE_LIMIT = {"omni": 20_000, "fan": 10_000}


def _data(n):
    import numpy as np

    rng = np.random.default_rng(n)
    return rng.uniform(0, SIDE, (n, 2)), rng.normal(size=n)


def _lagwise(n, kind, repeats):
    from lagwise.core.data.samples import build_sample_set
    from lagwise.core.limits import Limits
    from lagwise.core.variography.directions import DirectionClass
    from lagwise.core.variography.experimental import experimental_variogram
    from lagwise.core.variography.lags import LagRequest
    from lagwise.core.warmup import warm_kernels

    warm_kernels()
    coords, values = _data(n)
    samples = build_sample_set(values, coords[:, 0], coords[:, 1])
    directions = [DirectionClass(a, 22.5) for a in (0.0, 45.0, 90.0, 135.0)] if kind == "fan" else None
    lags = LagRequest(width=SIDE / 2 / CLASSES, count=CLASSES)
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        result = experimental_variogram(samples, lags=lags, directions=directions, limits=Limits(max_pairs=10**13))
        times.append(time.perf_counter() - start)
    pairs = sum(row.pairs for d in result.directions for row in d.classes)
    return statistics.median(times), pairs


def _baseline(n, kind, repeats):
    import numpy as np
    from scipy.spatial.distance import pdist

    coords, values = _data(n)
    edges = np.linspace(0, SIDE / 2, CLASSES + 1)
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        d = pdist(coords)
        sq = pdist(values[:, None], "sqeuclidean")
        if kind == "omni":
            counts, _ = np.histogram(d, bins=edges)
            sums, _ = np.histogram(d, bins=edges, weights=sq)
        else:
            i, j = np.triu_indices(n, k=1)
            h = coords[j] - coords[i]
            del i, j
            azimuth = np.degrees(np.arctan2(h[:, 0], h[:, 1])) % 180.0
            for a in (0.0, 45.0, 90.0, 135.0):
                off = np.abs(azimuth - a)
                keep = np.minimum(off, 180.0 - off) <= 22.5
                counts, _ = np.histogram(d[keep], bins=edges)
                sums, _ = np.histogram(d[keep], bins=edges, weights=sq[keep])
        times.append(time.perf_counter() - start)
        del d, sq
    return statistics.median(times), int(counts.sum())


def measure(which, n, kind):
    """Run one case in this process and print a JSON line."""
    repeats = 3 if n <= 20_000 else 1
    seconds, pairs = (_lagwise if which == "lagwise" else _baseline)(n, kind, repeats)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    print(json.dumps({"seconds": seconds, "pairs": pairs, "peak_mb": peak}))


def _run_case(which, n, kind):
    out = subprocess.run([sys.executable, __file__, which, str(n), kind], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main():
    print(
        f"{'n':>7} {'classes':>8} {'seconds':>9} {'pairs/s':>10} {'peak MB':>8} {'baseline s':>11} {'base MB':>8} {'speed-up':>9}"
    )
    for kind in ("omni", "fan"):
        for n in SIZES:
            ours = _run_case("lagwise", n, kind)
            line = f"{n:>7} {kind:>8} {ours['seconds']:>9.3f} {ours['pairs'] / ours['seconds']:>10.3g} {ours['peak_mb']:>8.0f}"
            if n <= BASELINE_LIMIT[kind]:
                base = _run_case("baseline", n, kind)
                line += f" {base['seconds']:>11.3f} {base['peak_mb']:>8.0f} {base['seconds'] / ours['seconds']:>8.1f}x"
            else:
                line += f" {'(too big)':>11} {'-':>8} {'-':>9}"
            print(line, flush=True)
    print("pairs/s counts pairs within the largest class edge (each pair once, whatever its direction).")


if __name__ == "__main__":
    if len(sys.argv) == 4:
        measure(sys.argv[1], int(sys.argv[2]), sys.argv[3])
    else:
        main()
