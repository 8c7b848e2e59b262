"""Instants as RFC 3339 text: the one parser, and the cube's time axis.

Text is read with the grammar of RFC 3339 §5.6 (``full-date "T" full-time``), relaxed the
way HTTP APIs commonly are: the time may be left out (midnight), a space may stand for
``T``, and a missing offset means UTC. Fractions of a second are kept to the microsecond.
Every instant is returned as ``numpy.datetime64`` in microseconds, UTC.
"""

from __future__ import annotations

import re
from datetime import UTC, datetime
from typing import Any

import numpy as np

from alveary._errors import InvalidInput

__all__ = ["RFC3339_EXAMPLE", "parse_time", "to_times"]

#: How an RFC 3339 instant is described in error messages.
RFC3339_EXAMPLE = "an RFC 3339 date-time such as 2024-03-01T00:00:00Z"

_DATE_TIME = re.compile(
    r"^(\d{4})-(\d{2})-(\d{2})"
    r"(?:[Tt ](\d{2}):(\d{2}):(\d{2})(\.\d{1,9})?([Zz]|[+-]\d{2}:\d{2})?)?$"
)


def _from_text(text: str, parameter: str) -> datetime:
    m = _DATE_TIME.match(text.strip())
    if not m:
        raise InvalidInput(parameter, text, RFC3339_EXAMPLE)
    year, month, day, hh, mm, ss, frac, zone = m.groups()
    try:
        if hh is None:
            return datetime(int(year), int(month), int(day), tzinfo=UTC)
        tz = "+00:00" if zone in (None, "Z", "z") else zone
        return datetime.fromisoformat(f"{year}-{month}-{day}T{hh}:{mm}:{ss}{(frac or '')[:7]}{tz}")
    except ValueError:  # a month 13, a day 31 in April, an hour 25, ...
        raise InvalidInput(parameter, text, RFC3339_EXAMPLE) from None


def parse_time(value: Any, parameter: str = "datetime") -> np.datetime64:
    """One instant as ``datetime64[us]`` (UTC): RFC 3339 text, datetime or datetime64.

    A naive datetime is taken as UTC.

    Examples
    --------
    >>> parse_time("2024-03-01T06:00:00+02:00")
    np.datetime64('2024-03-01T04:00:00.000000')
    >>> parse_time("2024-03-01")
    np.datetime64('2024-03-01T00:00:00.000000')
    >>> parse_time("2024-03-01T00:00:00.1234567Z")  # kept to the microsecond
    np.datetime64('2024-03-01T00:00:00.123456')
    >>> parse_time("2024-02-30")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: datetime is '2024-02-30'; allowed: an RFC 3339 date-time such as 2024-03-01T00:00:00Z
    """  # noqa: E501
    if isinstance(value, np.datetime64):
        if np.isnat(value):
            raise InvalidInput(parameter, str(value), "a date-time, not NaT")
        instant: np.datetime64 = value.astype("datetime64[us]")
        return instant
    if isinstance(value, str):
        value = _from_text(value, parameter)
    if isinstance(value, datetime):
        if value.tzinfo is not None:
            value = value.astimezone(UTC).replace(tzinfo=None)
        return np.datetime64(value, "us")
    raise InvalidInput(parameter, value, RFC3339_EXAMPLE)


def to_times(values: Any, parameter: str = "times") -> np.ndarray:
    """A strictly increasing time axis as ``datetime64[s]`` (a cube's axis is in seconds).

    >>> to_times(["2024-01-01", "2024-01-02T00:00:00Z"])
    array(['2024-01-01T00:00:00', '2024-01-02T00:00:00'], dtype='datetime64[s]')
    """
    arr = np.asarray(values)
    if arr.ndim != 1 or arr.size == 0:
        raise InvalidInput(parameter, None, "a non-empty 1-d sequence of date-times")
    if np.issubdtype(arr.dtype, np.datetime64):
        out = arr.astype("datetime64[s]")
    else:
        out = np.array([parse_time(v, parameter) for v in arr.tolist()]).astype("datetime64[s]")
    if np.isnat(out).any():
        raise InvalidInput(parameter, None, "date-times without NaT")
    if out.size > 1 and not (np.diff(out.astype(np.int64)) > 0).all():
        raise InvalidInput(parameter, None, "strictly increasing date-times")
    return out
