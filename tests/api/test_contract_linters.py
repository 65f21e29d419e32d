"""Two independent OpenAPI linters find no error (and no warning) in the committed contract.

Redocly CLI with its recommended rules and Spectral with its OpenAPI ruleset (spectral:oas).
"""

from __future__ import annotations

import shutil
from pathlib import Path

from tests.npm_tools import run_tool

COMMITTED = Path(__file__).resolve().parents[2] / "openapi" / "openapi.yaml"


def _copy(tmp_path: Path) -> Path:
    shutil.copy(COMMITTED, tmp_path / "openapi.yaml")
    return tmp_path


def test_redocly_recommended_rules(tmp_path):
    out = run_tool("redocly", "lint", "openapi.yaml", "--format=stylish", cwd=_copy(tmp_path))
    report = out.stdout + out.stderr
    assert out.returncode == 0, report
    assert "Your API description is valid" in report and " warning " not in report and " error " not in report, report


def test_spectral_openapi_ruleset(tmp_path):
    folder = _copy(tmp_path)
    (folder / ".spectral.yaml").write_text('extends: ["spectral:oas"]\n')
    out = run_tool("spectral", "lint", "openapi.yaml", "-r", ".spectral.yaml", "-f", "text", cwd=folder)
    report = out.stdout + out.stderr
    assert out.returncode == 0, report
    assert "No results with a severity of 'error' found!" in report and " warning " not in report, report
