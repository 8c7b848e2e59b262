"""Columnar query results, the one shape every output format is encoded from."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["ResultVariable", "StatsResult", "ZoneResult"]


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
        variable -> float64 (t, n); NaN where the cube has no data.
    extra:
        Per-row columns that belong to the query: ``steps`` (disk), ``distance_m``
        (radius), ``point`` (multi-point: the index of the input point).
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
    note: str | None = None

    @property
    def rows(self) -> int:
        """Number of (zone, time) rows in the long form."""
        return int(self.zones.size * self.times.size)


@dataclass
class StatsResult:
    """Statistics per time step over the zones of an area.

    ``stats`` maps variable -> statistic -> float64 (t,); each variable also carries
    ``area_m2`` (area of the zones that had data). ``area_m2`` on the result is the area
    of every zone of the selection, ``zone_count`` their number.
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
