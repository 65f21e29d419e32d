from __future__ import annotations

import pytest

from tests.live import running_service


@pytest.fixture(scope="session")
def service_url():
    with running_service({"LAGWISE_MAX_SAMPLES": "5000"}) as url:
        yield url
