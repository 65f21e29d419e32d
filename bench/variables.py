"""Benchmark: several variables.

Sections (each in a fresh process, so that compilation and caches of one do not help another):
* variograms: 10 variables on 20,000 samples, the omnidirectional class and 4 direction
  classes (tolerance 22.5 degrees), 15 classes up to 1,000 m, every direct and cross
  variogram in one ``POST /v1/experimental-variograms`` (in process, Flask test client),
  against one single-variable request and against 10 separate single-variable requests
  (each variable's measured samples), timed in the same process one after the other.
  The analytes come in panels, as laboratories report them: six on every sample, two on
  60 % of them, two on 30 % (four measurement patterns). Target: the 10-variable request
  under 2x the single-variable one; the 10 separate requests should cost about 10x.
* batch vs separate: one ``POST /v1/analyses`` of 10 variables on 600 samples (the same four
  panels as above) against 10 separate single-variable ``POST /v1/analyses`` (each variable's
  measured samples), in one process with BLAS pinned to one thread (threadpoolctl, as
  gunicorn_conf pins each worker), after one untimed warm-up analysis; repeats alternate the
  order (batch first, then separate first), medians of CPU time of the process
  (``time.process_time``) and wall time. Target: the batch cheaper than the separate calls
  (CPU ratio batch / separate < 1), as the batch shares the pair enumeration. The batch is
  then profiled once (cProfile) to give the share of its time in pair passes and where the
  rest goes.
* cokriging: leave-one-out cross-validation of the primary by ordinary cokriging with 24
  neighbours per variable, 20,000 samples, 3 variables (each missing at 20 % of the samples,
  heterotopic), through ``POST /v1/cross-validations`` in process (Flask test client: parsing,
  validation, the cokriging systems, the primary-only comparison and serialisation).
  Target: under 30 s.

The machine may be shared with other work: figures are wall-clock seconds of one run and
vary with the load; the load average is printed beside them.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time
from typing import Any

import numpy as np

COKRIGING_SAMPLES = 20_000
COKRIGING_TARGET_S = 30.0
VARIOGRAM_SAMPLES = 20_000
VARIOGRAM_VARIABLES = 10
VARIOGRAM_TARGET_RATIO = 2.0


def _multi_samples(n: int, p: int, seed: int = 7) -> dict:
    """An invented field: a shared smooth pattern plus each variable's own pattern and noise."""
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, 2000, n), rng.uniform(0, 2000, n)
    shared = np.sin(x / 170.0) + np.cos(y / 230.0)
    columns = {}
    for k in range(p):
        own = np.sin((x + 300 * k) / 90.0) * np.cos((y - 200 * k) / 110.0)
        values = (1.0 + 0.3 * k) * shared + 0.5 * own + rng.normal(0, 0.3, n)
        missing = rng.random(n) < 0.2
        columns[f"v{k}"] = [None if m else round(float(v), 6) for v, m in zip(values, missing, strict=True)]
    return {"x": x.round(3).tolist(), "y": y.round(3).tolist(), "variables": columns}


def _panel_samples(n: int, p: int, seed: int = 11) -> dict:
    """Invented analytes in panels: the first p - 4 on every sample, two on 60 %, two on 30 %."""
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, 2000, n), rng.uniform(0, 2000, n)
    shared = np.sin(x / 170.0) + np.cos(y / 230.0)
    second, third = rng.random(n) < 0.6, rng.random(n) < 0.3
    columns = {}
    for k in range(p):
        values = (1.0 + 0.2 * k) * shared + 0.4 * np.sin((x + 150 * k) / 80.0) + rng.normal(0, 0.3, n)
        measured = second if k in (p - 4, p - 3) else third if k in (p - 2, p - 1) else np.ones(n, dtype=bool)
        columns[f"v{k}"] = [round(float(v), 6) if m else None for v, m in zip(values, measured, strict=True)]
    return {"x": x.round(3).tolist(), "y": y.round(3).tolist(), "variables": columns}


def case_variograms() -> dict:
    from lagwise.api import create_app
    from lagwise.core.warmup import warm_kernels

    warm_kernels()
    samples = _panel_samples(VARIOGRAM_SAMPLES, VARIOGRAM_VARIABLES)
    options = {
        "lags": {"width": 1000.0 / 15, "count": 15},
        "directions": [{"azimuth": 0.0, "tolerance": 90.0}]
        + [{"azimuth": a, "tolerance": 22.5} for a in (0.0, 45.0, 90.0, 135.0)],
    }

    client = create_app().test_client()

    def timed(body: dict) -> tuple[float, float, dict]:
        start, cpu = time.perf_counter(), time.process_time()
        response = client.post("/v1/experimental-variograms", json=body)
        elapsed, cpu = time.perf_counter() - start, time.process_time() - cpu
        if response.status_code != 200:
            raise SystemExit(
                f"variogram request failed: {response.status_code} {response.get_data(as_text=True)[:500]}"
            )
        return elapsed, cpu, response.get_json()

    one, one_cpu, _ = timed({"samples": _alone(samples, "v0"), **options})
    several, several_cpu, document = timed({"samples": samples, **options})
    ten = ten_cpu = 0.0
    for name in samples["variables"]:
        seconds, cpu, _ = timed({"samples": _alone(samples, name), **options})
        ten, ten_cpu = ten + seconds, ten_cpu + cpu
    pairs = sum(row["pairs"] for d in document["variables"][0]["directions"] for row in d["classes"])
    return {
        "one": one,
        "one_cpu": one_cpu,
        "several": several,
        "several_cpu": several_cpu,
        "ten": ten,
        "ten_cpu": ten_cpu,
        "cross": len(document["cross"]),
        "pairs_v0": pairs,
    }


def variograms_section() -> None:
    f = _run_case("variograms")
    load = os.getloadavg()[0]
    ratio = f["several"] / f["one"]
    verdict = "meets" if ratio < VARIOGRAM_TARGET_RATIO else "misses"
    print(
        f"variograms, {VARIOGRAM_SAMPLES} samples, omnidirectional + 4 direction classes x 15 classes "
        f"({f['pairs_v0']:,} pair-class memberships for the first variable):"
    )
    print(f"  1 variable, one request:                {f['one']:.2f} s wall, {f['one_cpu']:.2f} s CPU")
    print(
        f"  {VARIOGRAM_VARIABLES} variables + {f['cross']} cross pairs, one request: {f['several']:.2f} s wall, "
        f"{f['several_cpu']:.2f} s CPU = {ratio:.2f}x one variable (target < {VARIOGRAM_TARGET_RATIO:.0f}x: {verdict})"
    )
    print(
        f"  {VARIOGRAM_VARIABLES} separate single-variable requests: {f['ten']:.2f} s wall, {f['ten_cpu']:.2f} s CPU "
        f"= {f['ten'] / f['one']:.1f}x one variable, {f['ten'] / f['several']:.1f}x the one several-variable request"
    )
    print(
        f"  (load average {load:.1f}: the machine is shared with other agents, so wall times include waiting "
        "for a core; the ratios are taken in the same run)"
    )


BATCH_SAMPLES = 600
BATCH_VARIABLES = 10
BATCH_REPEATS = 2  # even: each order (batch first, separate first) runs as often; 2 keeps the section near 3 min
# One strategy (no comparison by cross-validation) and ordinary kriging: the pair passes (with the fan
# of direction classes, fit.anisotropy auto) are all there, the analysis about 1.5 s of CPU per variable.
BATCH_OPTIONS = {"fit": {"compare": False}, "cross_validation": {"kriging": {"type": "ordinary"}}}
BATCH_TARGET_RATIO = 1.0
# Functions that enumerate pairs (numba kernels run inside them): each variable's passes, the
# batch's shared jackknife sweep, the pair-count estimates; none calls another.
PAIR_PASSES = {
    ("pairs.py", "accumulate"),
    ("pairs.py", "accumulate_by_block"),
    ("pairs.py", "_collect"),
    ("pairs.py", "estimate_pairs_within"),
    ("pairs.py", "accumulate_variables"),
    ("pairs.py", "accumulate_squares"),
    ("shared.py", "_pass"),
    ("maps.py", "_exact_map"),
}
# Where the rest of an analysis goes: cumulative time of stage entry points that do not call
# each other nor the pair passes; the remainder is everything else (parsing, transforms, trend
# tests, selection, serialisation).
STAGES = {
    "model fits": ("stages.py", "run_fit"),
    "cross-validation": ("stages.py", "run_cross_validation"),
    "likelihood refinement": ("analysis.py", "_refined_isotropic", "_refined_anisotropic"),
}


def _alone(samples: dict, name: str) -> dict:
    """One variable's measured samples as a single-variable ``samples`` document."""
    column = samples["variables"][name]
    keep = [i for i, v in enumerate(column) if v is not None]
    return {
        "x": [samples["x"][i] for i in keep],
        "y": [samples["y"][i] for i in keep],
        "values": [column[i] for i in keep],
    }


def _cumulative(stats, wanted) -> float:
    """Cumulative seconds of the profiled functions named by (file name, function name...)."""
    total = 0.0
    for (path, _, function), row in stats.stats.items():  # type: ignore[attr-defined]
        for entry in wanted:
            if os.path.basename(path) == entry[0] and function in entry[1:]:
                total += row[3]
    return total


def case_batch() -> dict:
    import cProfile
    import pstats
    import statistics

    from lagwise.api import create_app
    from lagwise.api.settings import Settings
    from lagwise.core.limits import Limits
    from lagwise.core.warmup import warm_kernels
    from threadpoolctl import threadpool_limits

    warm_kernels()
    samples = _panel_samples(BATCH_SAMPLES, BATCH_VARIABLES)
    # A batch's cost estimate is the sum of its variables': lift the cost limit and the deadline.
    settings = Settings(limits=Limits(max_analysis_seconds=10**6), deadline_seconds=3600.0)
    client = create_app(settings=settings).test_client()

    def post(body: dict) -> None:
        response = client.post("/v1/analyses", json={**body, **BATCH_OPTIONS})
        if response.status_code != 200:
            raise SystemExit(f"analysis failed: {response.status_code} {response.get_data(as_text=True)[:500]}")

    def timed(run) -> tuple[float, float]:
        wall, cpu = time.perf_counter(), time.process_time()
        run()
        return time.perf_counter() - wall, time.process_time() - cpu

    def batch() -> None:
        post({"samples": samples})

    def separate() -> None:
        for name in samples["variables"]:
            post({"samples": _alone(samples, name)})

    runs: dict[str, list[tuple[float, float]]] = {"batch": [], "separate": []}
    with threadpool_limits(1):
        post({"samples": _alone(samples, "v0")})
        for r in range(BATCH_REPEATS):
            order = ("batch", "separate") if r % 2 == 0 else ("separate", "batch")
            for name in order:
                runs[name].append(timed(batch if name == "batch" else separate))
        profile = cProfile.Profile()
        profile.enable()
        profiled = timed(batch)
        profile.disable()
    stats = pstats.Stats(profile)
    figures: dict[str, Any] = {
        f"{name}_{kind}": statistics.median(run[i] for run in runs[name])
        for name in runs
        for i, kind in enumerate(("wall", "cpu"))
    }
    total = max(stats.total_tt, 1e-9)  # type: ignore[attr-defined]
    figures["profiled_cpu"] = profiled[1]
    figures["pair_share"] = _cumulative(stats, PAIR_PASSES) / total
    figures["stages"] = {name: _cumulative(stats, [entry]) / total for name, entry in STAGES.items()}
    rows = stats.stats  # type: ignore[attr-defined]  # (file, line, function) -> (calls, ..., own, cumulative, ...)
    top = sorted(rows.items(), key=lambda item: -item[1][2])[:4]
    figures["top"] = [(f"{os.path.basename(path)}:{function}", row[2] / total) for (path, _, function), row in top]
    figures["runs"] = runs
    return figures


def batch_section() -> None:
    f = _run_case("batch")
    load = os.getloadavg()
    ratio = f["batch_cpu"] / f["separate_cpu"]
    verdict = "MET" if ratio < BATCH_TARGET_RATIO else "MISSED"
    print(
        f"batch vs separate, {BATCH_SAMPLES} samples x {BATCH_VARIABLES} variables (four panels), POST /v1/analyses "
        f"{json.dumps(BATCH_OPTIONS)} (fan of direction classes kept), BLAS on 1 thread, median of "
        f"{BATCH_REPEATS} (orders alternated):"
    )
    print(f"  1 batch request:                 {f['batch_wall']:.2f} s wall, {f['batch_cpu']:.2f} s CPU")
    print(
        f"  {BATCH_VARIABLES} separate requests:            {f['separate_wall']:.2f} s wall, {f['separate_cpu']:.2f} s CPU"
    )
    print(
        f"  ratio batch / separate: {ratio:.3f} CPU, {f['batch_wall'] / f['separate_wall']:.3f} wall "
        f"(target < {BATCH_TARGET_RATIO:.1f} (batch cheaper than separate): {verdict})"
    )
    each = "; ".join(
        f"{name} " + ", ".join(f"{cpu:.2f}" for _, cpu in f["runs"][name]) for name in ("batch", "separate")
    )
    print(f"  CPU s of each repeat: {each}")
    rest = ", ".join(f"{name} {100 * share:.1f} %" for name, share in f["stages"].items())
    other = 1.0 - f["pair_share"] - sum(f["stages"].values())
    print(
        f"  profile of one batch ({f['profiled_cpu']:.2f} s CPU under cProfile): pair passes "
        f"{100 * f['pair_share']:.1f} %; {rest}; everything else {100 * other:.1f} %"
    )
    print("  most own time: " + ", ".join(f"{name} {100 * share:.1f} %" for name, share in f["top"]))
    print(f"  load average {load[0]:.1f}, {load[1]:.1f}, {load[2]:.1f} (1, 5, 15 min) on {os.cpu_count()} cores")


def _joint_model(p: int) -> dict:
    structured = np.full((p, p), 0.6) + np.diag(np.full(p, 0.4))
    return {
        "variables": [f"v{k}" for k in range(p)],
        "nugget": (0.05 * np.eye(p)).tolist(),
        "structures": [{"family": "spherical", "range": 400.0, "sills": structured.tolist()}],
    }


def case_cokriging() -> dict:
    from lagwise.api import create_app

    body = {
        "samples": _multi_samples(COKRIGING_SAMPLES, 3),
        "model": _joint_model(3),
        "primary": "v0",
        "neighbourhood": {"max_points": 24, "min_points": 4},
    }
    app = create_app()
    client = app.test_client()
    start, cpu = time.perf_counter(), time.process_time()
    response = client.post("/v1/cross-validations", json=body)
    elapsed, cpu = time.perf_counter() - start, time.process_time() - cpu
    if response.status_code != 200:
        raise SystemExit(f"cokriging request failed: {response.status_code} {response.get_data(as_text=True)[:500]}")
    document = response.get_json()
    return {
        "seconds": elapsed,
        "cpu_seconds": cpu,
        "count": document["statistics"]["count"],
        "rmse": document["statistics"]["root_mean_square_error"],
        "rmse_primary_only": document["cokriging"]["statistics_primary_only"]["root_mean_square_error"],
        "variance_reduction": document["cokriging"]["variance_reduction"],
    }


CASES = {"cokriging": case_cokriging, "variograms": case_variograms, "batch": case_batch}


def _run_case(name: str) -> dict:
    """Run one case in a fresh interpreter and read its JSON line."""
    code = f"import sys, json; sys.path.insert(0, {os.path.dirname(__file__)!r}); import variables; print(json.dumps(variables.CASES[{name!r}]()))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    if out.returncode != 0:
        raise SystemExit(f"case {name} failed: {out.stdout[-1000:]}{out.stderr[-2000:]}")
    return json.loads(out.stdout.strip().splitlines()[-1])


def cokriging_section() -> None:
    figures = _run_case("cokriging")
    load = os.getloadavg()[0]
    verdict = "meets" if figures["seconds"] < COKRIGING_TARGET_S else "misses"
    print(
        f"cokriging LOO, {COKRIGING_SAMPLES} samples x 3 variables, 24 neighbours each: "
        f"{figures['seconds']:.1f} s wall, {figures['cpu_seconds']:.1f} s CPU of this process "
        f"(target < {COKRIGING_TARGET_S:.0f} s: {verdict}; load average {load:.1f} on a shared machine, "
        "so the wall time includes waiting for a core)"
    )
    print(
        f"  {figures['count']} primary values estimated; RMSE {figures['rmse']:.4f} with the secondaries, "
        f"{figures['rmse_primary_only']:.4f} primary alone (a given model, not fitted to this field); "
        f"mean variance reduced by {100 * figures['variance_reduction']:.1f} %"
    )


SECTIONS = [variograms_section, batch_section, cokriging_section]


def main() -> None:
    for section in SECTIONS:
        section()


if __name__ == "__main__":
    main()
