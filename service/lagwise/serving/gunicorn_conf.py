"""gunicorn settings and hooks for Lagwise (CPU-bound, pure requests).

Load it as ``gunicorn --config python:lagwise.serving.gunicorn_conf 'lagwise.api:create_app()'``
(it ships inside the package, so an installed wheel has it). ``lagwise serve`` runs gunicorn
behind the front (:mod:`lagwise.serving.front`) and gives it a private Unix socket and control
socket on the command line, which win over ``bind`` and ``control_socket`` below. The
``LAGWISE_*`` variables read here are listed in :mod:`lagwise.configuration`;
``PROMETHEUS_MULTIPROC_DIR`` defaults to a fresh temporary folder.
"""

import os
import shutil
import tempfile

from lagwise.configuration import value, whole_number

# BLAS threads are pinned to 1 per worker before numpy is imported anywhere:
# workers x compute threads must not exceed the cores.
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

# Prometheus multiprocess mode: every worker writes its metrics into this folder.
if not os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
    os.environ["PROMETHEUS_MULTIPROC_DIR"] = tempfile.mkdtemp(prefix="lagwise-metrics-")
_metrics_dir = os.environ["PROMETHEUS_MULTIPROC_DIR"]

_cores = os.cpu_count() or 1
bind = value("LAGWISE_BIND")
workers = whole_number("LAGWISE_WORKERS", fallback=_cores)
worker_class = "sync"
timeout = whole_number("LAGWISE_DEADLINE_SECONDS") + 30
graceful_timeout = whole_number("LAGWISE_GRACEFUL_SECONDS")
keepalive = 5
max_requests = whole_number("LAGWISE_MAX_REQUESTS")
max_requests_jitter = max(1, max_requests // 10)
worker_tmp_dir = "/dev/shm" if os.path.isdir("/dev/shm") else None
forwarded_allow_ips = value("LAGWISE_TRUSTED_PROXIES")
accesslog = None
errorlog = "-"
loglevel = value("LAGWISE_LOG_LEVEL").lower()
limit_request_line = 8190
limit_request_fields = 100
threads_per_worker = whole_number("LAGWISE_THREADS", fallback=max(1, _cores // max(workers, 1)))
# gunicorn's default control socket is one per user (in the home folder): every instance would
# share it, and stopping one would delete it for the others. This one belongs to this master.
control_socket = os.path.join(tempfile.gettempdir(), f"lagwise-gunicorn-{os.getpid()}.ctl")


def on_starting(server):
    """Start from empty metric files and compile the kernels (and the body scan) once in the master (no threads start)."""
    for entry in os.listdir(_metrics_dir):
        path = os.path.join(_metrics_dir, entry)
        if os.path.isfile(path):
            os.remove(path)
    from lagwise.api import members
    from lagwise.core.warmup import compile_kernels

    compile_kernels()
    members.warm()


def when_ready(server):
    """Serve /metrics on a separate listener when LAGWISE_METRICS_BIND is set."""
    address = value("LAGWISE_METRICS_BIND")
    if address:
        from prometheus_client import start_http_server

        from lagwise.api.observability import metrics_registry

        host, _, port = address.rpartition(":")
        start_http_server(int(port), addr=host or "127.0.0.1", registry=metrics_registry())


def post_fork(server, worker):
    """Set this worker's compute threads and run the kernels once, so requests never compile.

    Until gunicorn installs the worker's own handlers (after this hook) the worker holds the
    master's, which only queue a signal in the worker's copy of the master: a SIGTERM during the
    warm-up was lost, and stopping right after a worker (re)start waited the whole graceful
    timeout. The default actions end a worker that has no request yet.
    """
    import signal

    import numba

    from lagwise.core.warmup import warm_kernels

    for stop in (signal.SIGTERM, signal.SIGINT, signal.SIGQUIT):
        signal.signal(stop, signal.SIG_DFL)
    numba.set_num_threads(min(threads_per_worker, numba.config.NUMBA_NUM_THREADS))
    warm_kernels()


def child_exit(server, worker):
    """Fold a dead worker's live gauges away and count the restart."""
    from prometheus_client import multiprocess

    from lagwise.api.observability import WORKER_RESTARTS

    multiprocess.mark_process_dead(worker.pid)
    WORKER_RESTARTS.inc()


def on_exit(server):
    """Remove the metrics folder when gunicorn made it."""
    if _metrics_dir.startswith(tempfile.gettempdir()) and os.path.basename(_metrics_dir).startswith("lagwise-metrics-"):
        shutil.rmtree(_metrics_dir, ignore_errors=True)
