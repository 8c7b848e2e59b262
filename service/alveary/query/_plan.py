"""From a validated query to a plan: zones, time range and chunk keys, with no I/O.

Two pure steps. :func:`resolve` fixes the cube, level, variables and time-step range and
yields the normalised query key (what an ETag is made from) without touching the store.
:func:`make_plan` turns the query into zones by grid arithmetic, checks every configured
limit before anything is read, and asks the cube which chunks those zones need.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from alveary import grid
from alveary._errors import InvalidInput, LimitExceeded, NotFound
from alveary.cube import ReadPlan
from alveary.query._analysis import AnalysisPlan, analysis_steps, plan_analysis
from alveary.query._catalog import Catalog
from alveary.query._coverage import (
    Box,
    clip_bbox,
    clip_polygon,
    coverage_boxes,
    covered,
    outside,
    radius_in_coverage,
)
from alveary.query._cube import CubeSnapshot
from alveary.query._focal import MAX_FOCAL_K
from alveary.query._geometry import bbox_area
from alveary.query._models import (
    BboxQuery,
    DiskQuery,
    PointQuery,
    PointsQuery,
    PolygonQuery,
    Query,
    RadiusQuery,
    Selection,
)
from alveary.query._result import ResultVariable
from alveary.query._steps import select_steps
from alveary.query._time import select_times

__all__ = [
    "Limits",
    "Plan",
    "Resolved",
    "estimate_cells",
    "finest_fitting_level",
    "make_plan",
    "resolve",
]


@dataclass(frozen=True)
class Limits:
    """Per-request limits; a request over one is refused before any chunk is read."""

    max_zones: int = 250_000
    max_k: int = 200
    max_polygon_vertices: int = 20_000
    max_points: int = 10_000
    max_cells: int = 10_000_000
    max_read_bytes: int = 2_000_000_000
    max_focal_k: int = MAX_FOCAL_K


@dataclass(frozen=True)
class Resolved:
    """A query bound to one cube version: level, variables and time-step range fixed.

    ``cube`` is that version (a snapshot): the plan and the reads use it, whatever the
    catalogue serves by then.
    """

    cube_id: str
    cube: CubeSnapshot = field(repr=False)
    version: str
    level: int
    variables: tuple[str, ...]
    t0: int
    t1: int
    query: Query

    @property
    def times(self) -> np.ndarray:
        return self.cube.times[self.t0 : self.t1]

    @property
    def key(self) -> str:
        """The normalised query: identical for requests that must give identical answers."""
        parts = [
            self.query.op,
            self.cube_id,
            self.version,
            str(self.level),
            ",".join(self.variables),
            f"{self.t0}:{self.t1}",
            self.query.key(),
        ]
        analysis = self.query.selection.analysis_key()
        if analysis:  # the output steps of an anomaly depend on datetime, too
            parts += [analysis, self.query.selection.time.key()]
        return "|".join(parts)

    def variable_info(self) -> dict[str, ResultVariable]:
        meta = self.cube.variables
        return {
            v: ResultVariable(
                v,
                meta[v].units,
                meta[v].long_name,
                meta[v].dtype,
                meta[v].scale_factor,
                meta[v].add_offset,
            )
            for v in self.variables
        }


def resolve(catalog: Catalog, cube_id: str, query: Query) -> Resolved:
    """Bind a query to the current version of a cube (no store access).

    Raises
    ------
    NotFound
        Unknown cube.
    InvalidInput
        A level the cube does not hold, an unknown variable, an instant before the time
        axis (under the ``"in_force"`` rule; under ``"overlap"`` it selects no step).
    """
    cube = catalog.get(cube_id).snapshot()
    sel = query.selection
    # The binding depends on the selection and the version alone (not on where the
    # query looks, unless a disk is centred on a given zone): made once per selection.
    key = None if isinstance(query, DiskQuery) and query.zone is not None else sel
    bound = _bindings.get((cube_id, cube.version, key)) if key is not None else None
    if bound is None:
        bound = _bind(cube, query)
        if key is not None:
            if len(_bindings) >= _MAX_BINDINGS:
                _bindings.clear()
            _bindings[(cube_id, cube.version, key)] = bound
    return Resolved(cube_id, cube, cube.version, *bound, query)


_Binding = tuple[int, tuple[str, ...], int, int]  # level, variables, t0, t1
_bindings: dict[tuple[str, str, Selection], _Binding] = {}
_MAX_BINDINGS = 4096


def _bind(cube: CubeSnapshot, query: Query) -> _Binding:
    """The level, variables and time steps a query's selection picks in a cube version."""
    sel = query.selection
    levels = tuple(int(v) for v in cube.levels)
    if sel.level is None:
        level = levels[-1]
        if isinstance(query, DiskQuery) and query.zone is not None:
            level = _zone_level(query.zone, levels)
    else:
        level = int(sel.level)
        if level not in levels:
            raise InvalidInput("level", level, f"one of the cube's levels {list(levels)}")
        if isinstance(query, DiskQuery) and query.zone is not None:
            if _zone_level(query.zone, levels) != level:
                raise InvalidInput("level", level, "the level of the given zone (or no level)")
    names = tuple(cube.variables)
    if sel.variables is None:
        variables = names
    else:
        unknown = [v for v in sel.variables if v not in cube.variables]
        if unknown:
            raise InvalidInput("vars", unknown[0], f"variables of this cube: {', '.join(names)}")
        variables = sel.variables
    if sel.steps == "overlap":
        t0, t1 = select_steps(sel.time, np.asarray(cube.times))
    else:
        t0, t1 = select_times(sel.time, np.asarray(cube.times))
    t0, t1 = analysis_steps(sel, np.asarray(cube.times), t0, t1)  # steps the analysis reads
    return level, variables, t0, t1


def _zone_level(zone: int, levels: tuple[int, ...]) -> int:
    try:
        level = int(grid.zone_level(np.uint64(zone)))
    except (InvalidInput, OverflowError, ValueError):
        raise InvalidInput("zone", zone, "a zone id") from None
    if level not in levels:
        raise InvalidInput("zone", zone, f"a zone of one of the cube's levels {list(levels)}")
    return level


@dataclass
class Plan:
    """Everything the executor needs, computed without I/O.

    ``zones`` are the rows of the answer (they may repeat for multi-point queries);
    ``read_zones`` the distinct zones read; ``take`` maps rows to ``read_zones``;
    ``reads`` variable -> the cube version's own read plan, which the executor runs as
    it is; ``max_bytes`` the most that will be read. With a neighbourhood statistic or a
    time aggregation, ``analysis`` says what is computed from the read (``read_zones``
    then hold the targets plus the halo) and ``halo_chunks`` lists the chunk keys read
    only for the halo (they are part of ``reads``).
    """

    resolved: Resolved
    zones: np.ndarray
    read_zones: np.ndarray
    take: np.ndarray | None
    extra: dict[str, np.ndarray]
    max_bytes: int
    stats: tuple[str, ...] = ()
    reads: dict[str, ReadPlan] = field(default_factory=dict, repr=False)
    analysis: AnalysisPlan | None = field(default=None, repr=False)
    halo_chunks: tuple[str, ...] = ()

    @property
    def chunk_count(self) -> int:
        return sum(len(r) for r in self.reads.values())

    @property
    def nbytes(self) -> int:
        """An estimate of the memory the plan holds: its arrays plus per-object overheads."""
        total = 4096 + self.zones.nbytes
        total += 0 if self.read_zones is self.zones else self.read_zones.nbytes
        total += 0 if self.take is None else self.take.nbytes
        total += sum(a.nbytes for a in self.extra.values())
        total += 0 if self.analysis is None else self.analysis.nbytes
        total += sum(64 + len(k) for k in self.halo_chunks)
        for read_plan in self.reads.values():
            for chunk in read_plan.reads:
                total += 512 + chunk.columns.nbytes + sum(c.nbytes for c in chunk.cells)
        return int(total)


def _check(limit: str, requested: float, maximum: float, approximate: bool = False) -> None:
    if requested > maximum:
        raise LimitExceeded(limit, math.ceil(requested) if approximate else requested, maximum)


def _estimate_zones(area_m2: float, level: int) -> float:
    return area_m2 / grid.zone_area(level)


def _precheck_area(area_m2: float, level: int, limits: Limits, steps: int) -> None:
    # An estimate from the area, generous enough never to refuse a request the exact
    # count would allow (the exact count is checked after enumeration).
    estimate = _estimate_zones(area_m2, level)
    if estimate > 1.25 * limits.max_zones + 64:
        _check("zones per request", estimate, limits.max_zones, approximate=True)
    if steps and estimate > (1.25 * limits.max_cells) / steps + 64:
        _check("time steps × zones", estimate * steps, limits.max_cells, approximate=True)


def estimate_cells(resolved: Resolved) -> int:
    """About how many (zone, time step, variable) cells the query reads, without
    enumerating zones: an area query's area (clipped to the cube's coverage) over the
    zone area, a disk's ring count, a point list's length.

    Cheap (no zone enumeration, no I/O), so work can be admitted or refused before
    planning; the plan's exact count may differ by the zones along the edges.
    """
    q = resolved.query
    level = resolved.level
    boxes = _boxes(resolved, level)
    zones: float
    if isinstance(q, PointQuery):
        zones = 1.0
    elif isinstance(q, PointsQuery):
        zones = float(np.asarray(q.lat).size)
    elif isinstance(q, DiskQuery):
        zones = 3.0 * q.k * (q.k + 1) + 1
    elif isinstance(q, RadiusQuery):
        circle = math.pi * q.meters**2
        if boxes is not None:
            circle = min(circle, sum(bbox_area(*b) for b in boxes))
        zones = _estimate_zones(circle, level)
    elif isinstance(q, BboxQuery):
        pieces = clip_bbox((q.west, q.south, q.east, q.north), boxes)
        zones = _estimate_zones(sum(bbox_area(*p) for p in pieces), level)
    elif isinstance(q, PolygonQuery):
        area = clip_polygon(q.area, boxes)
        zones = 0.0 if area is None else _estimate_zones(area.area_m2, level)
    else:  # pragma: no cover
        raise TypeError(f"not a query: {q!r}")
    steps = max(0, resolved.t1 - resolved.t0)
    return math.ceil(zones) * steps * len(resolved.variables)


def _boxes(resolved: Resolved, level: int) -> tuple[Box, ...] | None:
    return coverage_boxes(resolved.cube.coverage, level)


def _outside(resolved: Resolved) -> NotFound:
    return outside(resolved.cube_id, resolved.cube.coverage)


def _check_covered(resolved: Resolved, boxes: tuple[Box, ...] | None, ids: np.ndarray) -> None:
    """404 when no zone of the answer has its centre in the (widened) coverage."""
    if boxes is None or ids.size == 0:
        return
    lat, lon = grid.zone_to_point(ids)
    if not covered(boxes, lat, lon).any():
        raise _outside(resolved)


def _locate(
    resolved: Resolved, limits: Limits, level: int | None = None
) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    q = resolved.query
    level = resolved.level if level is None else level
    boxes = _boxes(resolved, level)
    nsteps = resolved.t1 - resolved.t0
    if isinstance(q, PointQuery):
        if boxes is not None and not any(
            w <= q.lon <= e and s <= q.lat <= n for w, s, e, n in boxes
        ):
            raise _outside(resolved)
        return np.atleast_1d(grid.point_to_zone(q.lat, q.lon, level)).astype(np.uint64), {}
    if isinstance(q, DiskQuery):
        _check("k", q.k, limits.max_k)
        _check("zones per request", 3 * q.k * (q.k + 1) + 1, limits.max_zones)
        if q.zone is not None:
            centre = np.asarray(q.zone, dtype=np.uint64)
        else:
            centre = np.asarray(grid.point_to_zone(q.lat, q.lon, level), dtype=np.uint64)
        ids, steps = grid.zone_disk(centre, q.k, return_steps=True)
        _check_covered(resolved, boxes, np.asarray(ids, dtype=np.uint64))
        order = np.lexsort((ids, steps))
        return ids[order], {"steps": np.asarray(steps)[order].astype(np.int32)}
    if isinstance(q, RadiusQuery):
        circle = math.pi * q.meters**2
        if boxes is not None and sum(bbox_area(*b) for b in boxes) < circle:
            _precheck_area(min(circle, sum(bbox_area(*b) for b in boxes)), level, limits, nsteps)
            found = radius_in_coverage(q.lat, q.lon, q.meters, level, boxes)
            if found is None:
                raise _outside(resolved)
            ids, dist = found
        else:
            _precheck_area(circle, level, limits, nsteps)
            ids, dist = grid.zones_in_radius(q.lat, q.lon, q.meters, level, return_distance=True)
            _check_covered(resolved, boxes, np.asarray(ids, dtype=np.uint64))
        order = np.lexsort((ids, dist))
        return ids[order], {"distance_m": np.asarray(dist, dtype=np.float64)[order]}
    if isinstance(q, BboxQuery):
        pieces = clip_bbox((q.west, q.south, q.east, q.north), boxes)
        if not pieces:
            raise _outside(resolved)
        _precheck_area(sum(bbox_area(*p) for p in pieces), level, limits, nsteps)
        if len(pieces) == 1:
            return grid.zones_in_bbox(*pieces[0], level), {}
        parts = [np.asarray(grid.zones_in_bbox(*p, level), dtype=np.uint64) for p in pieces]
        return np.unique(np.concatenate(parts)), {}
    if isinstance(q, PolygonQuery):
        _check("polygon vertices", q.area.vertices, limits.max_polygon_vertices)
        area = clip_polygon(q.area, boxes)
        if area is None:
            raise _outside(resolved)
        _precheck_area(area.area_m2, level, limits, nsteps)
        return grid.zones_in_polygon(area, level), {}
    if isinstance(q, PointsQuery):
        _check("points per request", q.lat.size, limits.max_points)
        if boxes is not None and not covered(boxes, q.lat, q.lon).any():
            raise _outside(resolved)
        zones = grid.point_to_zone(q.lat, q.lon, level).astype(np.uint64).reshape(-1)
        return zones, {"point": np.arange(zones.size, dtype=np.uint32)}
    raise TypeError(f"not a query: {q!r}")  # pragma: no cover


_AREA_LIMITS = ("zones per request", "time steps × zones")


def _fits(resolved: Resolved, limits: Limits, level: int) -> bool:
    """Whether the query's zones at ``level`` stay within the zone and cell limits."""
    try:
        zones, _ = _locate(resolved, limits, level)
    except LimitExceeded:
        return False
    n = int(np.asarray(zones).size)
    return n <= limits.max_zones and n * (resolved.t1 - resolved.t0) <= limits.max_cells


def finest_fitting_level(resolved: Resolved, limits: Limits) -> int | None:
    """The finest of the cube's levels coarser than the query's at which a region query
    (radius, bbox, polygon) stays within the zone and cell limits; ``None`` if none does."""
    if not isinstance(resolved.query, RadiusQuery | BboxQuery | PolygonQuery):
        return None
    coarser = sorted((int(v) for v in resolved.cube.levels if v < resolved.level), reverse=True)
    return next((lv for lv in coarser if _fits(resolved, limits, lv)), None)


def _located(resolved: Resolved, limits: Limits) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """The query's zones; a zone or cell limit refusal names the finest level that fits."""
    try:
        zones, extra = _locate(resolved, limits)
        zones = np.asarray(zones, dtype=np.uint64)
        if not isinstance(resolved.query, PointsQuery):
            steps = resolved.t1 - resolved.t0
            _check("zones per request", int(zones.size), limits.max_zones)
            _check("time steps × zones", steps * int(zones.size), limits.max_cells)
    except LimitExceeded as exc:
        if exc.limit not in _AREA_LIMITS or exc.finest_level is not None:
            raise
        finest = finest_fitting_level(resolved, limits)
        if finest is None:
            raise
        raise LimitExceeded(exc.limit, exc.requested, exc.maximum, finest_level=finest) from None
    return zones, extra


def make_plan(resolved: Resolved, limits: Limits) -> Plan:
    """Zones, per-row extras and chunk keys for a resolved query; checks every limit.

    Raises
    ------
    LimitExceeded
        Too many zones, steps, vertices, points, time steps × zones or bytes.
    """
    zones, extra = _located(resolved, limits)
    if isinstance(resolved.query, PointsQuery):
        read_zones, take = np.unique(zones, return_inverse=True)
    else:
        read_zones, take = zones, None
    _check("zones per request", int(read_zones.size), limits.max_zones)
    sel = resolved.query.selection
    if sel.focal is not None:
        _check("focal_k", sel.focal.k, limits.max_focal_k)
    steps = resolved.t1 - resolved.t0
    analysis = plan_analysis(
        sel, read_zones, np.asarray(resolved.cube.times), resolved.t0, resolved.t1
    )
    targets = read_zones  # the distinct zones answered for
    if analysis is not None:  # the halo and every step read count against the limits
        read_zones = analysis.read_zones
        _check("zones read per request (with the halo)", int(read_zones.size), limits.max_zones)
    _check("time steps × zones", steps * int(read_zones.size), limits.max_cells)
    reads: dict[str, ReadPlan] = {}
    halo_chunks: list[str] = []
    if steps and read_zones.size:
        span = slice(resolved.t0, resolved.t1)
        for var in resolved.variables:
            reads[var] = resolved.cube.plan(var, read_zones, steps=span)
            if analysis is not None and analysis.windows is not None:
                own = set(resolved.cube.plan(var, targets, steps=span).keys)
                halo_chunks += [key for key in reads[var].keys if key not in own]
    total = sum(r.max_bytes for r in reads.values())
    _check("bytes read per request", total, limits.max_read_bytes)
    stats = resolved.query.stats if isinstance(resolved.query, BboxQuery | PolygonQuery) else ()
    plan = Plan(resolved, zones, read_zones, take, extra, total, stats, reads)
    plan.analysis, plan.halo_chunks = analysis, tuple(halo_chunks)
    return plan
