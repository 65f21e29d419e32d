"""Every finding of the hostile-client review replayed against a real ``lagwise serve``.

Default limits, two sync workers and a 20 s deadline (so the gunicorn timeout is 50 s).
Each replay must be answered within the deadline plus 5 s, by a problem document unless
it succeeds, with no worker killed (the worker pids do not change) and with every
worker's peak memory less than 300 MiB above its idle level. ``/healthz`` must answer
within a second while two large computations run. The suite prints each status,
latency and memory growth, and the worst of them (``-s`` shows them).

The protocol findings (slow clients, gunicorn's own error pages, 405, gzip) are
replayed by ``test_stalled_clients.py`` and the operational ones (``--bind``, the
control socket) by ``tests/e2e/test_operations.py``, each against real services.
"""

from __future__ import annotations

import json
import threading

import numpy as np
import pytest

from tests.live import running_service
from tests.reliability.replay import Answer, Watch, healthz_seconds, post_bytes, replay

pytestmark = pytest.mark.slow

DEADLINE = 20.0
GRACE = 5.0
MEMORY_MIB = 300.0
MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 1.0, "range": 30.0}]}
PROBLEM_TYPES = {"/problems/limit-exceeded", "/problems/deadline-exceeded", "/problems/invalid-input"}


@pytest.fixture(scope="module")
def watch():
    with running_service({"LAGWISE_DEADLINE_SECONDS": str(int(DEADLINE))}, workers=2) as url:
        watch = Watch(url)
        assert len(watch.workers()) == 2
        yield watch
        print("\n" + "\n".join(watch.lines) + "\n" + watch.summary())
        assert watch.worst_retained_mib < MEMORY_MIB, watch.summary()


def _samples(n: int, seed: int = 0, side: float = 100.0) -> dict:
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, side, (n, 2)).round(4)
    return {"x": xy[:, 0].tolist(), "y": xy[:, 1].tolist(), "values": rng.normal(size=n).round(4).tolist()}


def _json(document: dict) -> bytes:
    return json.dumps(document, separators=(",", ":")).encode()


def _checked(watch: Watch, name: str, raw: bytes, statuses: set[int], types: set[str] = PROBLEM_TYPES) -> Answer:
    """Replay and assert the common bounds: status, problem document, deadline, no killed worker, memory."""
    before = watch.workers()
    answer = replay(watch, raw)
    watch.record(name, answer)
    assert answer.status in statuses, (name, answer.status, answer.body[:400])
    if answer.status >= 400:
        assert answer.headers["content-type"].startswith("application/problem+json"), answer.headers
        assert answer.document["type"] in types, answer.document
        assert len(answer.body) < 64_000, len(answer.body)
    assert answer.seconds < DEADLINE + GRACE, (name, answer.seconds)
    assert watch.workers() == before, f"{name}: a worker was replaced (killed by the gunicorn timeout?)"
    assert answer.growth_mib < MEMORY_MIB, (name, answer.growth_mib)
    return answer


# ---- 1. memory of cross-validation and prediction --------------------------------------------------


def _loo(n: int, max_points: int) -> bytes:
    return _json({"samples": _samples(n, 1), "model": MODEL, "neighbourhood": {"max_points": max_points}})


@pytest.mark.parametrize(("n", "max_points"), [(800, 400), (1200, 500)])
def test_f1_leave_one_out_with_many_neighbours(watch, n, max_points):
    _checked(
        watch, f"f1 loo {n}/{max_points}", post_bytes("/v1/cross-validations", _loo(n, max_points)), {200, 422, 503}
    )


@pytest.mark.parametrize("max_points", [600, None])
def test_f1_prediction_600_samples_1000_targets(watch, max_points):
    rng = np.random.default_rng(3)
    document = {
        "samples": _samples(600, 2),
        "model": MODEL,
        "targets": {"x": rng.uniform(0, 100, 1000).tolist(), "y": rng.uniform(0, 100, 1000).tolist()},
    }
    if max_points:
        document["neighbourhood"] = {"max_points": max_points}
    _checked(
        watch, f"f1 predict 600x1000 hood {max_points}", post_bytes("/v1/predictions", _json(document)), {200, 422, 503}
    )


# ---- 2. work that outlived the gunicorn timeout ------------------------------------------------------


def test_f2_collinear_3d_median_with_36_dip_classes_and_scattergram(watch):
    t = np.linspace(0, 1000, 50_000).round(4).tolist()
    document = {
        "samples": {"x": t, "y": t, "z": t, "values": np.random.default_rng(4).normal(size=50_000).round(4).tolist()},
        "directions": [{"azimuth": 45, "dip": -87.5 + 5 * i, "dip_tolerance": 2.5} for i in range(36)],
        "statistic": "semivariance_median",
        "pairs_for_class": {"direction": 0, "class": 0, "limit": 100_000},
    }
    _checked(watch, "f2 collinear median", post_bytes("/v1/experimental-variograms", _json(document)), {200, 422, 503})


def test_f2_analysis_with_a_2_million_node_svg_map(watch):
    document = {
        "samples": _samples(300, 5),
        "prediction": {"grid": {"origin": [0, 0], "spacing": [0.0707, 0.0707], "shape": [1414, 1414]}},
        "figures": ["prediction_map"],
        "figure_format": "svg",
    }
    answer = _checked(watch, "f2 analysis 1414x1414 svg", post_bytes("/v1/analyses", _json(document)), {422, 503})
    assert answer.status == 422, answer.document


@pytest.mark.parametrize("n", [5_000, 20_000])
def test_f3_a_whole_analysis_with_figures_stays_within_its_deadline(watch, n):
    # Strategies compared by cross-validation, a prediction grid and three figures (PNG).
    document = {
        "samples": _samples(n, 9),
        "prediction": {"grid": {"origin": [0, 0], "spacing": [1, 1], "shape": [100, 100]}},
        "figures": ["variogram", "cross_validation", "prediction_map"],
        "figure_format": "png",
    }
    _checked(watch, f"f3 analysis {n} samples", post_bytes("/v1/analyses", _json(document)), {200, 422, 503})


# ---- 3. the sample limit checked after the costly part --------------------------------------------


def test_f3_600k_geojson_features_on_64800_places(watch):
    rng = np.random.default_rng(6)
    places = rng.uniform(-1, 1, (64_800, 2)).round(5)
    chosen = places[np.arange(600_000) % 64_800]
    features = ",".join(
        f'{{"type":"Feature","geometry":{{"type":"Point","coordinates":[{x},{y}]}},"properties":{{"v":{i % 7}}}}}'
        for i, (x, y) in enumerate(chosen.tolist())
    )
    body = (
        '{"samples":{"geojson":{"type":"FeatureCollection","features":['
        + features
        + ']},"value_property":"v"},"duplicates":"average"}'
    ).encode()
    answer = _checked(
        watch,
        "f3 600k features",
        post_bytes("/v1/experimental-variograms", body),
        {413, 422},
        {"/problems/limit-exceeded", "/problems/body-too-large"},
    )
    assert answer.seconds < 5.0, answer.seconds
    assert answer.document["limit"] == "LAGWISE_MAX_SAMPLES" and answer.document["requested"] == 600_000


def test_f3_330_repeated_families(watch):
    document = {"samples": _samples(200, 7), "families": ["spherical"] * 330}
    answer = _checked(watch, "f3 330 families", post_bytes("/v1/model-fits", _json(document)), {422})
    assert answer.seconds < 2.0


# ---- 4. the sweep's visited pairs --------------------------------------------------------------------


@pytest.mark.parametrize("along", ["x", "y"])
def test_f4_200k_samples_along_one_axis(watch, along):
    rng = np.random.default_rng(8)
    t, o = rng.uniform(0, 100, 200_000).round(5), rng.uniform(0, 0.01, 200_000).round(6)
    x, y = (t, o) if along == "x" else (o, t)
    document = {
        "samples": {"x": x.tolist(), "y": y.tolist(), "values": rng.normal(size=200_000).round(4).tolist()},
        "lags": {"width": 1.0, "count": 5},
    }
    _checked(
        watch, f"f4 200k along {along}", post_bytes("/v1/experimental-variograms", _json(document)), {200, 422, 503}
    )


# ---- 5. liveness while two large computations run ----------------------------------------------------


def test_f5_liveness_during_two_large_computations(watch):
    bodies = [post_bytes("/v1/cross-validations", _loo(3000, 64)), post_bytes("/v1/cross-validations", _loo(3000, 64))]
    answers: list[Answer] = []
    threads = [threading.Thread(target=lambda b=b: answers.append(replay(watch, b))) for b in bodies]
    for t in threads:
        t.start()
    probes = []
    while all(t.is_alive() for t in threads):
        probes.append(healthz_seconds(watch.url))
    for t in threads:
        t.join()
    for a in answers:
        watch.record("f5 large loo (concurrent)", a)
    watch.lines.append(f"f5 liveness: {len(probes)} probes, slowest {max(probes, default=0):.3f} s")
    assert [a.status for a in answers] == [200, 200]
    assert len(probes) >= 3 and max(probes) < 1.0, probes


# ---- 6. error lists without a cap --------------------------------------------------------------------


def test_f6_a_million_families(watch):
    body = _json({"samples": _samples(10), "families": ["a"] * 1_000_000})
    answer = _checked(watch, "f6 families x 1e6", post_bytes("/v1/model-fits", body), {422})
    assert len(answer.document["errors"]) <= 20


def test_f6_a_64_mb_body_of_families(watch):
    count = (64 * 2**20 - 200) // 4
    body = b'{"samples":{"x":[0,1,2],"values":[1,2,3]},"families":[' + b'"a",' * (count - 1) + b'"a"]}'
    _checked(
        watch,
        "f6 families 64 MB",
        post_bytes("/v1/model-fits", body),
        {413, 422},
        {"/problems/limit-exceeded", "/problems/invalid-input", "/problems/body-too-large"},
    )


@pytest.mark.parametrize("member", ["ids", "return_weights"])
def test_f6_many_bad_ids_or_weights(watch, member):
    document = {"samples": _samples(10), "model": MODEL, "targets": {"x": [1.0], "y": [1.0]}}
    if member == "ids":
        document["samples"]["ids"] = [1] * 150_000  # under the sample limit: every element is checked
    else:
        document["return_weights"] = ["a"] * 1_000_000
    answer = _checked(watch, f"f6 bad {member}", post_bytes("/v1/predictions", _json(document)), {422})
    assert len(answer.document["errors"]) <= 20 and answer.document.get("errors_omitted", 0) > 0


# ---- 7. and 8. overflow and nulls ---------------------------------------------------------------------

SMALL = {"x": [0, 1, 2, 3, 4, 5], "y": [0, 1, 0, 1, 2, 0], "values": [1, 2, 3, 4, 2, 1]}


def test_f7_invalid_chunk_size(watch):
    raw = post_bytes("/v1/experimental-variograms", b"zz\r\n{}\r\n0\r\n\r\n", {"Transfer-Encoding": "chunked"})
    _checked(watch, "f7 bad chunk", raw, {400}, {"/problems/malformed-request", "/problems/malformed-json"})


def _no_nulls_without_reason(document) -> None:
    for direction in document.get("directions", []):
        for row in direction["classes"]:
            assert row["upper"] is not None and row["lower"] is not None
            assert row["value"] is not None or row.get("reason"), row
    assert document.get("summary", {}).get("variance", 0) is not None, document["summary"]


@pytest.mark.parametrize(
    ("name", "path", "document"),
    [
        (
            "f7 bandwidth 1e308",
            "/v1/experimental-variograms",
            {"samples": SMALL, "directions": [{"azimuth": 0, "tolerance": 45, "bandwidth": 1e308}]},
        ),
        ("f8 lag width 1e308", "/v1/experimental-variograms", {"samples": SMALL, "lags": {"width": 1e308, "count": 3}}),
        (
            "f8 values near 1e300",
            "/v1/experimental-variograms",
            {"samples": {**SMALL, "values": [1e300, -1e300, 1e300, 5e299, -7e299, 1e300]}},
        ),
        ("f8 cell size 1e308", "/v1/variogram-maps", {"samples": SMALL, "cell_size": 1e308, "cells": 3}),
    ],
)
def test_f7_f8_edges_of_float64(watch, name, path, document):
    answer = _checked(watch, name, post_bytes(path, _json(document)), {200, 422})
    if answer.status == 200:
        _no_nulls_without_reason(answer.document)
        assert all(h is not None for h in answer.document.get("hx", [0])), "null hx"


@pytest.mark.parametrize(
    "structures",
    [
        [{"family": "cardinal_sine", "partial_sill": 1, "range": 3}],
        [
            {"family": "cardinal_sine", "partial_sill": 1, "range": 3},
            {"family": "spherical", "partial_sill": 0.5, "range": 2},
        ],
    ],
)
def test_f7_targets_at_1e300(watch, structures):
    document = {
        "samples": SMALL,
        "model": {"nugget": 0.1, "structures": structures},
        "targets": {"x": [0.5, 1e300], "y": [0.5, -1e300]},
    }
    answer = _checked(watch, "f7 targets 1e300", post_bytes("/v1/predictions", _json(document)), {422})
    assert answer.document["errors"][0]["pointer"] == "/targets/x/1"


def _experimental(value, pairs=100):
    classes = [
        {"mean_distance": d, "value": v, "pairs": p}
        for d, v, p in ((1, 0.5, 100), (2, value, pairs), (3, 1.0, 100), (4, 1.1, 100))
    ]
    return {"experimental": {"directions": [{"azimuth": 0, "classes": classes}]}}


def test_f7_pairs_1e30_in_a_model_fit(watch):
    answer = _checked(watch, "f7 pairs 1e30", post_bytes("/v1/model-fits", _json(_experimental(0.8, 1e30))), {422})
    assert answer.document["errors"][0]["pointer"] == "/experimental/directions/0/classes/1/pairs"


# ---- 9. wrong answers on scale --------------------------------------------------------------------------


def test_f9_tiny_different_values_are_not_equal(watch):
    document = {"samples": {**SMALL, "values": [1e-300, 2e-300, 1.5e-300, 1.1e-300, 1.7e-300, 1.2e-300]}}
    answer = _checked(watch, "f9 tiny values", post_bytes("/v1/analyses", _json(document)), {200, 422})
    assert "equal" not in answer.body.decode()


def test_f9_longitudes_180_and_minus_180_are_duplicates(watch):
    document = {
        "samples": {"x": [180, -180, 0, 10], "y": [10, 10, 20, 30], "values": [1, 2, 3, 4]},
        "coordinates": "geographic",
        "duplicates": "reject",
    }
    answer = _checked(watch, "f9 lon 180", post_bytes("/v1/experimental-variograms", _json(document)), {422})
    assert answer.document["errors"][0]["pointer"] == "/samples/x/1"


def test_f9_negative_semivariances_are_refused(watch):
    answer = _checked(
        watch, "f9 negative semivariance", post_bytes("/v1/model-fits", _json(_experimental(-1.0))), {422}
    )
    assert "negative" in answer.document["errors"][0]["detail"]
