"""Time-step intervals and the EDR ``datetime`` selection (steps that intersect it).

Judges: a plain-Python reference that tests every step against the parameter with
``datetime`` arithmetic and the calendar, and the native selection (``select_times``,
"the step in force at an instant"), which must agree with EDR's for instants.
"""

from __future__ import annotations

import itertools
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from alveary.query import parse_datetime, select_times
from alveary.query._steps import select_steps, step_bounds


def _py(t):
    return datetime.fromisoformat(str(np.datetime64(t, "s"))).replace(tzinfo=UTC)


def _add_months(moment, k):
    month = moment.month - 1 + k
    return moment.replace(year=moment.year + month // 12, month=month % 12 + 1)


def _reference_bounds(axis):
    """[start, end) of each step, with the calendar for month-start axes."""
    moments = [_py(t) for t in axis]
    ends = moments[1:]
    if len(moments) == 1:
        ends.append(moments[0])
    else:
        first_of_month = all(m.day == 1 and m.time() == datetime.min.time() for m in moments)
        months = [m.year * 12 + m.month for m in moments]
        steps = {b - a for a, b in itertools.pairwise(months)}
        if first_of_month and len(steps) == 1:
            ends.append(_add_months(moments[-1], steps.pop()))
        else:
            ends.append(moments[-1] + (moments[-1] - moments[-2]))
    return moments, ends


def _reference_select(axis, start, end):
    """Indices of steps whose interval meets the closed [start, end] (None: open)."""
    lo, hi = _reference_bounds(axis)
    out = []
    for i, (a, b) in enumerate(zip(lo, hi, strict=True)):
        after_start = start is None or (b > start if b > a else b >= start)
        before_end = end is None or a <= end
        if after_start and before_end:
            out.append(i)
    return out


def _text(moment):
    return moment.strftime("%Y-%m-%dT%H:%M:%SZ")


def test_daily_axis_bounds():
    axis = np.arange("2025-01-01", "2025-01-08", dtype="datetime64[D]").astype("datetime64[s]")
    lo, hi = step_bounds(axis)
    np.testing.assert_array_equal(lo, axis)
    np.testing.assert_array_equal(hi, axis + np.timedelta64(1, "D"))


@pytest.mark.parametrize(
    ("stamps", "last_end"),
    [
        (["2024-11-01", "2024-12-01", "2025-01-01"], "2025-02-01T00:00:00"),  # months
        (["2024-01-01", "2024-02-01", "2024-03-01"], "2024-04-01T00:00:00"),  # leap Feb
        (["2023-10-01", "2024-01-01"], "2024-04-01T00:00:00"),  # quarters
        (["2022-01-01", "2023-01-01", "2024-01-01"], "2025-01-01T00:00:00"),  # years
        (["2024-01-15", "2024-02-15"], "2024-03-17T00:00:00"),  # not month starts: 31 days
        (["2024-01-01T06:00", "2024-01-01T12:00"], "2024-01-01T18:00:00"),  # hours
        (["2024-01-01"], "2024-01-01T00:00:00"),  # a single instant
    ],
)
def test_end_of_the_last_step(stamps, last_end):
    axis = np.array(stamps, dtype="datetime64[s]")
    _, hi = step_bounds(axis)
    assert str(hi[-1]) == last_end
    _, ref = _reference_bounds(axis)
    assert _text(ref[-1]) == last_end + "Z"


def test_bounds_of_a_selection_come_from_the_whole_axis():
    axis = np.array(["2024-01-01", "2024-01-03", "2024-01-10"], dtype="datetime64[s]")
    _lo, hi = step_bounds(axis[:2], axis)
    assert [str(x) for x in hi] == ["2024-01-03T00:00:00", "2024-01-10T00:00:00"]
    with pytest.raises(ValueError, match="steps of the axis"):
        step_bounds(np.array(["2024-01-02"], dtype="datetime64[s]"), axis)


@st.composite
def axes(draw):
    start = np.datetime64("2024-01-01T00:00:00", "s")
    n = draw(st.integers(1, 12))
    if draw(st.booleans()):  # month starts, even or uneven spacing
        months = np.cumsum(draw(st.lists(st.integers(1, 3), min_size=n, max_size=n)))
        return (np.datetime64("2024-01", "M") + months).astype("datetime64[s]")
    gaps = draw(st.lists(st.integers(1, 5 * 86400), min_size=n, max_size=n))
    return start + np.cumsum(gaps).astype("timedelta64[s]")


moments = st.integers(-40 * 86400, 500 * 86400).map(
    lambda s: datetime(2024, 1, 1, tzinfo=UTC) + timedelta(seconds=s)
)


@settings(max_examples=300, deadline=None)
@given(axes(), st.one_of(st.none(), moments), st.one_of(st.none(), moments))
def test_intervals_select_what_the_reference_selects(axis, a, b):
    if a is not None and b is not None and a > b:
        a, b = b, a
    text = f"{'..' if a is None else _text(a)}/{'..' if b is None else _text(b)}"
    i0, i1 = select_steps(parse_datetime(text), axis)
    assert list(range(i0, i1)) == _reference_select(axis, a, b)


@settings(max_examples=300, deadline=None)
@given(axes(), moments)
def test_instants_select_the_step_in_force(axis, moment):
    i0, i1 = select_steps(parse_datetime(_text(moment)), axis)
    assert list(range(i0, i1)) == _reference_select(axis, moment, moment)
    # Within the axis's span the native rule ("the latest step at or before it") agrees.
    lo, hi = _reference_bounds(axis)
    if lo[0] <= moment < hi[-1]:
        assert (i0, i1) == select_times(parse_datetime(_text(moment)), axis)


def test_no_datetime_selects_every_step():
    axis = np.array(["2024-01-01", "2024-01-02"], dtype="datetime64[s]")
    assert select_steps(parse_datetime(None), axis) == (0, 2)
    assert select_steps(parse_datetime(None), axis[:0]) == (0, 0)


def test_outside_the_axis_selects_nothing():
    axis = np.array(["2024-01-01", "2024-01-02"], dtype="datetime64[s]")
    assert select_steps(parse_datetime("2023-12-31T23:59:59Z"), axis) == (0, 0)
    assert select_steps(parse_datetime("2024-01-03T00:00:00Z"), axis) == (2, 2)
    assert select_steps(parse_datetime("2024-01-02T23:59:59Z"), axis) == (1, 2)
    assert select_steps(parse_datetime("2020-01-01/2023-12-31T23:59:59Z"), axis) == (0, 0)
