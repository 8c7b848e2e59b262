"""Queries over cubes: validated requests, pure plans, the executor and statistics.

No HTTP here. A request is parsed into a query object (``PointQuery``, ``DiskQuery``, ...),
bound to one version of a cube by :func:`resolve` (no I/O; its ``key`` is the normalised
query), turned into zones and chunk keys by :func:`make_plan` (no I/O; limits checked), and
read by :func:`execute`, the only step that touches a store. What the layer needs of a cube
is written down as the protocols :class:`ServedCube` and :class:`CubeSnapshot`.
"""

from alveary.query._analysis import (
    AnalysedValues,
    AnalysisPlan,
    analysis_steps,
    apply_analysis,
    plan_analysis,
    time_axis_json,
)
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
from alveary.query._focal import FOCAL_STATISTICS, MAX_FOCAL_K, FocalSpec, parse_focal
from alveary.query._geometry import Area, bbox_area, parse_bbox, parse_polygon
from alveary.query._maptiles import (
    ResolvedTile,
    TileAnalysis,
    TilePlan,
    analysed_range,
    one_variable,
    plan_analysed_zones,
    plan_tile,
    read_analysed_values,
    read_tile,
    read_zone_values,
    resolve_tile,
    resolve_tile_analysis,
    value_range,
)
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
from alveary.query._plan import Limits, Plan, Resolved, estimate_cells, make_plan, resolve
from alveary.query._result import ResultVariable, StatsResult, TimeAxis, ZoneResult
from alveary.query._stats import STATISTICS, parse_stats, zone_statistics
from alveary.query._steps import select_steps, step_bounds
from alveary.query._tiles import (
    MAX_ZOOM,
    PixelZoneCache,
    TileZones,
    check_tile,
    default_level,
    tile_intersects,
    tile_zone_candidates,
)
from alveary.query._time import TimeSpec, format_time, parse_datetime, select_times
from alveary.query._timeagg import (
    AGGREGATES,
    CLIMATOLOGY_KEYS,
    EVERY,
    MIN_YEARS,
    TimeAggregation,
    parse_time_aggregation,
)
from alveary.query._wkt import coords_area, coords_lat_lon, parse_coords

__all__ = [
    "AGGREGATES",
    "CLIMATOLOGY_KEYS",
    "CRS84",
    "EVERY",
    "FOCAL_STATISTICS",
    "MAX_FOCAL_K",
    "MAX_ZOOM",
    "MIN_YEARS",
    "STATISTICS",
    "WITHIN_UNITS",
    "AnalysedValues",
    "AnalysisPlan",
    "Area",
    "BboxQuery",
    "Catalog",
    "CubeSnapshot",
    "CubeSource",
    "DiskQuery",
    "FocalSpec",
    "Limits",
    "PixelZoneCache",
    "Plan",
    "PointQuery",
    "PointsQuery",
    "PolygonQuery",
    "Query",
    "RadiusQuery",
    "Resolved",
    "ResolvedTile",
    "ResultVariable",
    "Selection",
    "ServedCube",
    "StatsResult",
    "TileAnalysis",
    "TilePlan",
    "TileZones",
    "TimeAggregation",
    "TimeAxis",
    "TimeSpec",
    "ZoneResult",
    "analysed_range",
    "analysis_steps",
    "apply_analysis",
    "bbox_area",
    "check_crs",
    "check_tile",
    "check_z",
    "coords_area",
    "coords_lat_lon",
    "default_level",
    "estimate_cells",
    "execute",
    "format_time",
    "make_plan",
    "one_variable",
    "parse_bbox",
    "parse_coords",
    "parse_datetime",
    "parse_focal",
    "parse_parameter_names",
    "parse_polygon",
    "parse_stats",
    "parse_time_aggregation",
    "parse_vars",
    "parse_zone",
    "plan_analysed_zones",
    "plan_analysis",
    "plan_tile",
    "read_analysed_values",
    "read_tile",
    "read_zone_values",
    "resolve",
    "resolve_tile",
    "resolve_tile_analysis",
    "select_steps",
    "select_times",
    "step_bounds",
    "tile_intersects",
    "tile_zone_candidates",
    "time_axis_json",
    "value_range",
    "within_metres",
    "zone_statistics",
]
