"""The wheel alone: built from a copy of the sources, installed in a fresh virtual environment
outside the checkout, ``lagwise serve`` answers liveness and computes.

pip fetches the dependencies from the package index or its local cache, as an operator's
install would. The first start compiles the kernels in the new environment (about a minute).
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import urllib.request
import venv

from tests.live import ROOT, free_port, wait_ready

PIP = ["-m", "pip", "--disable-pip-version-check", "--quiet"]


def _run(*command, **kwargs) -> subprocess.CompletedProcess:
    done = subprocess.run([str(c) for c in command], capture_output=True, text=True, timeout=1200, **kwargs)
    assert done.returncode == 0, done.stdout[-2000:] + done.stderr[-4000:]
    return done


def test_installed_wheel_serves(tmp_path):
    source = tmp_path / "source"
    source.mkdir()
    shutil.copy(ROOT / "pyproject.toml", source)
    shutil.copy(ROOT / "README.md", source)
    shutil.copytree(ROOT / "service", source / "service", ignore=shutil.ignore_patterns("__pycache__", "*.egg-info"))
    wheels = tmp_path / "wheels"
    _run(sys.executable, *PIP, "wheel", "--no-deps", "--wheel-dir", wheels, source)
    (wheel,) = wheels.glob("lagwise-*.whl")

    environment = tmp_path / "venv"
    venv.EnvBuilder(with_pip=True).create(environment)
    python = environment / "bin" / "python"
    clean = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "VIRTUAL_ENV", "PYTHONHOME")}
    _run(python, *PIP, "install", wheel, env=clean, cwd=tmp_path)
    where = _run(python, "-c", "import lagwise; print(lagwise.__file__)", env=clean, cwd=tmp_path).stdout
    assert where.startswith(str(environment)), where

    port = free_port()
    url = f"http://127.0.0.1:{port}"
    log = open(tmp_path / "serve.log", "w")
    env = dict(clean, LAGWISE_WORKERS="1", NUMBA_CACHE_DIR=str(tmp_path / "numba-cache"))
    process = subprocess.Popen(
        [environment / "bin" / "lagwise", "serve", "--bind", f"127.0.0.1:{port}"],
        env=env,
        cwd=tmp_path,
        stdout=log,
        stderr=log,
        start_new_session=True,
    )
    try:
        wait_ready(url, 600, process)
        with urllib.request.urlopen(url + "/healthz", timeout=5) as answer:
            assert json.load(answer) == {"status": "alive"}
        body = {"samples": {"x": [0, 1, 2, 3, 4], "values": [1, 3, 2, 5, 4]}, "lags": {"edges": [0.5, 1.5, 2.5]}}
        request = urllib.request.Request(
            url + "/v1/experimental-variograms",
            data=json.dumps(body).encode(),
            headers={"Content-Type": "application/json"},
        )
        with urllib.request.urlopen(request, timeout=60) as answer:
            document = json.load(answer)
        # Semivariance by hand (Matheron's estimator): lag 1 pairs (1,3),(3,2),(2,5),(5,4) -> (4+1+9+1)/(2*4).
        assert [c["value"] for c in document["directions"][0]["classes"]] == [1.875, 1.5]
    finally:
        if process.poll() is None:
            os.killpg(process.pid, signal.SIGTERM)
            try:
                process.wait(timeout=60)
            except subprocess.TimeoutExpired:
                os.killpg(process.pid, signal.SIGKILL)
                process.wait()
        log.close()
    assert process.returncode == 0, (tmp_path / "serve.log").read_text()[-3000:]
