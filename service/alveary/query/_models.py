"""Validated requests: what a caller asked for, before any cube is consulted.

Each query type is a frozen dataclass built from already-parsed parameters; ``key()``
gives a canonical text form (the "normalised query" that ETags are made from).
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass, field
from typing import Literal

import numpy as np

from alveary import grid
from alveary._errors import InvalidInput
from alveary.query._focal import FocalSpec
from alveary.query._geometry import Area
from alveary.query._time import TimeSpec, parse_datetime
from alveary.query._timeagg import TimeAggregation

__all__ = [
    "BboxQuery",
    "DiskQuery",
    "PointQuery",
    "PointsQuery",
    "PolygonQuery",
    "Query",
    "RadiusQuery",
    "Selection",
    "parse_vars",
    "parse_zone",
]


def parse_vars(text: str | None) -> tuple[str, ...] | None:
    """Parse ``vars=a,b`` (None or empty: every variable of the cube), keeping order.

    >>> parse_vars("rain, temperature,rain")
    ('rain', 'temperature')
    >>> parse_vars(None) is None
    True
    """
    if text is None or not text.strip():
        return None
    names = [t.strip() for t in text.split(",") if t.strip()]
    return tuple(dict.fromkeys(names))


def parse_zone(text: str, parameter: str = "zone") -> int:
    """A zone given as its integer id or its text form, checked, as an int.

    >>> z = parse_zone("0n")
    >>> parse_zone(str(z)) == z
    True
    >>> parse_zone("7")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: zone is '7'; allowed: a zone id: an integer or text such as 5b-20-7
    """  # noqa: E501
    text = str(text).strip()
    allowed = "a zone id: an integer or text such as 5b-20-7"
    try:
        if text.isdigit():
            value = int(text)
            if value >= 2**63:
                raise OverflowError(text)
            grid.zone_level(np.uint64(value))  # validates the id
        else:
            value = int(grid.zone_from_text(text))
    except (InvalidInput, OverflowError, ValueError, TypeError):
        raise InvalidInput(parameter, text, allowed) from None
    return value


@dataclass(frozen=True)
class Selection:
    """The parts every cube query shares: level, variables and time.

    ``level`` None means the cube's finest level, ``variables`` None every variable.
    ``focal`` (a neighbourhood statistic) and ``timeagg`` (calendar periods, climatology,
    anomaly) are the analysis applied to every selected zone, in that order; None: none.
    ``steps`` is the rule by which ``time`` picks time steps: ``"in_force"`` (the native
    API: an instant picks the step in force then, an interval the steps that start in
    it, no ``datetime`` the latest step) or ``"overlap"`` (OGC API - EDR: the steps whose
    intervals meet ``time``, no ``datetime`` every step; see
    :func:`alveary.query.select_steps`).
    """

    level: int | None = None
    variables: tuple[str, ...] | None = None
    time: TimeSpec = field(default_factory=lambda: parse_datetime(None))
    focal: FocalSpec | None = None
    timeagg: TimeAggregation | None = None

    def __post_init__(self) -> None:
        agg = self.timeagg
        if self.focal is not None and self.focal.statistic == "gradient" and agg is not None:
            # a direction does not average: refuse, naming the time parameter given
            name = next(n for n in ("every", "climatology", "anomaly") if getattr(agg, n))
            raise InvalidInput(name, getattr(agg, name), "not with focal=gradient")

    def analysis_key(self) -> str:
        """Canonical text of the analysis parameters ("" without any), for cache keys.

        >>> from alveary.query._timeagg import parse_time_aggregation
        >>> Selection(focal=FocalSpec("mean", 2), timeagg=parse_time_aggregation("P1M")).analysis_key()
        'focal=mean:2:;every=P1M;agg=mean;climatology=None;anomaly=None'
        """  # noqa: E501
        parts = []
        if self.focal is not None:
            kernel = ",".join(repr(w) for w in self.focal.kernel or ())
            parts.append(f"focal={self.focal.statistic}:{self.focal.k}:{kernel}")
        if self.timeagg is not None:
            t = self.timeagg
            parts.append(
                f"every={t.every};agg={t.agg};climatology={t.climatology};anomaly={t.anomaly}"
            )
        return ";".join(parts)

    steps: Literal["in_force", "overlap"] = "in_force"


@dataclass(frozen=True)
class PointQuery:
    """The zone under one point."""

    lat: float
    lon: float
    selection: Selection = field(default_factory=Selection)
    op = "point"

    def __post_init__(self) -> None:
        lat, lon = self.lat, self.lon
        if type(lat) is float and type(lon) is float and abs(lat) <= 90.0 and abs(lon) <= 180.0:
            return  # plainly valid (NaN fails the comparisons); anything else is checked
        grid.check_lat_lon(lat, lon)

    def key(self) -> str:
        return f"lat={self.lat!r};lon={self.lon!r}"


@dataclass(frozen=True)
class DiskQuery:
    """Every zone within ``k`` steps of a centre zone (given, or the zone under a point)."""

    k: int
    lat: float | None = None
    lon: float | None = None
    zone: int | None = None
    selection: Selection = field(default_factory=Selection)
    op = "disk"

    def __post_init__(self) -> None:
        if self.k < 0:
            raise InvalidInput("k", self.k, ">= 0")
        if self.zone is None and (self.lat is None or self.lon is None):
            raise InvalidInput("lat", None, "lat and lon, or zone")
        if self.zone is not None and (self.lat is not None or self.lon is not None):
            raise InvalidInput("zone", self.zone, "either zone, or lat and lon, not both")
        if self.zone is None:
            grid.check_lat_lon(self.lat, self.lon)

    def key(self) -> str:
        return f"k={self.k};lat={self.lat!r};lon={self.lon!r};zone={self.zone}"


@dataclass(frozen=True)
class RadiusQuery:
    """Zones whose centres lie within ``meters`` of a point (geodesic, WGS84)."""

    lat: float
    lon: float
    meters: float
    nearest: bool = False
    selection: Selection = field(default_factory=Selection)
    op = "radius"

    def __post_init__(self) -> None:
        grid.check_lat_lon(self.lat, self.lon)
        if not (math.isfinite(self.meters) and self.meters >= 0):
            raise InvalidInput("meters", self.meters, ">= 0")

    def key(self) -> str:
        return f"lat={self.lat!r};lon={self.lon!r};m={self.meters!r};nearest={self.nearest}"


@dataclass(frozen=True)
class BboxQuery:
    """Zones whose centres lie in a longitude-latitude box; values or statistics."""

    west: float
    south: float
    east: float
    north: float
    stats: tuple[str, ...] = ()
    selection: Selection = field(default_factory=Selection)
    op = "bbox"

    def key(self) -> str:
        box = (self.west, self.south, self.east, self.north)
        return f"bbox={','.join(repr(v) for v in box)};stats={','.join(self.stats)}"


@dataclass(frozen=True)
class PolygonQuery:
    """Zones whose centres lie in a polygon; values or statistics.

    ``properties`` is the canonical JSON text of a posted Feature's properties (empty
    when there were none): a GeoJSON statistics answer keeps them, so they are part of
    the key.
    """

    area: Area
    stats: tuple[str, ...] = ()
    selection: Selection = field(default_factory=Selection)
    properties: str = ""
    op = "polygon"

    def key(self) -> str:
        key = f"geometry={self.area.key};stats={','.join(self.stats)}"
        if self.properties:
            digest = hashlib.blake2b(self.properties.encode(), digest_size=16).hexdigest()
            key += f";properties={digest}"
        return key


@dataclass(frozen=True, eq=False)
class PointsQuery:
    """Many points at once: one answer row per point and time step."""

    lat: np.ndarray
    lon: np.ndarray
    selection: Selection = field(default_factory=Selection)
    op = "points"

    def __post_init__(self) -> None:
        lat = np.asarray(self.lat, dtype=np.float64).ravel()
        lon = np.asarray(self.lon, dtype=np.float64).ravel()
        if lat.shape != lon.shape:
            raise InvalidInput("lon", f"{lon.size} values", f"as many as lat ({lat.size})")
        lat, lon = grid.check_lat_lon(lat, lon)
        object.__setattr__(self, "lat", lat)
        object.__setattr__(self, "lon", lon)

    def key(self) -> str:
        digest = hashlib.blake2b(self.lat.tobytes() + b"|" + self.lon.tobytes(), digest_size=16)
        return f"points={self.lat.size}:{digest.hexdigest()}"


Query = PointQuery | DiskQuery | RadiusQuery | BboxQuery | PolygonQuery | PointsQuery
