"""Columnar query results, the one shape every output format is encoded from."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = ["ResultVariable", "StatsResult", "TimeAxis", "ZoneResult"]


@dataclass(frozen=True)
class ResultVariable:
    """A variable of a result: its name and the CF attributes every format carries,
    and how it is stored (``dtype``, and ``scale_factor``/``add_offset`` if packed), so
    encoders print no more digits than the stored values hold.
    """

    name: str
    units: str = ""
    long_name: str = ""
    dtype: str = "float64"
    scale_factor: float | None = None
    add_offset: float | None = None


@dataclass(frozen=True, eq=False)
class TimeAxis:
    """What a result's rows stand for when they are not the cube's own time steps.

    Calendar periods: ``times`` holds each period's start, ``bounds`` ``(t, 2)`` its
    ``[start, end)`` (datetime64[s], UTC) and ``steps`` the cube steps it holds. A
    climatology: the rows are ``keys`` (months 1..12 or days of the year 1..365) named by
    ``key`` (``"month"`` or ``"dayofyear"``), and ``times`` is empty.
    """

    bounds: np.ndarray | None = None
    steps: np.ndarray | None = None
    key: str | None = None
    keys: np.ndarray | None = None


@dataclass
class ZoneResult:
    """Values per zone and time step.

    Attributes
    ----------
    zones:
        uint64 (n,): one row per answered zone (or per point, for multi-point queries,
        where a zone may repeat).
    times:
        datetime64[s] (t,).
    values:
        variable -> float64 (t, n), or float32 for plain values of a float32 variable;
        NaN where the cube has no data.
    extra:
        Per-row columns that belong to the query: ``steps`` (disk), ``distance_m``
        (radius), ``point`` (multi-point: the index of the input point).
    axis:
        Periods or climatology keys, when time was aggregated (else None).
    analysis:
        What was computed (neighbourhood statistic, time aggregation, climatology year
        counts and warnings), as JSON-ready metadata; empty for plain values.
    note:
        A remark the answer carries for its reader, such as why it has no rows (a
        ``nearest`` radius query that found no zone with data); ``None`` when there is none.
    """

    cube: str
    version: str
    level: int
    variables: dict[str, ResultVariable]
    times: np.ndarray
    zones: np.ndarray
    values: dict[str, np.ndarray]
    extra: dict[str, np.ndarray] = field(default_factory=dict)
    kind: str = "zones"
    axis: TimeAxis | None = None
    analysis: dict[str, Any] = field(default_factory=dict)
    note: str | None = None

    @property
    def rows(self) -> int:
        """Number of (zone, time) rows in the long form."""
        return int(self.zones.size * _row_count(self.times, self.axis))


@dataclass
class StatsResult:
    """Statistics per time step over the zones of an area.

    ``stats`` maps variable -> statistic -> float64 (t,); each variable also carries
    ``area_m2`` (area of the zones that had data). ``area_m2`` on the result is the area
    of every zone of the selection, ``zone_count`` their number. ``axis`` and
    ``analysis`` as in :class:`ZoneResult`.
    """

    cube: str
    version: str
    level: int
    variables: dict[str, ResultVariable]
    times: np.ndarray
    zone_count: int
    area_m2: float
    names: tuple[str, ...]
    stats: dict[str, dict[str, np.ndarray]]
    kind: str = "stats"
    axis: TimeAxis | None = None
    analysis: dict[str, Any] = field(default_factory=dict)


def _row_count(times: np.ndarray, axis: TimeAxis | None) -> int:
    if axis is not None and axis.keys is not None:
        return int(axis.keys.size)
    return int(times.size)
