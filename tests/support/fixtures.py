"""Pytest fixtures shared by every test directory (re-exported by tests/conftest.py)."""

from __future__ import annotations
