"""Contract fuzzing with schemathesis: every operation, positive and negative data.

Live against gunicorn (default run: schemathesis' examples and coverage phases whole, at most
10 examples per operation in its fuzzing phase, then its stateful phase) and in-process
against the Flask app (default run: 25 generated examples per operation); the long runs
(marked slow) use 300 examples per operation. The in-process tests generate only: the
examples and coverage cases are the same in-process and live (derived from the contract
alone), so they run once, live, through the front and gunicorn. The checks: no server
error, responses and problems match the documented schemas, statuses and media types, and
data that violates the schema is refused.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest
import schemathesis
from hypothesis import HealthCheck, Phase, settings
from lagwise.api import create_app
from lagwise.api.settings import Settings
from lagwise.core.limits import Limits
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    negative_data_rejection,
    response_schema_conformance,
    status_code_conformance,
)

from tests.live import running_service

CHECKS = [
    not_a_server_error,
    status_code_conformance,
    content_type_conformance,
    response_schema_conformance,
    negative_data_rejection,
]
# Small limits keep generated requests cheap; refusals over a limit are documented 422s.
SMALL = Settings(
    limits=Limits(max_samples=300, max_pairs=200_000, max_targets=2000, max_unique_samples=200, max_kriging_flops=10**9)
)
# No explicit phase: schemathesis attaches the examples and coverage cases as explicit examples,
# built while collecting (about 18 s of CPU per parametrised test, in every run whether the test
# is selected or not) and run at some 1,000 cases per operation; test_live runs them.
FUZZ = dict(
    deadline=None,
    suppress_health_check=list(HealthCheck),
    derandomize=True,
    phases=[Phase.generate, Phase.target, Phase.shrink],
)

app = create_app({"TESTING": True}, settings=SMALL)
in_process = schemathesis.openapi.from_wsgi("/openapi.json", app)


@in_process.parametrize()
@settings(max_examples=25, **FUZZ)
def test_in_process(case):
    case.call_and_validate(checks=CHECKS)


@pytest.mark.slow
@in_process.parametrize()
@settings(max_examples=300, **FUZZ)
def test_in_process_long(case):
    case.call_and_validate(checks=CHECKS)


LIVE_ENV = {
    "LAGWISE_MAX_SAMPLES": "300",
    "LAGWISE_MAX_PAIRS": "200000",
    "LAGWISE_MAX_TARGETS": "2000",
    "LAGWISE_MAX_UNIQUE_SAMPLES": "200",
    "LAGWISE_MAX_KRIGING_FLOPS": "1000000000",
}
CHECK_NAMES = "not_a_server_error,status_code_conformance,content_type_conformance,response_schema_conformance,negative_data_rejection"


def _run_live(examples: int, timeout: float = 1800) -> None:
    """schemathesis' own runner against real gunicorn on 127.0.0.1: every operation, positive and
    negative data, all four phases (examples, coverage, fuzzing, stateful, whose links schemathesis
    infers); prints its summary (operations tested, test cases generated, failures)."""
    cli = Path(sys.executable).with_name("schemathesis")
    with running_service(LIVE_ENV) as url:
        out = subprocess.run(
            [
                str(cli),
                "run",
                url + "/openapi.json",
                "--checks",
                CHECK_NAMES,
                "--mode",
                "all",
                "--phases",
                "examples,coverage,fuzzing,stateful",
                "--max-examples",
                str(examples),
                "--seed",
                "7",
                "--workers",
                "2",
                "--request-timeout",
                "90",
            ],
            capture_output=True,
            text=True,
            timeout=timeout,
        )
    summary = out.stdout.find("SUMMARY")
    print("\n" + out.stdout[max(summary - 40, 0) :] if summary >= 0 else out.stdout[-3000:])
    assert out.returncode == 0, out.stdout[-4000:] + out.stderr[-2000:]


def test_live():
    _run_live(10)


@pytest.mark.slow
def test_live_long():
    _run_live(300, timeout=5400)
