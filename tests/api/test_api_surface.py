"""The public surface of the query, api and client packages: a sorted ``__all__`` that is
exactly what each package exports (common practice, as in httpx)."""

from __future__ import annotations

import importlib
import types

import pytest


@pytest.mark.parametrize("name", ["alveary.query", "alveary.api", "alveary.client"])
def test_all_is_sorted_and_complete(name):
    module = importlib.import_module(name)
    exported = module.__all__
    # isort-style order (as ruff's RUF022 keeps it): CONSTANTS, Classes, functions.
    assert exported == sorted(exported, key=lambda n: (not n.isupper(), not n[:1].isupper(), n))
    public = {
        k
        for k, v in vars(module).items()
        if not k.startswith("_") and not isinstance(v, types.ModuleType) and k != "annotations"
    }
    assert public == set(exported)
