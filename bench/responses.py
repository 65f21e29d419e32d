"""Benchmark: responses dumped by their schemas (``python3 manage.py bench responses``).

Every answer is its response schema's dump of the core result (:mod:`lagwise.api.serialize`).
This suite measures what dumping costs against the whole request, on the two answers where
it weighs most, and against a baseline run in the same process: the same document built
by hand with dict literals (as the web layer did before), then written by the same orjson
call.

* ``prediction``: ordinary kriging of 1,000,000 targets from 30 samples (unique
  neighbourhood): per-target arrays, passed through without per-element work.
* ``experimental``: 1,500 samples, 36 direction classes (tolerance 2.5 degrees) of 100
  distance classes each: 3,600 class rows.

Target: dumping plus writing JSON at most 5 % of the request's CPU time. The machine is
shared (up to 8 agents on 2 cores): CPU time is the steadier figure, wall time is shown beside it.
"""

from __future__ import annotations

import statistics
import time
from dataclasses import replace

import numpy as np
import orjson

TARGET_SHARE = 0.05
PREDICTION_SAMPLES = 30
PREDICTION_TARGETS = 1_000_000
VARIOGRAM_SAMPLES = 1_500
DIRECTIONS = 36
CLASSES = 100
REPEAT = 3


def _timed(call, repeat: int = REPEAT):
    """Median wall and CPU seconds of ``repeat`` calls, and the last result."""
    walls, cpus, out = [], [], None
    for _ in range(repeat):
        wall, cpu = time.perf_counter(), time.process_time()
        out = call()
        walls.append(time.perf_counter() - wall)
        cpus.append(time.process_time() - cpu)
    return statistics.median(walls), statistics.median(cpus), out


def _app():
    from lagwise.api import create_app
    from lagwise.api.settings import Settings

    settings = Settings()
    limits = replace(settings.limits, max_kriging_flops=10**13)
    return create_app({"TESTING": True}, settings=replace(settings, limits=limits, deadline_seconds=900.0))


def _captured(name: str):
    """Wrap ``serialize.<name>`` so that the request's arguments are kept for timing the dump alone."""
    from lagwise.api import serialize

    real, kept = getattr(serialize, name), {}

    def keep(*args, **kwargs):
        kept["call"] = (args, kwargs)
        return real(*args, **kwargs)

    setattr(serialize, name, keep)
    return real, kept


def _hand_prediction(answer, samples, model, spec, hood) -> dict:
    """Baseline: the prediction document's arrays and members as dict literals."""
    result = answer.result
    points = result.targets
    return {
        "x": points[:, 0],
        "y": points[:, 1],
        "estimate": answer.estimate,
        "variance": answer.variance,
        "unestimated": [{"index": int(i), "reason": r} for i, r in sorted(result.prediction.reasons.items())],
        "support": result.support,
        "parameters": {"model": model.as_dict(), "kriging": spec.as_dict(), "neighbourhood": hood.as_dict()},
        "warnings": list(answer.warnings),
    }


def _hand_experimental(result, samples) -> dict:
    """Baseline: the experimental document's class rows as dict literals."""

    def row(r) -> dict:
        out = {
            "lower": r.lower,
            "upper": r.upper,
            "mean_distance": r.mean_distance,
            "pairs": r.pairs,
            "value": r.value,
            "sparse": r.sparse,
            "standard_error": r.standard_error,
            "interval_95": None if r.interval_95 is None else [float(v) for v in r.interval_95],
        }
        if r.reason is not None:
            out["reason"] = r.reason
        return out

    return {
        "directions": [{**d.direction.as_dict(2), "classes": [row(r) for r in d.classes]} for d in result.directions],
        "summary": result.summary.as_dict(),
        "colocated_pairs": result.colocated_pairs,
        "warnings": list(result.warnings),
    }


def _report(label: str, request, dumped, baseline) -> None:
    share = dumped[1] / request[1]
    verdict = "MET" if share <= TARGET_SHARE else "MISSED"
    print(
        f"{label}: request {request[0]:.3f} s wall / {request[1]:.3f} s CPU; dump + JSON {dumped[0] * 1e3:.1f} ms wall "
        f"/ {dumped[1] * 1e3:.1f} ms CPU = {share * 100:.2f} % of the request's CPU (target <= "
        f"{TARGET_SHARE * 100:.0f} %: {verdict}); hand-built baseline {baseline[1] * 1e3:.1f} ms CPU "
        f"(ratio {dumped[1] / baseline[1]:.2f})",
        flush=True,
    )


def prediction(client, rng) -> None:
    from lagwise.api.jsonio import dumps

    real, kept = _captured("prediction")
    n, m = PREDICTION_SAMPLES, PREDICTION_TARGETS
    body = orjson.dumps(
        {
            "samples": {
                "x": rng.uniform(0, 1000, n).tolist(),
                "y": rng.uniform(0, 1000, n).tolist(),
                "values": rng.normal(10, 2, n).tolist(),
            },
            "model": {"nugget": 0.5, "structures": [{"family": "spherical", "partial_sill": 3.5, "range": 300.0}]},
            "targets": {"x": rng.uniform(0, 1000, m).tolist(), "y": rng.uniform(0, 1000, m).tolist()},
        }
    )
    request = _timed(lambda: client.post("/v1/predictions", data=body, content_type="application/json"), 1)
    assert request[2].status_code == 200, request[2].data[:300]
    args, kwargs = kept["call"]
    dumped = _timed(lambda: dumps(real(*args, **kwargs)))
    baseline = _timed(lambda: dumps(_hand_prediction(*args)))
    _report(f"prediction, {m:,} targets", request, dumped, baseline)


def experimental(client, rng) -> None:
    from lagwise.api.jsonio import dumps

    real, kept = _captured("experimental")
    n = VARIOGRAM_SAMPLES
    body = orjson.dumps(
        {
            "samples": {
                "x": rng.uniform(0, 1000, n).tolist(),
                "y": rng.uniform(0, 1000, n).tolist(),
                "values": rng.normal(10, 2, n).tolist(),
            },
            "directions": [
                {"azimuth": k * 180.0 / DIRECTIONS, "tolerance": 90.0 / DIRECTIONS} for k in range(DIRECTIONS)
            ],
            "lags": {"width": 5, "count": CLASSES},
        }
    )
    request = _timed(lambda: client.post("/v1/experimental-variograms", data=body, content_type="application/json"))
    assert request[2].status_code == 200, request[2].data[:300]
    args, kwargs = kept["call"]
    dumped = _timed(lambda: dumps(real(*args, **kwargs)))
    baseline = _timed(lambda: dumps(_hand_experimental(*args)))
    _report(f"experimental, {DIRECTIONS * CLASSES:,} classes", request, dumped, baseline)


def main() -> None:
    client = _app().test_client()
    rng = np.random.default_rng(3)
    prediction(client, rng)
    experimental(client, rng)


if __name__ == "__main__":
    main()
