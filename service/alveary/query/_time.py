"""The ``datetime`` parameter: RFC 3339 instants and OGC API intervals, and their selection.

An instant selects the time step in force at that instant (the latest step at or before
it); an interval ``start/end`` selects every step with ``start <= t <= end``, where either
end may be ``..`` (or empty) for an open end. Without a ``datetime`` the latest step is
selected.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np

from alveary._errors import InvalidInput
from alveary.cube import parse_time

__all__ = ["TimeSpec", "format_time", "parse_datetime", "select_times"]

_PARAM = "datetime"
_ALLOWED = (
    "an RFC 3339 instant such as 2024-05-01T00:00:00Z, or an interval start/end "
    "with '..' for an open end"
)


@dataclass(frozen=True)
class TimeSpec:
    """A parsed ``datetime`` parameter.

    ``kind`` is ``"latest"`` (no parameter), ``"instant"`` or ``"interval"``; ``start`` and
    ``end`` are ``numpy.datetime64`` in microseconds (UTC) or None for an open end.
    """

    kind: str
    start: np.datetime64 | None = None
    end: np.datetime64 | None = None

    def key(self) -> str:
        """A canonical text form, for cache keys.

        >>> parse_datetime("2024-01-01T01:00:00+01:00/..").key()
        'interval:2024-01-01T00:00:00.000000/..'
        """
        if self.kind == "latest":
            return "latest"
        a = ".." if self.start is None else str(self.start)
        b = ".." if self.end is None else str(self.end)
        return f"{self.kind}:{a}" if self.kind == "instant" else f"{self.kind}:{a}/{b}"


def _parse_instant(text: str, whole: str) -> np.datetime64:
    try:
        return parse_time(text.strip(), _PARAM)
    except InvalidInput:
        raise InvalidInput(_PARAM, whole, _ALLOWED) from None


def parse_datetime(text: str | None) -> TimeSpec:
    """Parse an OGC API ``datetime`` value.

    Parameters
    ----------
    text:
        An RFC 3339 instant, ``start/end`` (``..`` or empty for an open end), or None.

    Raises
    ------
    InvalidInput
        For anything else, or an interval whose start lies after its end.

    Examples
    --------
    >>> parse_datetime("2024-03-01T12:00:00Z")
    TimeSpec(kind='instant', start=np.datetime64('2024-03-01T12:00:00.000000'), end=None)
    >>> parse_datetime("../2024-03-01").end
    np.datetime64('2024-03-01T00:00:00.000000')
    >>> parse_datetime("2024-03-02/2024-03-01")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: datetime is '2024-03-02/2024-03-01'; allowed: an interval whose start is not after its end
    """  # noqa: E501
    if text is None:
        return TimeSpec("latest")
    text = text.strip()
    if "/" not in text:
        if text in ("", ".."):
            raise InvalidInput(_PARAM, text, _ALLOWED)
        return TimeSpec("instant", _parse_instant(text, text))
    parts = text.split("/")
    if len(parts) != 2:
        raise InvalidInput(_PARAM, text, _ALLOWED)
    a, b = (p.strip() for p in parts)
    start = None if a in ("", "..") else _parse_instant(a, text)
    end = None if b in ("", "..") else _parse_instant(b, text)
    if start is not None and end is not None and start > end:
        raise InvalidInput(_PARAM, text, "an interval whose start is not after its end")
    return TimeSpec("interval", start, end)


def select_times(spec: TimeSpec, times: np.ndarray) -> tuple[int, int]:
    """The half-open index range ``[i0, i1)`` of ``times`` that ``spec`` selects.

    ``times`` is the cube's ascending time axis (``datetime64``).

    Examples
    --------
    >>> axis = np.array(["2024-01-01", "2024-01-02", "2024-01-03"], dtype="datetime64[s]")
    >>> select_times(parse_datetime(None), axis)
    (2, 3)
    >>> select_times(parse_datetime("2024-01-02T06:00:00Z"), axis)
    (1, 2)
    >>> select_times(parse_datetime("2024-01-02/.."), axis)
    (1, 3)
    """
    n = len(times)
    if n == 0:
        return (0, 0)
    axis = times.astype("datetime64[us]")
    if spec.kind == "latest":
        return (n - 1, n)
    if spec.kind == "instant" and spec.start is not None:
        i = int(np.searchsorted(axis, spec.start, side="right")) - 1
        if i < 0:
            first = format_time(times[:1])[0]
            raise InvalidInput(_PARAM, str(spec.start), f"an instant at or after {first}")
        return (i, i + 1)
    i0 = 0 if spec.start is None else int(np.searchsorted(axis, spec.start, side="left"))
    i1 = n if spec.end is None else int(np.searchsorted(axis, spec.end, side="right"))
    return (i0, max(i0, i1))


def format_time(times: np.ndarray) -> list[str]:
    """RFC 3339 UTC text (``Z``) for an array of ``datetime64``.

    >>> format_time(np.array(["2024-01-01T06:00"], dtype="datetime64[s]"))
    ['2024-01-01T06:00:00Z']
    """
    seconds = np.asarray(times).astype("datetime64[s]")
    if seconds.size <= _FEW:  # a point's answer: the text of each instant made once
        return [_instant_text(int(t)) for t in seconds.reshape(-1).astype(np.int64).tolist()]
    text = np.datetime_as_string(seconds, unit="s")
    return [t + "Z" for t in text.tolist()]


_FEW = 8


@functools.lru_cache(maxsize=4096)
def _instant_text(seconds: int) -> str:
    """RFC 3339 UTC text of seconds since 1970."""
    return str(np.datetime_as_string(np.datetime64(seconds, "s"), unit="s")) + "Z"
