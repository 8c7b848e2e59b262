"""Queries over cubes: validated requests, pure plans, the executor and statistics.

No HTTP here. A request is parsed into a query object (``PointQuery``, ``DiskQuery``, ...),
bound to one version of a cube by :func:`resolve` (no I/O; its ``key`` is the normalised
query), turned into zones and chunk keys by :func:`make_plan` (no I/O; limits checked), and
read by :func:`execute`, the only step that touches a store. What the layer needs of a cube
is written down as the protocols :class:`ServedCube` and :class:`CubeSnapshot`.
"""

from alveary.query._catalog import Catalog, CubeSource
from alveary.query._cube import CubeSnapshot, ServedCube
from alveary.query._edr_params import (
    CRS84,
    WITHIN_UNITS,
    check_crs,
    check_z,
    parse_parameter_names,
    within_metres,
)
from alveary.query._execute import execute
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
    parse_vars,
    parse_zone,
)
from alveary.query._plan import Limits, Plan, Resolved, make_plan, resolve
from alveary.query._result import ResultVariable, StatsResult, ZoneResult
from alveary.query._stats import STATISTICS, parse_stats, zone_statistics
from alveary.query._steps import select_steps, step_bounds
from alveary.query._time import TimeSpec, format_time, parse_datetime, select_times
from alveary.query._wkt import coords_area, coords_lat_lon, parse_coords

__all__ = [
    "CRS84",
    "STATISTICS",
    "WITHIN_UNITS",
    "Area",
    "BboxQuery",
    "Catalog",
    "CubeSnapshot",
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
    "ResultVariable",
    "Selection",
    "ServedCube",
    "StatsResult",
    "TimeSpec",
    "ZoneResult",
    "bbox_area",
    "check_crs",
    "check_z",
    "coords_area",
    "coords_lat_lon",
    "execute",
    "format_time",
    "make_plan",
    "parse_bbox",
    "parse_coords",
    "parse_datetime",
    "parse_parameter_names",
    "parse_polygon",
    "parse_stats",
    "parse_vars",
    "parse_zone",
    "resolve",
    "select_steps",
    "select_times",
    "step_bounds",
    "within_metres",
    "zone_statistics",
]
