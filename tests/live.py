"""Start a real service (``lagwise serve``: front and gunicorn) on 127.0.0.1 for end-to-end and SDK tests."""

from __future__ import annotations

import contextlib
import os
import signal
import subprocess
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "deploy"))

from cluster import free_port, spawn_service, wait_ready  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


@contextlib.contextmanager
def running_service(env: dict | None = None, workers: int = 2, ready_within: float = 300.0):
    """Run ``lagwise serve`` with the packaged configuration; yields the base URL; stops it afterwards."""
    port = free_port()
    environment = dict(os.environ, LAGWISE_WORKERS=str(workers), **(env or {}))
    log = open(os.devnull, "w")
    process = spawn_service(f"127.0.0.1:{port}", environment, log, ROOT)
    url = f"http://127.0.0.1:{port}"
    try:
        wait_ready(url, ready_within, process)
        yield url
    finally:
        if process.poll() is None:
            os.killpg(process.pid, signal.SIGTERM)
            try:
                process.wait(timeout=30)
            except subprocess.TimeoutExpired:
                os.killpg(process.pid, signal.SIGKILL)
                process.wait()
        log.close()
