"""gunicorn configuration for Lagwise (CPU-bound, pure requests).

Environment variables (defaults in brackets):
LAGWISE_BIND [127.0.0.1:8750], LAGWISE_WORKERS [cores], LAGWISE_THREADS [cores / workers,
at least 1: compute threads per worker], LAGWISE_DEADLINE_SECONDS [60: in-app time budget;
the worker timeout sits 30 s above it], LAGWISE_MAX_REQUESTS [2000: worker recycling],
LAGWISE_TRUSTED_PROXIES [127.0.0.1], LAGWISE_METRICS_BIND [none: serve /metrics on the
main listener], PROMETHEUS_MULTIPROC_DIR [a fresh temporary folder].
"""

import os
import shutil
import tempfile

# BLAS threads are pinned to 1 per worker before numpy is imported anywhere:
# workers x compute threads must not exceed the cores.
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

# Prometheus multiprocess mode: every worker writes its metrics into this folder.
if not os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
    os.environ["PROMETHEUS_MULTIPROC_DIR"] = tempfile.mkdtemp(prefix="lagwise-metrics-")
_metrics_dir = os.environ["PROMETHEUS_MULTIPROC_DIR"]

_cores = os.cpu_count() or 1
bind = os.environ.get("LAGWISE_BIND", "127.0.0.1:8750")
workers = int(os.environ.get("LAGWISE_WORKERS", _cores))
worker_class = "sync"
timeout = int(float(os.environ.get("LAGWISE_DEADLINE_SECONDS", 60))) + 30
graceful_timeout = int(os.environ.get("LAGWISE_GRACEFUL_SECONDS", 90))
keepalive = 5
max_requests = int(os.environ.get("LAGWISE_MAX_REQUESTS", 2000))
max_requests_jitter = max(1, max_requests // 10)
worker_tmp_dir = "/dev/shm" if os.path.isdir("/dev/shm") else None
forwarded_allow_ips = os.environ.get("LAGWISE_TRUSTED_PROXIES", "127.0.0.1")
accesslog = None
errorlog = "-"
loglevel = os.environ.get("LAGWISE_LOG_LEVEL", "info").lower()
limit_request_line = 8190
limit_request_fields = 100
threads_per_worker = int(os.environ.get("LAGWISE_THREADS", max(1, _cores // max(workers, 1))))


def on_starting(server):
    """Start from empty metric files and compile the kernels once in the master (no threads start)."""
    for entry in os.listdir(_metrics_dir):
        path = os.path.join(_metrics_dir, entry)
        if os.path.isfile(path):
            os.remove(path)
    from lagwise.core.warmup import compile_kernels

    compile_kernels()


def when_ready(server):
    """Serve /metrics on a separate listener when LAGWISE_METRICS_BIND is set."""
    address = os.environ.get("LAGWISE_METRICS_BIND")
    if address:
        from lagwise.api.observability import metrics_registry
        from prometheus_client import start_http_server

        host, _, port = address.rpartition(":")
        start_http_server(int(port), addr=host or "127.0.0.1", registry=metrics_registry())


def post_fork(server, worker):
    """Set this worker's compute threads and run the kernels once, so requests never compile."""
    import numba
    from lagwise.core.warmup import warm_kernels

    numba.set_num_threads(min(threads_per_worker, numba.config.NUMBA_NUM_THREADS))
    warm_kernels()


def child_exit(server, worker):
    """Fold a dead worker's live gauges away and count the restart."""
    from lagwise.api.observability import WORKER_RESTARTS
    from prometheus_client import multiprocess

    multiprocess.mark_process_dead(worker.pid)
    WORKER_RESTARTS.inc()


def on_exit(server):
    """Remove the metrics folder when gunicorn made it."""
    if _metrics_dir.startswith(tempfile.gettempdir()) and os.path.basename(_metrics_dir).startswith("lagwise-metrics-"):
        shutil.rmtree(_metrics_dir, ignore_errors=True)
