"""End-to-end fixtures: a cube of an analytic field on the S3-protocol test server, served
by a real ``alveary serve`` process on 127.0.0.1.

The field is written at zone centres (what a nearest-neighbour ingest of the continuous
field gives), so every answer can be checked against ``field`` evaluated independently
at the centres the service reports.
"""

from __future__ import annotations

import pytest

from support.analytic import build_cube


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
    from support.server import ServiceProcess

    url, options = analytic_store
    cubes = [{"id": "analytic", "url": url, "title": "Analytic", "storage_options": options}]
    proc = ServiceProcess(cubes, options={"refresh_interval": 0.5, "max_zones": 60_000})
    proc.start()
    try:
        yield proc
    finally:
        proc.stop()
