"""``lagwise serve``: the front on the public address, gunicorn behind it on a private socket.

One process tree per instance::

    lagwise serve (front, asyncio)        listens on --bind / LAGWISE_BIND
     └── gunicorn master                   unix:<runtime>/workers.sock, control <runtime>/control.sock
          └── sync workers (LAGWISE_WORKERS)

The runtime folder is private to the instance (``mkdtemp``), so instances never share a
socket. Signals sent to the front go to the gunicorn master (SIGHUP reloads, SIGTTIN and
SIGTTOU add or remove a worker); SIGTERM or SIGINT first closes the public listener, then
lets gunicorn drain its in-flight requests. The front exits with gunicorn's status, and
gunicorn receives SIGTERM if the front dies (Linux ``PR_SET_PDEATHSIG``).
"""

from __future__ import annotations

import asyncio
import contextlib
import ctypes
import os
import shutil
import signal
import subprocess
import sys
import tempfile

from ..configuration import whole_number
from .front import Front, FrontSettings, log

APP = "lagwise.api:create_app()"
DEFAULT_CONFIG = "python:lagwise.serving.gunicorn_conf"
FORWARDED_SIGNALS = (signal.SIGHUP, signal.SIGTTIN, signal.SIGTTOU, signal.SIGUSR1, signal.SIGUSR2)
STOP_SIGNALS = (signal.SIGTERM, signal.SIGINT)


def split_bind(bind: str) -> tuple[str, int]:
    """``host:port`` (``[v6]:port`` too) as a host and a port number."""
    host, sep, port = bind.rpartition(":")
    if not sep or not port.isdigit():
        raise ValueError(f"the address must be host:port, got {bind!r}")
    return host.strip("[]") or "127.0.0.1", int(port)


def _stop_with_parent() -> None:
    """In the gunicorn child: receive SIGTERM when the front exits (Linux only; elsewhere a no-op)."""
    with contextlib.suppress(OSError, AttributeError):
        ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGTERM)  # PR_SET_PDEATHSIG = 1


async def _run(bind: str, config: str, runtime: str) -> int:
    host, port = split_bind(bind)
    upstream = os.path.join(runtime, "workers.sock")
    front = Front(
        FrontSettings(
            upstream=upstream,
            max_body_bytes=whole_number("LAGWISE_MAX_BODY_BYTES"),
            receive_seconds=float(whole_number("LAGWISE_RECEIVE_SECONDS")),
            max_connections=whole_number("LAGWISE_MAX_CONNECTIONS"),
            max_arrow_bytes=whole_number("LAGWISE_MAX_ARROW_BYTES"),
        )
    )
    server = await asyncio.start_server(front.handle, host, port, limit=1 << 16, backlog=2048)
    command = [
        sys.executable,
        "-m",
        "gunicorn",
        "--config",
        config,
        "--bind",
        f"unix:{upstream}",
        "--control-socket",
        os.path.join(runtime, "control.sock"),
        APP,
    ]
    env = dict(os.environ, LAGWISE_BIND=bind)
    gunicorn = subprocess.Popen(command, env=env, preexec_fn=_stop_with_parent)
    log("front listening", bind=bind, gunicorn_pid=gunicorn.pid)
    loop = asyncio.get_running_loop()

    def forward(sig: int) -> None:
        if gunicorn.poll() is None:
            gunicorn.send_signal(sig)

    def stop(sig: int) -> None:
        server.close()
        forward(sig)

    for sig in FORWARDED_SIGNALS:
        loop.add_signal_handler(sig, forward, sig)
    for sig in STOP_SIGNALS:
        loop.add_signal_handler(sig, stop, sig)
    try:
        return await loop.run_in_executor(None, gunicorn.wait)
    finally:
        server.close()
        await front.drained(5)


def serve(bind: str, config: str = DEFAULT_CONFIG) -> int:
    """Run one instance until gunicorn stops; returns gunicorn's exit status."""
    runtime = tempfile.mkdtemp(prefix="lagwise-serve-")
    try:
        return asyncio.run(_run(bind, config, runtime))
    finally:
        shutil.rmtree(runtime, ignore_errors=True)
