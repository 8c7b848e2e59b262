"""Which interval each time step of a cube stands for, and the steps a ``datetime`` meets.

A cube's time axis lists instants. A step holds from its own instant until the next
step's, the same rule by which the native API answers an instant with "the step in force
then", so step ``i`` stands for the half-open interval ``[t[i], t[i + 1])``. The last step
holds for as long as the step before it did: one more calendar month (or year) when the
axis steps by whole months at midnight on the first, otherwise the last spacing again. A
cube of a single step stands for that instant alone, ``[t, t]``.

OGC API - EDR selects the steps whose intervals *intersect* a ``datetime`` parameter
(OGC 19-086r6, /req/core/datetime-response): an instant selects the step in force at
that instant, an interval every step that overlaps it, and no parameter every step.
"""

from __future__ import annotations

import functools

import numpy as np

from alveary.query._time import TimeSpec

__all__ = ["select_steps", "step_bounds"]


def _upper_of_last(axis: np.ndarray) -> np.datetime64:
    """The end of the last step of an ascending ``datetime64[s]`` axis of >= 2 steps."""
    months = axis.astype("datetime64[M]")
    if np.array_equal(months.astype("datetime64[s]"), axis):
        number = months.astype(np.int64)
        spacing = np.diff(number)
        if spacing.size and np.all(spacing == spacing[0]):
            end = months[-1] + np.timedelta64(int(spacing[0]), "M")
            return np.datetime64(end, "s")
    last: np.datetime64 = axis[-1] + (axis[-1] - axis[-2])
    return last


def step_bounds(times: np.ndarray, axis: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Start and end (``datetime64[s]``) of the interval each step stands for.

    Parameters
    ----------
    times:
        The steps to describe (ascending ``datetime64``), a part of ``axis``.
    axis:
        The cube's whole time axis; the end of a step is where the next step of the cube
        begins, so it depends on the axis, not only on the steps selected. Default:
        ``times`` itself.

    Examples
    --------
    >>> days = np.array(["2025-01-01", "2025-01-02", "2025-01-03"], dtype="datetime64[s]")
    >>> lo, hi = step_bounds(days)
    >>> [str(x)[:10] for x in hi]
    ['2025-01-02', '2025-01-03', '2025-01-04']
    >>> lo, hi = step_bounds(days[1:2], days)
    >>> str(lo[0]), str(hi[0])
    ('2025-01-02T00:00:00', '2025-01-03T00:00:00')
    >>> months = np.array(["2024-11-01", "2024-12-01", "2025-01-01"], dtype="datetime64[s]")
    >>> str(step_bounds(months)[1][-1])
    '2025-02-01T00:00:00'
    """
    times = np.asarray(times).astype("datetime64[s]")
    full = times if axis is None else np.asarray(axis).astype("datetime64[s]")
    if times.size == 0:
        return times.copy(), times.copy()
    where = np.searchsorted(full, times)
    if np.any(where >= full.size) or not np.array_equal(full[where], times):
        raise ValueError("times must be steps of the axis")
    return times.copy(), _axis_ends(full.tobytes())[where]


@functools.lru_cache(maxsize=256)
def _axis_ends(axis: bytes) -> np.ndarray:
    """The end of every step of an axis (given as its ``datetime64[s]`` bytes): the next
    step's start, and for the last step as described above. Kept per axis, since every
    query of a cube version asks for the same one (read-only)."""
    full = np.frombuffer(axis, dtype="datetime64[s]")
    ends = np.empty_like(full)
    ends[:-1] = full[1:]
    ends[-1] = full[-1] if full.size == 1 else _upper_of_last(full)
    ends.setflags(write=False)
    return ends


def select_steps(spec: TimeSpec, times: np.ndarray) -> tuple[int, int]:
    """The half-open index range ``[i0, i1)`` of the steps whose intervals meet ``spec``.

    Intervals in ``spec`` are closed, steps half-open (see :func:`step_bounds`); an absent
    parameter (``kind == "latest"``) selects every step. An empty range means that no
    step meets the parameter.

    Examples
    --------
    >>> from alveary.query._time import parse_datetime
    >>> axis = np.array(["2025-01-01", "2025-01-02", "2025-01-03"], dtype="datetime64[s]")
    >>> select_steps(parse_datetime("2025-01-02T18:00:00Z"), axis)
    (1, 2)
    >>> select_steps(parse_datetime("2025-01-01T12:00:00Z/2025-01-02T06:00:00Z"), axis)
    (0, 2)
    >>> select_steps(parse_datetime(None), axis)
    (0, 3)
    >>> select_steps(parse_datetime("2025-01-04T00:00:00Z"), axis)  # after the last day
    (3, 3)
    """
    axis = np.asarray(times).astype("datetime64[s]")
    n = int(axis.size)
    if n == 0 or spec.kind == "latest":
        return (0, n)
    lo, hi = axis, _axis_ends(axis.tobytes())
    a = spec.start
    b = spec.start if spec.kind == "instant" else spec.end
    lo_us, hi_us = lo.astype("datetime64[us]"), hi.astype("datetime64[us]")
    # First step that ends after a (or, for a one-instant step, at a), last that starts by b.
    if a is None:
        i0 = 0
    elif n == 1:
        i0 = 0 if hi_us[0] >= a else 1
    else:
        i0 = int(np.searchsorted(hi_us, a, side="right"))
    i1 = n if b is None else int(np.searchsorted(lo_us, b, side="right"))
    return (i0, max(i0, i1))
