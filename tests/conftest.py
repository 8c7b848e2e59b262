"""Shared fixtures. Servers the tests need are started here, on 127.0.0.1 only.

Every test that uses a server fixture is marked ``server``; ``make test-fast`` leaves those
out (``-m "not server"``).
"""

import pytest

from support.fixtures import *  # noqa: F403

_SERVER_FIXTURES = {
    "s3_server",
    "analytic_store",
    "service",
    "alveary_service",
}


def pytest_collection_modifyitems(items: list[pytest.Item]) -> None:
    for item in items:
        if _SERVER_FIXTURES & set(getattr(item, "fixturenames", ())):
            item.add_marker(pytest.mark.server)
