"""Operations: one documented table of variables, --bind over the environment, one control socket per instance."""

from __future__ import annotations

import os
import re
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

from lagwise.configuration import BY_NAME, markdown_table, value, whole_number

from tests.live import ROOT, free_port, running_service, wait_ready
from tests.reliability.replay import instance_pid

VARIABLE = re.compile(rb"LAGWISE_[A-Z][A-Z0-9_]*[A-Z0-9]")
SOURCES = ["service", "deploy", "client", "manage.py", ".ci"]


def _tracked(path: Path) -> bool:
    return not any(part == "__pycache__" or part.endswith(".egg-info") for part in path.parts)


def test_readme_table_is_the_settings_table():
    readme = (ROOT / "README.md").read_text()
    begin, end = "<!-- settings table: begin -->\n", "<!-- settings table: end -->"
    documented = readme[readme.index(begin) + len(begin) : readme.index(end)]
    assert documented == markdown_table(), "regenerate the README table with `lagwise settings`"


def test_every_variable_the_code_names_is_in_the_table():
    named: set[str] = set()
    for entry in SOURCES:
        path = ROOT / entry
        files = [path] if path.is_file() else [p for p in path.rglob("*") if p.is_file() and _tracked(p)]
        for file in files:
            named |= {m.decode() for m in VARIABLE.findall(file.read_bytes())}
    assert named, "the scan found no variable at all"
    assert sorted(named - set(BY_NAME)) == []


def test_values_fall_back_to_documented_defaults_and_are_checked():
    assert value("LAGWISE_BIND", {}) == "127.0.0.1:8750"
    assert value("LAGWISE_BIND", {"LAGWISE_BIND": "  "}) == "127.0.0.1:8750"
    assert whole_number("LAGWISE_MAX_KRIGING_FLOPS", {}) == 100_000_000_000
    assert whole_number("LAGWISE_WORKERS", {}, fallback=3) == 3
    for bad in ("0", "-2", "many"):
        try:
            whole_number("LAGWISE_WORKERS", {"LAGWISE_WORKERS": bad})
        except ValueError as exc:
            assert "LAGWISE_WORKERS" in str(exc)
        else:
            raise AssertionError(bad)


def _stop(process: subprocess.Popen) -> None:
    if process.poll() is None:
        os.killpg(process.pid, signal.SIGTERM)
        try:
            process.wait(timeout=60)
        except subprocess.TimeoutExpired:
            os.killpg(process.pid, signal.SIGKILL)
            process.wait()


def test_bind_option_wins_over_the_environment(tmp_path):
    wanted, ignored = free_port(), free_port()
    env = dict(os.environ, LAGWISE_BIND=f"127.0.0.1:{ignored}", LAGWISE_WORKERS="1")
    process = subprocess.Popen(
        [sys.executable, "-m", "lagwise.cli", "serve", "--bind", f"127.0.0.1:{wanted}"],
        env=env,
        cwd=tmp_path,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        start_new_session=True,
    )
    try:
        wait_ready(f"http://127.0.0.1:{wanted}", 300, process)
        with socket.socket() as probe:
            assert probe.connect_ex(("127.0.0.1", ignored)) != 0
    finally:
        _stop(process)


def _control_socket(url: str) -> str:
    """Control socket of the gunicorn master of the ``lagwise serve`` instance at ``url``
    (other instances may run on the same machine at the same time)."""
    serve = instance_pid(int(url.rsplit(":", 1)[1]))
    for master in Path(f"/proc/{serve}/task/{serve}/children").read_text().split():
        args = Path(f"/proc/{master}/cmdline").read_bytes().decode(errors="replace").split("\0")
        if "gunicorn" in args and "--control-socket" in args:
            return args[args.index("--control-socket") + 1]
    raise LookupError(url)


def test_instances_do_not_share_a_control_socket():
    with running_service(workers=1) as outer:
        with running_service(workers=1) as inner:
            ours = {_control_socket(outer), _control_socket(inner)}
            assert len(ours) == 2
            deadline = time.monotonic() + 30
            while not all(os.path.exists(p) for p in ours) and time.monotonic() < deadline:
                time.sleep(0.2)
            assert all(os.path.exists(p) for p in ours)
            kept = _control_socket(outer)
        # The inner instance stopped; the outer one's socket is still there.
        assert _control_socket(outer) == kept and os.path.exists(kept)


WARM_UP_INTERRUPTED = """
import os, signal, time
import lagwise.core.warmup
from lagwise.serving import gunicorn_conf

def warm_up_receiving_sigterm():
    os.kill(os.getpid(), signal.SIGTERM)
    time.sleep(10)

signal.signal(signal.SIGTERM, lambda *_: None)  # as a gunicorn master's handler: queue, do not stop
lagwise.core.warmup.warm_kernels = warm_up_receiving_sigterm
gunicorn_conf.post_fork(None, None)
"""


def test_a_worker_stops_on_sigterm_during_its_warm_up(tmp_path):
    """The post-fork hook runs with the master's handlers inherited (gunicorn installs the worker's
    after it): a SIGTERM then must end the worker, not be queued and lost (stopping an instance just
    after a worker restart then waited the whole graceful timeout)."""
    env = dict(os.environ, PROMETHEUS_MULTIPROC_DIR=str(tmp_path))
    done = subprocess.run([sys.executable, "-c", WARM_UP_INTERRUPTED], env=env, capture_output=True, timeout=60)
    assert done.returncode == -signal.SIGTERM, (done.returncode, done.stderr[-2000:])
