"""Zone identifiers: one unsigned 64-bit integer per zone, and a short text form.

Bit layout at refinement level r (n = 2**r)::

    id = 1 << (2r + 4)  |  region << (2r + 1)  |  i << r  |  j

``region`` is 0..4 for the five strips and 5 / 6 for the northern / southern apex,
``i`` in [0, 2n) is the strip row and ``j`` in [0, n) the column (both 0 for an apex).
The highest set bit encodes the level, so ids of different levels never collide, 0 is
never an id, and every id up to level 24 is below 2**53 (exact as a JSON number).

The text form is ``<level><strip letter a-e>-<row>-<column>``, e.g. ``"12b-3021-877"``,
and ``"12n"`` / ``"12s"`` for the apexes.
"""

from __future__ import annotations

import re
from typing import Any

import numpy as np
import numpy.typing as npt

from alveary._errors import GridError

Ids = npt.NDArray[np.uint64]
Ints = npt.NDArray[np.int64]
Bools = npt.NDArray[np.bool_]

MAX_LEVEL = 24
NORTH, SOUTH = 5, 6
_LETTERS = "abcdens"
_TEXT = re.compile(r"^(\d{1,2})([a-e])-(\d+)-(\d+)$|^(\d{1,2})([ns])$")


def check_level(level: Any, parameter: str = "level") -> int:
    """Validate a refinement level and return it as an int."""
    try:
        value = int(level)
        ok = value == level and 0 <= value <= MAX_LEVEL
    except (TypeError, ValueError, OverflowError):
        ok = False
    if not ok or isinstance(level, bool):
        raise GridError(parameter, level, f"an integer in [0, {MAX_LEVEL}]")
    return value


def encode(level: Any, region: Any, i: Any, j: Any) -> Ids:
    """Ids from (level, region, i, j); arguments broadcast, no validation."""
    level = np.asarray(level, dtype=np.uint64)
    two = np.uint64(2)
    one = np.uint64(1)
    out: Ids = (
        (one << (two * level + np.uint64(4)))
        | (np.asarray(region, dtype=np.uint64) << (two * level + one))
        | (np.asarray(i, dtype=np.uint64) << level)
        | np.asarray(j, dtype=np.uint64)
    )
    return out


def first_bad(mask: Bools) -> int | tuple[int, ...]:
    """Position of the first True in a mask: an int for 1-d arrays, else a tuple."""
    where = np.argwhere(mask)[0]
    return int(where[0]) if where.size == 1 else tuple(int(w) for w in where)


def refuse(parameter: str, arr: npt.NDArray[Any], bad: Bools, allowed: str) -> GridError:
    """The error for the first bad element of an argument (its position for arrays)."""
    index = None if arr.ndim == 0 else first_bad(bad)
    return GridError(parameter, pick(arr, bad), allowed, index=index)


def as_zones(zones: Any, parameter: str = "zones") -> Ids:
    """Validate zone ids and return them as a uint64 array (same shape)."""
    arr = np.asarray(zones)
    if arr.dtype.kind in "US" or arr.dtype == object:
        raise GridError(parameter, scalar(arr), "uint64 zone ids (use zone_from_text for text)")
    if arr.dtype.kind == "f":
        bad = ~np.isfinite(arr) | (arr != np.floor(arr)) | (arr <= 0) | (arr >= 2.0**53)
        if bad.any():
            raise refuse(parameter, arr, bad, "a valid zone id")
    elif arr.dtype.kind == "i":
        if (arr <= 0).any():
            raise refuse(parameter, arr, arr <= 0, "a valid zone id")
    elif arr.dtype.kind != "u":
        raise GridError(parameter, scalar(arr), "uint64 zone ids")
    ids: Ids = arr.astype(np.uint64)
    bad = _decode_unchecked(ids)[4]
    if bad.any():
        raise refuse(parameter, ids, bad, "a valid zone id")
    return ids


def scalar(arr: npt.NDArray[Any]) -> Any:
    return arr.item() if arr.size == 1 else arr.ravel()[0].item() if arr.size else arr


def pick(arr: npt.NDArray[Any], bad: Bools) -> Any:
    value = arr[bad].ravel()[0] if arr.ndim else arr
    return value.item() if hasattr(value, "item") else value


def _decode_unchecked(ids: Ids) -> tuple[Ints, Ints, Ints, Ints, Bools]:
    big = ids >= np.uint64(1 << 53)
    safe = np.where(big | (ids == 0), np.uint64(1 << 4), ids)
    _, exponent = np.frexp(safe.astype(np.float64))  # bit length; exact below 2**53
    twice = exponent.astype(np.int64) - 5
    level = twice // 2
    bad = big | (ids == 0) | (twice < 0) | (twice % 2 == 1)
    level = np.where(bad, 0, level)
    lv = level.astype(np.uint64)
    one = np.uint64(1)
    region = ((safe >> (np.uint64(2) * lv + one)) & np.uint64(7)).astype(np.int64)
    i = ((safe >> lv) & ((one << (lv + one)) - one)).astype(np.int64)
    j = (safe & ((one << lv) - one)).astype(np.int64)
    apex = region >= NORTH
    bad |= (region > SOUTH) | (apex & ((i != 0) | (j != 0)))
    return level, region, i, j, bad


def decode(ids: Ids) -> tuple[Ints, Ints, Ints, Ints]:
    """(level, region, i, j) int64 arrays of validated uint64 ids."""
    level, region, i, j, _ = _decode_unchecked(ids)
    return level, region, i, j


def decode_int(zone: int) -> tuple[int, int, int, int] | None:
    """(level, region, i, j) of one id as a Python int, or None if it is not a zone id."""
    if zone <= 0 or zone >= 1 << 53:
        return None
    twice = zone.bit_length() - 5
    if twice < 0 or twice % 2:
        return None
    level = twice // 2
    region = (zone >> (2 * level + 1)) & 7
    i = (zone >> level) & ((1 << (level + 1)) - 1)
    j = zone & ((1 << level) - 1)
    if region > SOUTH or (region >= NORTH and (i or j)):
        return None
    return level, region, i, j


def encode_int(level: int, region: int, i: int, j: int) -> int:
    """One id from (level, region, i, j), as a Python int; no validation."""
    return 1 << (2 * level + 4) | region << (2 * level + 1) | i << level | j


def text_of(level: int, region: int, i: int, j: int) -> str:
    """The text form of one zone."""
    if region >= NORTH:
        return f"{level}{_LETTERS[region]}"
    return f"{level}{_LETTERS[region]}-{i}-{j}"


def to_text(ids: Ids) -> npt.NDArray[np.object_] | np.str_:
    level, region, i, j = decode(ids)
    flat = [
        text_of(*fields)
        for fields in zip(
            level.ravel().tolist(),
            region.ravel().tolist(),
            i.ravel().tolist(),
            j.ravel().tolist(),
            strict=True,
        )
    ]
    return np.array(flat, dtype=object).reshape(ids.shape) if ids.ndim else np.str_(flat[0])


def from_text(texts: Any) -> Ids:
    arr = np.asarray(texts, dtype=object)
    out = np.empty(arr.shape, dtype=np.uint64)
    for idx, text in np.ndenumerate(arr):
        where = None if arr.ndim == 0 else (idx[0] if len(idx) == 1 else idx)
        m = _TEXT.match(text) if isinstance(text, str) else None
        if m is None:
            raise GridError("texts", text, "text like '12b-3021-877' or '12n'", index=where)
        if m.group(1) is not None:
            level, region = int(m.group(1)), _LETTERS.index(m.group(2))
            i, j = int(m.group(3)), int(m.group(4))
        else:
            level, region, i, j = int(m.group(5)), _LETTERS.index(m.group(6)), 0, 0
        n = 1 << level
        if level > MAX_LEVEL or i >= 2 * n or j >= n:
            raise GridError(
                "texts",
                text,
                f"level <= {MAX_LEVEL}, row < 2^(level+1), column < 2^level",
                index=where,
            )
        out[idx] = encode_int(level, region, i, j)
    return out
