"""A bounded mixed workload driven through the SDK by several client threads."""

from __future__ import annotations

import random
import threading
import time
from dataclasses import dataclass, field

from lagwise_client import Lagwise, LagwiseError
from lagwise_client.retry import RetryPolicy

MODEL = {"nugget": 0.1, "structures": [{"family": "spherical", "partial_sill": 1.0, "range": 30.0}]}


def _data(seed: int, n: int = 120):
    rng = random.Random(seed)
    x = [rng.uniform(0, 100) for _ in range(n)]
    y = [rng.uniform(0, 100) for _ in range(n)]
    v = [0.02 * a + 0.01 * b + rng.gauss(0, 0.3) for a, b in zip(x, y, strict=True)]
    return {"x": x, "y": y, "values": v}


OPERATIONS = (
    (
        "experimental",
        lambda lw, s: lw.experimental_variogram(
            s, lags={"width": 8, "count": 8}, directions=[{"azimuth": 0}, {"azimuth": 90}]
        ),
    ),
    ("map", lambda lw, s: lw.variogram_map(s, cell_size=10, cells=4)),
    ("fit", lambda lw, s: lw.fit_model(s, lags={"width": 8, "count": 8}, families=["spherical", "exponential"])),
    ("cross_validation", lambda lw, s: lw.cross_validate(s, model=MODEL)),
    (
        "prediction",
        lambda lw, s: lw.predict(
            s,
            model=MODEL,
            grid={"origin": [0, 0], "spacing": [10, 10], "shape": [10, 10]},
            neighbourhood={"max_points": 16},
        ),
    ),
)


@dataclass
class Outcome:
    """What the clients saw."""

    latencies: list[float] = field(default_factory=list)
    failures: list[str] = field(default_factory=list)
    by_operation: dict = field(default_factory=dict)
    seconds: float = 0.0

    @property
    def requests(self) -> int:
        return len(self.latencies)

    def percentile(self, q: float) -> float:
        ordered = sorted(self.latencies)
        return ordered[min(len(ordered) - 1, int(q * len(ordered)))] if ordered else float("nan")

    def line(self, label: str) -> str:
        return (
            f"{label}: {self.requests} requests, {len(self.failures)} failed, {self.requests / self.seconds:.1f} req/s, "
            f"p50 {self.percentile(0.5) * 1000:.0f} ms, p95 {self.percentile(0.95) * 1000:.0f} ms, p99 {self.percentile(0.99) * 1000:.0f} ms"
        )


def run(url: str, seconds: float, concurrency: int = 8, max_requests: int = 100_000) -> Outcome:
    """Drive the mixed workload for ``seconds`` (and at most ``max_requests``) with ``concurrency`` clients."""
    outcome = Outcome()
    lock = threading.Lock()
    stop_at = time.monotonic() + seconds
    datasets = [_data(seed) for seed in range(8)]

    def client(index: int) -> None:
        rng = random.Random(index)
        with Lagwise(url, timeout=60, retries=RetryPolicy(retries=8, backoff=0.2, cap=3.0)) as lw:
            while time.monotonic() < stop_at:
                with lock:
                    if outcome.requests + len(outcome.failures) >= max_requests:
                        return
                name, call = rng.choice(OPERATIONS)
                start = time.perf_counter()
                try:
                    call(lw, rng.choice(datasets))
                except LagwiseError as exc:
                    with lock:
                        outcome.failures.append(f"{name}: {exc!r}")
                    continue
                with lock:
                    outcome.latencies.append(time.perf_counter() - start)
                    outcome.by_operation[name] = outcome.by_operation.get(name, 0) + 1

    threads = [threading.Thread(target=client, args=(i,)) for i in range(concurrency)]
    began = time.monotonic()
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    outcome.seconds = time.monotonic() - began
    return outcome
