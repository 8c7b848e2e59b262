"""The datetime parameter, checked against pandas' RFC 3339 / ISO 8601 parser and against
index ranges computed independently with boolean masks."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from alveary import InvalidInput
from alveary.query import format_time, parse_datetime, select_times

AXIS = np.datetime64("2024-01-01T00:00:00", "s") + np.arange(10) * np.timedelta64(6, "h")


def utc(text):
    ts = pd.Timestamp(text)
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


@pytest.mark.parametrize(
    "text",
    [
        "2024-03-01T12:00:00Z",
        "2024-03-01T12:00:00+02:00",
        "2024-03-01T12:00:00-05:30",
        "2024-03-01t12:00:00.250z",
        "2024-02-29T23:59:59.999999Z",
    ],
)
def test_instants_match_pandas(text):
    # Reference: pandas.Timestamp parses RFC 3339 with offsets; convert to UTC.
    expected = pd.Timestamp(text.upper()).tz_convert("UTC").tz_localize(None).to_datetime64()
    assert parse_datetime(text).start == expected.astype("datetime64[us]")


@pytest.mark.parametrize(
    "text",
    ["2024-13-01T00:00:00Z", "2024-02-30", "yesterday", "2024-01-01T25:00:00Z", "..", "a/b/c", ""],
)
def test_malformed_datetime_names_the_parameter(text):
    with pytest.raises(InvalidInput) as info:
        parse_datetime(text)
    assert info.value.parameter == "datetime"


def test_inverted_interval_is_refused():
    with pytest.raises(InvalidInput, match="start is not after its end") as info:
        parse_datetime("2024-01-02T00:00:00Z/2024-01-01T00:00:00Z")
    assert info.value.parameter == "datetime"


@pytest.mark.parametrize(
    "text",
    [
        "2024-01-01T06:00:00Z/2024-01-02T00:00:00Z",
        "../2024-01-01T13:00:00Z",
        "2024-01-02T01:00:00+01:00/..",
        "/2024-01-01T06:00:00Z",
        "../..",
        "2030-01-01/..",
    ],
)
def test_interval_selection_matches_a_mask(text):
    spec = parse_datetime(text)
    i0, i1 = select_times(spec, AXIS)
    # Independent: both ends included, open ends unbounded (OGC API datetime semantics).
    a, b = text.split("/")
    lo = -np.inf if a in ("", "..") else utc(a).value
    hi = np.inf if b in ("", "..") else utc(b).value
    ns = AXIS.astype("datetime64[ns]").astype(np.int64)
    mask = (ns >= lo) & (ns <= hi)
    assert list(range(i0, i1)) == np.nonzero(mask)[0].tolist()


def test_instant_selects_the_step_in_force():
    # 2024-01-01T08:00 lies between the 06:00 and 12:00 steps: the 06:00 step is in force.
    assert select_times(parse_datetime("2024-01-01T08:00:00Z"), AXIS) == (1, 2)
    assert select_times(parse_datetime("2024-01-01T12:00:00Z"), AXIS) == (2, 3)
    with pytest.raises(InvalidInput) as info:
        select_times(parse_datetime("2023-12-31T23:00:00Z"), AXIS)
    assert "2024-01-01T00:00:00Z" in info.value.allowed


def test_default_is_the_latest_step():
    assert select_times(parse_datetime(None), AXIS) == (9, 10)


def test_format_is_rfc3339_utc():
    text = format_time(AXIS[:2])
    assert text == ["2024-01-01T00:00:00Z", "2024-01-01T06:00:00Z"]
    # Round trip through pandas (reference parser).
    assert pd.Timestamp(text[1]).tz_convert("UTC").hour == 6
