"""Start a real gunicorn service on 127.0.0.1 for end-to-end and SDK tests."""

from __future__ import annotations

import contextlib
import os
import signal
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
CONFIG = ROOT / "deploy" / "gunicorn.conf.py"


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@contextlib.contextmanager
def running_service(env: dict | None = None, workers: int = 2, ready_within: float = 300.0):
    """Run gunicorn with the project's configuration; yields the base URL; stops it afterwards."""
    port = free_port()
    environment = dict(os.environ, LAGWISE_BIND=f"127.0.0.1:{port}", LAGWISE_WORKERS=str(workers), **(env or {}))
    log = open(os.devnull, "w")
    process = subprocess.Popen(
        [sys.executable, "-m", "gunicorn", "--config", str(CONFIG), "lagwise.api:create_app()"],
        env=environment,
        cwd=ROOT,
        stdout=log,
        stderr=log,
        start_new_session=True,
    )
    url = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + ready_within
        while True:
            if process.poll() is not None:
                raise RuntimeError(f"gunicorn exited with {process.returncode}")
            try:
                with urllib.request.urlopen(url + "/readyz", timeout=2) as answer:
                    if answer.status == 200:
                        break
            except OSError:
                pass
            if time.monotonic() > deadline:
                raise RuntimeError("gunicorn did not become ready")
            time.sleep(0.2)
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
