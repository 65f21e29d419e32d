#!/usr/bin/env python3
"""Set up and run Lagwise on a fresh machine with only python3.

python3 manage.py run        create .venv, start the service, run the demo, keep serving
python3 manage.py test       create .venv and run the default test suite
python3 manage.py test-slow  the long suites (marked slow)
python3 manage.py bench      the benchmarks under bench/
python3 manage.py openapi    regenerate openapi/openapi.yaml
python3 manage.py lint       ruff over the whole tree
"""

from __future__ import annotations

import hashlib
import os
import signal
import subprocess
import sys
import venv
from pathlib import Path

ROOT = Path(__file__).resolve().parent
VENV = ROOT / ".venv"
BIN = VENV / "bin"
PYTHON = BIN / "python"
STAMP = VENV / ".lagwise-installed"
sys.path.insert(0, str(ROOT / "deploy"))

from cluster import wait_ready  # noqa: E402  (standard library only, like this script)

PORT = int(os.environ.get("LAGWISE_PORT", "8750"))


def _requirements_digest() -> str:
    digest = hashlib.sha256()
    for name in ("pyproject.toml", "client/pyproject.toml"):
        digest.update((ROOT / name).read_bytes())
    return digest.hexdigest()


def ensure_environment() -> None:
    """Create .venv and install the service, the client and the test tools (once per change)."""
    if not PYTHON.exists():
        print("creating .venv ...", flush=True)
        venv.EnvBuilder(with_pip=True).create(VENV)
    wanted = _requirements_digest()
    if STAMP.exists() and STAMP.read_text() == wanted:
        return
    print("installing lagwise and lagwise-client into .venv ...", flush=True)
    pip = [str(PYTHON), "-m", "pip", "install", "--quiet", "--disable-pip-version-check"]
    subprocess.run(pip + ["-e", f"{ROOT}[test]", "-e", str(ROOT / "client")], check=True)
    STAMP.write_text(wanted)


def _interrupt(*_):
    raise KeyboardInterrupt


def run() -> int:
    ensure_environment()
    signal.signal(signal.SIGTERM, _interrupt)
    url = f"http://127.0.0.1:{PORT}"
    env = dict(os.environ, LAGWISE_BIND=f"127.0.0.1:{PORT}")
    # The demo's twelve-analyte batch is one request of about a minute of CPU (estimated at
    # about 160 s of one core): more than the default deadline and analysis estimate (60 s)
    # allow. Settings given by the caller win.
    env.setdefault("LAGWISE_DEADLINE_SECONDS", "600")
    env.setdefault("LAGWISE_MAX_ANALYSIS_SECONDS", "600")
    print(f"starting the service on {url} (first start compiles the kernels; later starts load them) ...", flush=True)
    service = subprocess.Popen([str(BIN / "lagwise"), "serve"], env=env, cwd=ROOT)
    try:
        try:
            wait_ready(url, 600.0, service)
        except RuntimeError as exc:
            raise SystemExit(str(exc)) from None
        subprocess.run(
            [str(BIN / "lagwise"), "demo", "--url", url, "--out", str(ROOT / "reports" / "elmsworth")], check=True
        )
        print(
            f"\nThe service keeps running on {url} (OpenAPI at {url}/openapi.json). Press Ctrl-C to stop.", flush=True
        )
        service.wait()
    except KeyboardInterrupt:
        print("\nstopping ...")
    finally:
        if service.poll() is None:
            service.terminate()
            service.wait(timeout=60)
    return 0


def _parallel() -> list[str]:
    """pytest-xdist options: two test processes where there are two cores (one process left the
    second core mostly idle: pip installs, numba compiling, most tests run on one thread); a module's
    tests stay in one process, so each module-scoped service starts once."""
    processes = min(2, os.cpu_count() or 1)
    return ["-n", str(processes), "--dist", "loadscope"] if processes > 1 else []


def pytest(*args: str) -> int:
    ensure_environment()
    return subprocess.run([str(PYTHON), "-m", "pytest", *args], cwd=ROOT).returncode


def main(argv: list[str]) -> int:
    command = argv[0] if argv else "help"
    rest = argv[1:]
    if command == "run":
        return run()
    if command == "test":
        # --durations: every CI log names the slowest tests, so a creeping suite is seen early.
        return pytest("-q", "--durations=15", *_parallel(), *rest)
    if command == "test-slow":
        return pytest("-q", "--durations=15", "-m", "slow", *rest)
    if command == "bench":
        ensure_environment()
        return subprocess.run([str(PYTHON), str(ROOT / "bench" / "run.py"), *rest], cwd=ROOT).returncode
    if command == "openapi":
        ensure_environment()
        return subprocess.run([str(BIN / "lagwise"), "openapi"], cwd=ROOT).returncode
    if command == "cluster":
        ensure_environment()
        os.execv(str(PYTHON), [str(PYTHON), str(ROOT / "deploy" / "cluster.py"), *rest])
    if command == "lint":
        ensure_environment()
        trees = ["service", "client", "tests", "bench", "deploy", "manage.py"]
        steps = [
            [str(BIN / "ruff"), "check", *trees],
            [str(BIN / "ruff"), "format", "--check", *trees],
            [str(BIN / "mypy")],
        ]
        return max(subprocess.run(step, cwd=ROOT).returncode for step in steps)
    print(__doc__)
    return 0 if command == "help" else 2


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
