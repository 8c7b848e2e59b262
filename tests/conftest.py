"""Shared fixtures. Servers the tests need are started here, on 127.0.0.1 only."""

from support.fixtures import *  # noqa: F403
