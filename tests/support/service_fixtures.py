"""Fixtures for end-to-end tests of the HTTP service (re-exported by support.fixtures).

``analytic_store`` is a cube of an analytic field on the S3-protocol test server;
``service`` a real ``alveary serve`` (uvicorn) process on 127.0.0.1 serving it;
``alveary_service`` a factory for more such processes, stopped at the end of the test.
"""

from __future__ import annotations

import pytest

from support.analytic import build_cube
from support.server import ServiceProcess

__all__ = ["alveary_service", "analytic_store", "service"]


@pytest.fixture(scope="session")
def analytic_store(s3_server):
    """(url, storage_options) of the analytic cube on the S3 test server."""
    bucket = s3_server.create_bucket()
    url = f"s3://{bucket}/analytic"
    options = s3_server.storage_options()
    build_cube(url, options)
    return url, options


@pytest.fixture(scope="session")
def service(analytic_store):
    """A real ``alveary serve`` process serving the analytic cube (session-wide)."""
    url, options = analytic_store
    cubes = [{"id": "analytic", "url": url, "title": "Analytic", "storage_options": options}]
    proc = ServiceProcess(cubes, options={"refresh_interval": 0.5, "max_zones": 60_000})
    proc.start()
    try:
        yield proc
    finally:
        proc.stop()


@pytest.fixture
def alveary_service():
    """Start ``ServiceProcess(*args, **kwargs)`` processes; all are stopped afterwards."""
    started: list[ServiceProcess] = []

    def start(*args, **kwargs) -> ServiceProcess:
        proc = ServiceProcess(*args, **kwargs).start()
        started.append(proc)
        return proc

    try:
        yield start
    finally:
        for proc in started:
            proc.stop()
