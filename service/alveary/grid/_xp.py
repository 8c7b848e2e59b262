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


_COMMON = ("sin", "cos", "sqrt", "hypot", "floor", "radians", "degrees", "copysign")

#: numpy's functions, for arrays.
ARRAYS: Any = SimpleNamespace(
    **{name: getattr(np, name) for name in _COMMON},
    arcsin=np.arcsin,
    arccos=np.arccos,
    arctan2=np.arctan2,
    abs=np.abs,
    rint=np.rint,
    maximum=np.maximum,
    clip=_clip_arrays,
    where=np.where,
)

#: The math module's, under numpy's names, for single Python floats.
FLOATS: Any = SimpleNamespace(
    **{name: getattr(math, name) for name in _COMMON},
    arcsin=math.asin,
    arccos=math.acos,
    arctan2=math.atan2,
    abs=abs,
    rint=round,
    maximum=max,
    clip=_clip_float,
    where=_where_float,
)
