"""Fixtures of the query-layer unit tests."""

from __future__ import annotations

import pytest

from support.memcube import MemoryCube


@pytest.fixture
def memory_cube():
    return MemoryCube()
