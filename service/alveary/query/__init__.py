"""Queries over cubes: validated requests, pure plans, the executor and statistics.

No HTTP here. A request is parsed into a query object (``PointQuery``, ``DiskQuery``, ...),
bound to a cube version by :func:`resolve` (no I/O; its ``key`` is the normalised query),
turned into zones and chunk keys by :func:`make_plan` (no I/O; limits checked), and read
by :func:`execute`, the only step that touches a store.
"""

from alveary.query._catalog import Catalog, CubeSource
from alveary.query._execute import execute, zone_areas
from alveary.query._geometry import Area, bbox_area, parse_bbox, parse_polygon
from alveary.query._models import (
    BboxQuery,
    DiskQuery,
    PointQuery,
    PointsQuery,
    PolygonQuery,
    Query,
    RadiusQuery,
    Selection,
    check_lat_lon,
    parse_vars,
)
from alveary.query._plan import Limits, Plan, Resolved, make_plan, resolve
from alveary.query._result import StatsResult, VariableInfo, ZoneResult
from alveary.query._stats import STATISTICS, parse_stats, zone_statistics
from alveary.query._time import TimeSpec, format_time, parse_datetime, select_times

__all__ = [
    "STATISTICS",
    "Area",
    "BboxQuery",
    "Catalog",
    "CubeSource",
    "DiskQuery",
    "Limits",
    "Plan",
    "PointQuery",
    "PointsQuery",
    "PolygonQuery",
    "Query",
    "RadiusQuery",
    "Resolved",
    "Selection",
    "StatsResult",
    "TimeSpec",
    "VariableInfo",
    "ZoneResult",
    "bbox_area",
    "check_lat_lon",
    "execute",
    "format_time",
    "make_plan",
    "parse_bbox",
    "parse_datetime",
    "parse_polygon",
    "parse_stats",
    "parse_vars",
    "resolve",
    "select_times",
    "zone_areas",
    "zone_statistics",
]
