"""gunicorn configuration for Lagwise (CPU-bound, pure requests).

Environment variables (defaults in brackets):
LAGWISE_BIND [127.0.0.1:8750], LAGWISE_WORKERS [cores], LAGWISE_THREADS
[cores / workers, at least 1: compute threads per worker], LAGWISE_TIMEOUT [120 s],
LAGWISE_MAX_REQUESTS [2000].
"""

import os

# BLAS threads are pinned to 1 per worker before numpy is imported anywhere:
# workers x compute threads must not exceed the cores.
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

_cores = os.cpu_count() or 1
bind = os.environ.get("LAGWISE_BIND", "127.0.0.1:8750")
workers = int(os.environ.get("LAGWISE_WORKERS", _cores))
worker_class = "sync"
timeout = int(os.environ.get("LAGWISE_TIMEOUT", 120))
graceful_timeout = 30
keepalive = 5
max_requests = int(os.environ.get("LAGWISE_MAX_REQUESTS", 2000))
max_requests_jitter = max_requests // 10
worker_tmp_dir = "/dev/shm" if os.path.isdir("/dev/shm") else None
forwarded_allow_ips = os.environ.get("LAGWISE_TRUSTED_PROXIES", "127.0.0.1")
accesslog = None
errorlog = "-"
loglevel = os.environ.get("LAGWISE_LOG_LEVEL", "info")
threads_per_worker = int(os.environ.get("LAGWISE_THREADS", max(1, _cores // max(workers, 1))))


def on_starting(server):
    """Compile the kernels (or load numba's cache) once in the master; no threads start here."""
    from lagwise.core.warmup import compile_kernels

    compile_kernels()


def post_fork(server, worker):
    """Set this worker's compute threads and run the kernels once, so requests never compile."""
    import numba

    from lagwise.core.warmup import warm_kernels

    numba.set_num_threads(min(threads_per_worker, numba.config.NUMBA_NUM_THREADS))
    warm_kernels()
