"""Checks of CoverageJSON documents shared by the tests: the covjson-pydantic models
(KNMI's models of OGC 21-069r2) and the NdArray shape rules of the specification."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import orjson
from covjson_pydantic.coverage import Coverage

__all__ = ["axis_length", "checked_coverage", "range_array"]


def axis_length(axis: dict[str, Any]) -> int:
    return axis["num"] if "num" in axis else len(axis["values"])


def checked_coverage(body: bytes) -> dict[str, Any]:
    """Validate a CoverageJSON body with covjson-pydantic, check that every range's shape
    matches the domain's axes (OGC 21-069r2 §7.2/§7.4: axisNames are domain axes, shape
    is their lengths, axes left out have one value, values has prod(shape) members) and
    that the ``t`` axis has a bounds pair per value; return the parsed document."""
    Coverage.model_validate_json(body)  # raises on any violation of the models
    doc = orjson.loads(body)
    axes = doc["domain"]["axes"]
    assert set(doc["ranges"]) == set(doc["parameters"])
    for name, nd in doc["ranges"].items():
        assert nd["type"] == "NdArray", name
        assert set(nd["axisNames"]) <= set(axes), name
        assert nd["shape"] == [axis_length(axes[a]) for a in nd["axisNames"]], name
        assert len(nd["values"]) == math.prod(nd["shape"]), name
        for a in set(axes) - set(nd["axisNames"]):
            assert axis_length(axes[a]) == 1, (name, a)
    t = axes["t"]
    assert len(t["bounds"]) == 2 * len(t["values"])
    assert t["bounds"][0::2] == t["values"]
    return doc


def range_array(doc: dict[str, Any], name: str) -> np.ndarray:
    """A range as a float array of its shape, null as NaN."""
    nd = doc["ranges"][name]
    values = [np.nan if v is None else v for v in nd["values"]]
    return np.array(values, dtype=float).reshape(nd["shape"])
