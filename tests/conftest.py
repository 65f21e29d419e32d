"""Shared fixtures: apps built by the factory with their own settings, and sample sets."""

from __future__ import annotations

import numpy as np
import pytest
from flask import Flask
from lagwise.api import create_app
from lagwise.api.settings import Settings
from lagwise.core.limits import Limits
from threadpoolctl import threadpool_limits

from tests.contract_check import TALLY, ContractClient


@pytest.fixture(autouse=True, scope="session")
def _responses_obey_the_contract():
    """Every Flask test client of the session checks each response against openapi/openapi.yaml."""
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(Flask, "test_client_class", ContractClient)
        yield


@pytest.fixture(autouse=True, scope="session")
def _one_blas_thread():
    """BLAS runs on one thread in the test process, as in each service worker (gunicorn_conf pins it):
    OpenBLAS threads spinning against numba's threads and other processes made one 600 x 600 Cholesky
    factorisation some 30 times slower on a busy 2-core machine (0.25 s instead of 0.008 s)."""
    with threadpool_limits(limits=1, user_api="blas"):
        yield


def pytest_sessionfinish(session):
    """In a pytest-xdist worker: hand this process's contract tally to the controller."""
    output = getattr(session.config, "workeroutput", None)
    if output is not None:
        output["contract_tally"] = dict(TALLY)


@pytest.hookimpl(optionalhook=True)
def pytest_testnodedown(node, error):
    """In the pytest-xdist controller: add a finished worker's contract tally to the session's."""
    for key, count in getattr(node, "workeroutput", {}).get("contract_tally", {}).items():
        TALLY[key] += count


def pytest_terminal_summary(terminalreporter):
    if TALLY["checked"]:
        terminalreporter.write_line(
            f"contract: {TALLY['checked']} responses checked against openapi/openapi.yaml, "
            f"{TALLY['mismatches']} mismatches"
        )


@pytest.fixture(scope="session")
def app():
    return create_app({"TESTING": True}, settings=Settings())


@pytest.fixture()
def client(app):
    return app.test_client()


@pytest.fixture()
def small_limits_client():
    settings = Settings(
        max_body_bytes=4096,
        limits=Limits(
            max_samples=50,
            max_pairs=500,
            max_median_pairs=100,
            max_scatter_pairs=10,
            max_map_cells=11,
            max_unique_samples=30,
        ),
    )
    return create_app({"TESTING": True}, settings=settings).test_client()


@pytest.fixture()
def rng():
    return np.random.default_rng(12345)


def random_columns(rng, n=200, dim=2, side=100.0):
    """Uniform random samples in a square (or cube) with normal values."""
    cols = {"x": rng.uniform(0, side, n).tolist(), "values": rng.normal(10.0, 2.0, n).tolist()}
    if dim >= 2:
        cols["y"] = rng.uniform(0, side, n).tolist()
    if dim == 3:
        cols["z"] = rng.uniform(0, side / 4, n).tolist()
    return cols
