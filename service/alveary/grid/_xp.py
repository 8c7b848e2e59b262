"""One formula, two kinds of number: numpy arrays, or one Python float at a time.

The grid's formulas are written once against a small namespace of math functions with
numpy's names. ``ARRAYS`` is numpy's; ``FLOATS`` is the math module's, for single points,
where numpy's overhead per call (about a microsecond for each of some hundred small
operations) would cost far more than the arithmetic.
"""

from __future__ import annotations

import math
from types import SimpleNamespace
from typing import Any

import numpy as np


def _clip_arrays(x: Any, lo: Any, hi: Any) -> Any:
    """np.clip without its wrapper's overhead."""
    return np.minimum(np.maximum(x, lo), hi)


def _clip_float(x: Any, lo: Any, hi: Any) -> Any:
    return min(max(x, lo), hi)


def _where_float(cond: Any, a: Any, b: Any) -> Any:
    return a if cond else b


# Functions of the same name in numpy and the math module.
_SAME = ("sin", "cos", "sqrt", "hypot", "floor", "radians", "degrees", "copysign")
# numpy's names for the others, with their counterparts for one Python float.
_RENAMED: dict[str, Any] = {"arcsin": math.asin, "arccos": math.acos, "arctan2": math.atan2}
_RENAMED |= {"abs": abs, "rint": round, "maximum": max, "where": _where_float}

#: numpy's functions, for arrays (``clip`` without np.clip's wrapper overhead).
ARRAYS: Any = SimpleNamespace(**{n: getattr(np, n) for n in (*_SAME, *_RENAMED)})
ARRAYS.clip = _clip_arrays

#: The math module's, under numpy's names, for single Python floats.
FLOATS: Any = SimpleNamespace(**{n: getattr(math, n) for n in _SAME}, **_RENAMED)
FLOATS.clip = _clip_float
