"""The npm tools of the contract tests, installed once into a cache folder (keyed by tests/npm/package.json).

Tests that need them skip with a message when npm (or node) is absent. The folder is
``$LAGWISE_NPM_CACHE`` or ``~/.cache/lagwise/npm-<digest>``.
"""

from __future__ import annotations

import fcntl
import hashlib
import os
import shutil
import subprocess
from pathlib import Path

import pytest

PACKAGE_JSON = Path(__file__).resolve().parent / "npm" / "package.json"
QUIET = {"REDOCLY_TELEMETRY": "off", "NO_UPDATE_NOTIFIER": "1", "NPM_CONFIG_UPDATE_NOTIFIER": "false"}


def tools_folder() -> Path:
    """The folder holding ``node_modules`` with the pinned tools (installed on first use)."""
    if shutil.which("npm") is None or shutil.which("node") is None:
        pytest.skip("npm and node are not installed: the npm-based contract checks are skipped")
    digest = hashlib.sha256(PACKAGE_JSON.read_bytes()).hexdigest()[:12]
    default = Path.home() / ".cache" / "lagwise" / f"npm-{digest}"
    folder = Path(os.environ.get("LAGWISE_NPM_CACHE", default))
    stamp = folder / ".installed"
    folder.mkdir(parents=True, exist_ok=True)
    # One installer at a time: parallel test processes (pytest-xdist) may ask at once.
    with open(folder.with_name(folder.name + ".lock"), "w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        if not stamp.exists():
            shutil.copy(PACKAGE_JSON, folder / "package.json")
            subprocess.run(
                ["npm", "install", "--no-audit", "--no-fund", "--loglevel=error"],
                cwd=folder,
                check=True,
                timeout=900,
                env={**os.environ, **QUIET},
            )
            stamp.write_text(digest)
    return folder


def run_tool(name: str, *args: str, cwd: Path, timeout: float = 300) -> subprocess.CompletedProcess:
    """Run one of the installed tools' executables in ``cwd``."""
    executable = tools_folder() / "node_modules" / ".bin" / name
    return subprocess.run(
        [str(executable), *args],
        cwd=cwd,
        capture_output=True,
        text=True,
        timeout=timeout,
        env={**os.environ, **QUIET},
    )
