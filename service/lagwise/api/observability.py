"""Request ids, JSON logs and Prometheus metrics.

Metrics work in gunicorn's multiprocess mode when ``PROMETHEUS_MULTIPROC_DIR`` is set
(every worker writes its own files; ``/metrics`` merges them), and in one process
otherwise. Logs are one JSON object per line on stderr, with the request id and never
any sample data.
"""

from __future__ import annotations

import json
import logging
import os
import re
import time
import uuid

from flask import Flask, Response, g, request
from prometheus_client import (
    CONTENT_TYPE_LATEST,
    CollectorRegistry,
    Counter,
    Gauge,
    Histogram,
    generate_latest,
    multiprocess,
)

LATENCY_BUCKETS = (0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 20.0, 30.0, 60.0, 90.0)
REQUEST_ID = re.compile(r"^[A-Za-z0-9._:-]{1,128}$")

REQUESTS = Counter("lagwise_requests_total", "HTTP requests answered.", ["endpoint", "method", "status"])
LATENCY = Histogram(
    "lagwise_request_duration_seconds", "Time to answer a request.", ["endpoint"], buckets=LATENCY_BUCKETS
)
IN_FLIGHT = Gauge("lagwise_requests_in_flight", "Requests being answered.", multiprocess_mode="livesum")
SAMPLES = Counter("lagwise_samples_processed_total", "Samples in successfully computed requests.", ["endpoint"])
PAIRS = Counter("lagwise_pairs_processed_total", "Sample pairs binned into classes.", ["endpoint"])
REFUSALS = Counter("lagwise_refusals_total", "Requests refused, by problem type.", ["reason"])
WORKER_RESTARTS = Counter(
    "lagwise_worker_restarts_total", "Worker processes that exited (crashed, recycled or stopped)."
)


class JsonFormatter(logging.Formatter):
    """One JSON object per record: time, level, logger, message and any ``extra`` fields."""

    FIELDS = ("request_id", "method", "path", "endpoint", "status", "duration_ms", "samples", "problem")

    def format(self, record: logging.LogRecord) -> str:
        entry = {
            "time": time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(record.created)) + f".{int(record.msecs):03d}Z",
            "level": record.levelname.lower(),
            "logger": record.name,
            "message": record.getMessage(),
        }
        entry.update({k: getattr(record, k) for k in self.FIELDS if hasattr(record, k)})
        if record.exc_info:
            entry["exception"] = self.formatException(record.exc_info)
        return json.dumps(entry, separators=(",", ":"))


def logger() -> logging.Logger:
    """The service logger, writing JSON lines to stderr (configured once)."""
    log = logging.getLogger("lagwise")
    if not log.handlers:
        handler = logging.StreamHandler()
        handler.setFormatter(JsonFormatter())
        log.addHandler(handler)
        log.setLevel(os.environ.get("LAGWISE_LOG_LEVEL", "INFO").upper())
        log.propagate = False
    return log


def request_id() -> str:
    """The current request's id (taken from a well-formed X-Request-ID, else generated)."""
    return getattr(g, "request_id", "-")


def metrics_registry() -> CollectorRegistry | None:
    """A registry merging every worker's files in multiprocess mode; None for the default registry."""
    if not os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        return None
    registry = CollectorRegistry()
    multiprocess.MultiProcessCollector(registry)
    return registry


def metrics_response() -> Response:
    registry = metrics_registry()
    body = generate_latest(registry) if registry is not None else generate_latest()
    return Response(body, mimetype=CONTENT_TYPE_LATEST.split(";")[0], headers={"Content-Type": CONTENT_TYPE_LATEST})


def count_work(endpoint: str, samples: int, pairs: int = 0) -> None:
    """Record the samples (and pairs) a successful request processed."""
    SAMPLES.labels(endpoint).inc(samples)
    if pairs:
        PAIRS.labels(endpoint).inc(pairs)
    g.samples = samples


def install(app: Flask) -> None:
    """Request ids, timing, metrics and access logs around every request."""
    log = logger()

    @app.before_request
    def _begin():
        g.started = time.perf_counter()
        given = request.headers.get("X-Request-ID", "")
        g.request_id = given if REQUEST_ID.match(given) else uuid.uuid4().hex
        IN_FLIGHT.inc()
        g.counted_in_flight = True

    @app.after_request
    def _finish(response: Response) -> Response:
        endpoint = request.url_rule.rule if request.url_rule is not None else "unmatched"
        elapsed = time.perf_counter() - g.get("started", time.perf_counter())
        REQUESTS.labels(endpoint, request.method, str(response.status_code)).inc()
        LATENCY.labels(endpoint).observe(elapsed)
        response.headers["X-Request-ID"] = request_id()
        log.info(
            "request",
            extra={
                "request_id": request_id(),
                "method": request.method,
                "path": request.path,
                "endpoint": endpoint,
                "status": response.status_code,
                "duration_ms": round(elapsed * 1000.0, 3),
                "samples": g.get("samples"),
            },
        )
        return response

    @app.teardown_request
    def _leave(exc):
        if g.pop("counted_in_flight", False):
            IN_FLIGHT.dec()
