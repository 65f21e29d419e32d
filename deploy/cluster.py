"""Run several Lagwise instances behind nginx on this machine (127.0.0.1 only).

    python3 manage.py cluster [--instances 2] [--port 8760]

Each instance is ``lagwise serve`` (its front, a gunicorn master and workers) with its own
sockets and metrics folder; nginx
(Debian package ``nginx``) balances between them. Ctrl-C stops everything.
"""

from __future__ import annotations

import argparse
import os
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

HERE = Path(__file__).resolve().parent
TEMPLATE = HERE / "nginx.conf.template"


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def wait_ready(url: str, seconds: float = 300.0, process: subprocess.Popen | None = None) -> None:
    """Poll ``url``/readyz until it answers 200; fail early if ``process`` exits."""
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        if process is not None and process.poll() is not None:
            raise RuntimeError(f"the service exited with status {process.returncode}")
        try:
            with urllib.request.urlopen(url + "/readyz", timeout=2) as answer:
                if answer.status == 200:
                    return
        except OSError:
            time.sleep(0.2)
    raise RuntimeError(f"{url} did not become ready")


def spawn_service(bind: str, env: dict, log, cwd: Path | None = None) -> subprocess.Popen:
    """Start ``lagwise serve`` (front and gunicorn) in its own session, so that it can be signalled whole."""
    return subprocess.Popen(
        [sys.executable, "-m", "lagwise.cli", "serve", "--bind", bind],
        env=env,
        cwd=cwd,
        stdout=log,
        stderr=log,
        start_new_session=True,
    )


class Cluster:
    """Instances and a balancer; a context manager that stops everything it started."""

    def __init__(self, instances: int = 2, port: int | None = None, workers: int = 1, env: dict | None = None):
        self.count = instances
        self.port = port or free_port()
        self.workers = workers
        self.env = env or {}
        self.prefix = Path(tempfile.mkdtemp(prefix="lagwise-cluster-"))
        self.instances: list[tuple[int, subprocess.Popen]] = []
        self.logs: list = []
        self.nginx: subprocess.Popen | None = None

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def start_instance(self) -> int:
        """Start one gunicorn instance; returns its port."""
        port = free_port()
        metrics = self.prefix / f"metrics-{port}"
        metrics.mkdir()
        env = dict(
            os.environ,
            LAGWISE_WORKERS=str(self.workers),
            PROMETHEUS_MULTIPROC_DIR=str(metrics),
            **self.env,
        )
        log = open(self.prefix / f"instance-{port}.log", "w")
        self.logs.append(log)
        self.instances.append((port, spawn_service(f"127.0.0.1:{port}", env, log)))
        return port

    def start(self) -> Cluster:
        for _ in range(self.count):
            self.start_instance()
        for port, _ in self.instances:
            wait_ready(f"http://127.0.0.1:{port}")
        upstreams = "\n".join(
            f"        server 127.0.0.1:{port} max_fails=2 fail_timeout=5s;" for port, _ in self.instances
        )
        body = str(
            max(
                int(float(os.environ.get("LAGWISE_MAX_BODY_BYTES", str(64 * 1024 * 1024)))),
                int(float(os.environ.get("LAGWISE_MAX_ARROW_BYTES", str(512 * 1024 * 1024)))),
            )
        )
        config = (
            TEMPLATE.read_text()
            .replace("{{LISTEN}}", f"127.0.0.1:{self.port}")
            .replace("{{UPSTREAMS}}", upstreams)
            .replace("{{PREFIX}}", str(self.prefix))
            .replace("{{MAX_BODY}}", body)
        )
        (self.prefix / "nginx.conf").write_text(config)
        nginx = shutil.which("nginx") or "/usr/sbin/nginx"
        self.nginx = subprocess.Popen(
            [nginx, "-c", str(self.prefix / "nginx.conf"), "-p", str(self.prefix), "-g", "daemon off;"],
            start_new_session=True,
        )
        wait_ready(self.url, 30)
        return self

    def signal_instance(self, index: int, sig: int) -> None:
        """Send a signal to one instance (its front passes it on to the gunicorn master)."""
        os.kill(self.instances[index][1].pid, sig)

    def stop(self) -> None:
        if self.nginx and self.nginx.poll() is None:
            self.nginx.send_signal(signal.SIGQUIT)
            try:
                self.nginx.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.nginx.kill()
        for _, process in self.instances:
            if process.poll() is None:
                os.killpg(process.pid, signal.SIGTERM)
        for _, process in self.instances:
            try:
                process.wait(timeout=60)
            except subprocess.TimeoutExpired:
                os.killpg(process.pid, signal.SIGKILL)
                process.wait()
        for log in self.logs:
            log.close()
        shutil.rmtree(self.prefix, ignore_errors=True)

    def __enter__(self) -> Cluster:
        try:
            return self.start()
        except BaseException:
            self.stop()
            raise

    def __exit__(self, *exc) -> None:
        self.stop()


def _interrupt(*_):
    raise KeyboardInterrupt


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--instances", type=int, default=2)
    parser.add_argument("--port", type=int, default=8760)
    parser.add_argument("--workers", type=int, default=1, help="gunicorn workers per instance")
    args = parser.parse_args(argv)
    signal.signal(signal.SIGTERM, _interrupt)
    with Cluster(args.instances, args.port, args.workers) as cluster:
        ports = ", ".join(str(p) for p, _ in cluster.instances)
        print(
            f"{args.instances} instances (127.0.0.1 ports {ports}) behind nginx at {cluster.url}; Ctrl-C stops them.",
            flush=True,
        )
        try:
            while True:
                time.sleep(1)
        except KeyboardInterrupt:
            print("stopping ...")
    return 0


if __name__ == "__main__":
    sys.exit(main())
