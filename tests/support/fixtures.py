"""Pytest fixtures shared by every test directory (re-exported by tests/conftest.py)."""

from __future__ import annotations

import pytest

from support.s3 import S3Server


@pytest.fixture(scope="session")
def s3_server():
    """A real S3-protocol server (moto_server) on 127.0.0.1, for the whole session.

    ``s3_server.mark()`` / ``s3_server.requests(since=mark)`` give the requests it
    logged; ``s3_server.create_bucket()`` makes a fresh bucket.
    """
    server = S3Server().start()
    try:
        yield server
    finally:
        server.stop()


from support.service_fixtures import *  # noqa: E402, F403  (HTTP service fixtures)
