"""Cube routes: the catalogue and every spatial query. Each route only builds a query
object from its parameters and hands it to :meth:`Service.answer`."""

from __future__ import annotations

from typing import Any
from urllib.parse import quote

import numpy as np
import orjson
from fastapi import APIRouter, Depends, Request
from starlette.responses import Response
from starlette.types import Scope

from alveary._errors import InvalidInput, LimitExceeded
from alveary.api._answers import request_key
from alveary.api._encode import negotiate
from alveary.api._lane import Lane, finite_in, header, install_lane, plain_args
from alveary.api._schemas import (
    CubeList,
    CubeMeta,
    StatsAnswer,
    ZonesAnswer,
    geometry_body_schema,
)
from alveary.api._service import Service
from alveary.api.deps import (
    CUBE_FORMATS,
    AcceptHeader,
    AggParam,
    AnomalyParam,
    BboxParam,
    ClimatologyParam,
    CredentialsDep,
    CubeId,
    DatetimeParam,
    EveryParam,
    FocalKParam,
    FocalParam,
    FormatDep,
    FormatParam,
    IfNoneMatch,
    KernelParam,
    KParam,
    LatParam,
    LevelParam,
    LonParam,
    MetersParam,
    NearestParam,
    OptLatParam,
    OptLonParam,
    SelectionDep,
    ServiceDep,
    StatsDep,
    VarsParam,
    ZoneParam,
    known_parameters,
    make_selection,
    service_selection,
)
from alveary.grid import MAX_LEVEL
from alveary.query import (
    BboxQuery,
    DiskQuery,
    PointQuery,
    PointsQuery,
    PolygonQuery,
    RadiusQuery,
    ServedCube,
    format_time,
    parse_bbox,
    parse_polygon,
    parse_zone,
)

__all__ = ["install_point_lane", "point_lane", "router"]

router = APIRouter(tags=["cubes"], dependencies=[Depends(known_parameters())])

_OTHER_FORMATS: dict[int | str, dict[str, Any]] = {
    200: {
        "description": "The answer. JSON by default; GeoJSON, Arrow IPC stream or CSV by "
        "Accept or f.",
        "content": {
            "application/geo+json": {"schema": {"type": "object"}},
            "application/vnd.apache.arrow.stream": {
                "schema": {"type": "string", "format": "binary"}
            },
            "text/csv": {"schema": {"type": "string"}},
        },
    },
    304: {"description": "Not modified (If-None-Match matched the ETag)."},
}


def _json(body: Any, status: int = 200) -> Response:
    return Response(orjson.dumps(body), status_code=status, media_type="application/json")


def _cube_meta(
    cube_id: str, title: str | None, cube: ServedCube | None, full: bool
) -> dict[str, Any]:
    links = [
        {"href": f"/cubes/{cube_id}", "rel": "self" if full else "item", "type": "application/json"}
    ]
    if cube is not None:
        links += _map_links(cube_id)
    if cube is None:
        return {
            "id": cube_id,
            "title": title or cube_id,
            "available": False,
            "version": None,
            "levels": [],
            "variables": {},
            "time": None,
            "coverage": None,
            "links": links,
        }
    snap = cube.snapshot()
    text = format_time(snap.times)
    axis: dict[str, Any] = {
        "start": text[0] if text else None,
        "end": text[-1] if text else None,
        "steps": len(text),
    }
    if full:
        axis["values"] = text
    variables = {
        name: {"units": meta.units, "long_name": meta.long_name}
        for name, meta in snap.variables.items()
    }
    return {
        "id": cube_id,
        "title": title or snap.title or cube_id,
        "available": True,
        "version": snap.version,
        "levels": list(snap.levels),
        "variables": variables,
        "time": axis,
        "coverage": list(snap.coverage),
        "links": links,
    }


def _map_links(cube_id: str) -> list[dict[str, str]]:
    """Links from a cube to its map page, map tiles, vector tiles and legend."""
    cid = quote(cube_id)
    return [
        {"href": f"/map?cube={cid}", "rel": "alternate", "type": "text/html", "title": "map"},
        {
            "href": f"/collections/{cid}/map/tiles",
            "rel": "http://www.opengis.net/def/rel/ogc/1.0/tilesets-map",
            "type": "application/json",
            "title": "map tiles",
        },
        {
            "href": f"/collections/{cid}/tiles",
            "rel": "http://www.opengis.net/def/rel/ogc/1.0/tilesets-vector",
            "type": "application/json",
            "title": "zones as vector tiles",
        },
    ]


@router.get(
    "/cubes",
    operation_id="list_cubes",
    summary="List the cubes this server publishes",
    response_model=CubeList,
)
async def list_cubes(service: ServiceDep, credentials: CredentialsDep) -> Response:
    readable = service.cubes_for(credentials)
    out = [_cube_meta(s.id, s.title, cube, full=False) for s, cube in readable]
    return _json({"cubes": out})


@router.get(
    "/cubes/{cube}",
    operation_id="get_cube",
    summary="One cube: variables, units, levels, time axis, coverage and version",
    response_model=CubeMeta,
)
async def get_cube(service: ServiceDep, credentials: CredentialsDep, cube: CubeId) -> Response:
    source = service.source_for(cube, credentials)
    obj = service.cube_for(cube, credentials)
    return _json(_cube_meta(cube, source.title, obj, full=True))


@router.get(
    "/cubes/{cube}/point",
    operation_id="query_point",
    summary="Values at the zone under a point",
    description=(
        "The zone under (lat, lon) at a level (default: the cube's finest), its id and "
        "centre, and the values of the selected variables at an instant or over an interval."
    ),
    response_model=ZonesAnswer,
    responses=_OTHER_FORMATS,
)
async def query_point(
    request: Request,
    cube: CubeId,
    lat: LatParam,
    lon: LonParam,
    level: LevelParam = None,
    vars_: VarsParam = None,
    time: DatetimeParam = None,
    f: FormatParam = None,
    accept: AcceptHeader = None,
    if_none_match: IfNoneMatch = None,
    focal: FocalParam = None,
    focal_k: FocalKParam = None,
    kernel: KernelParam = None,
    every: EveryParam = None,
    agg: AggParam = None,
    climatology: ClimatologyParam = None,
    anomaly: AnomalyParam = None,
) -> Response:
    # Parameters are flat here (no sub-dependencies): this is the hot path of dashboards.
    service: Service = request.app.state.service
    analysis = (focal, focal_k, kernel, every, agg, climatology, anomaly)
    sel = service_selection(service, level, vars_, time, *analysis)
    fmt = negotiate(f, accept, CUBE_FORMATS)
    query = PointQuery(lat, lon, sel)
    credentials = await service.credentials(request.scope)
    key = request_key(request.scope)
    return await service.answer(cube, query, fmt, if_none_match, credentials=credentials, key=key)


@router.get(
    "/cubes/{cube}/disk",
    operation_id="query_disk",
    summary="Values of every zone within k steps of a zone",
    description=(
        "The centre is the zone under (lat, lon) or a given zone id; each answered zone "
        "carries its step distance from the centre (0 for the centre itself). Zones are "
        "ordered by steps, then id."
    ),
    response_model=ZonesAnswer,
    responses=_OTHER_FORMATS,
)
async def query_disk(
    request: Request,
    service: ServiceDep,
    credentials: CredentialsDep,
    cube: CubeId,
    k: KParam,
    sel: SelectionDep,
    fmt: FormatDep,
    lat: OptLatParam = None,
    lon: OptLonParam = None,
    zone: ZoneParam = None,
    if_none_match: IfNoneMatch = None,
) -> Response:
    zone_id = parse_zone(zone, "zone") if zone is not None else None
    query = DiskQuery(k=k, lat=lat, lon=lon, zone=zone_id, selection=sel)
    key = request_key(request.scope)
    return await service.answer(cube, query, fmt, if_none_match, credentials=credentials, key=key)


@router.get(
    "/cubes/{cube}/radius",
    operation_id="query_radius",
    summary="Values of the zones whose centres lie within a distance of a point",
    description=(
        "Zones whose centres lie within `meters` (geodesic distance on WGS84) of (lat, lon), "
        "nearest first, each with its distance in metres. With `nearest=true` only the "
        "nearest zone that has data (any selected variable, any selected step)."
    ),
    response_model=ZonesAnswer,
    responses=_OTHER_FORMATS,
)
async def query_radius(
    request: Request,
    service: ServiceDep,
    credentials: CredentialsDep,
    cube: CubeId,
    lat: LatParam,
    lon: LonParam,
    meters: MetersParam,
    sel: SelectionDep,
    fmt: FormatDep,
    nearest: NearestParam = False,
    if_none_match: IfNoneMatch = None,
) -> Response:
    query = RadiusQuery(lat, lon, meters, nearest, sel)
    key = request_key(request.scope)
    return await service.answer(cube, query, fmt, if_none_match, credentials=credentials, key=key)


_AREA_DOC = (
    " With `stats`, one row per time step: mean, min, max, sum, count and std over the "
    "zones with data, and the area they cover. The grid is equal-area, so the plain mean "
    "over zones is the area mean (the twelve pentagons, 5/6 of a hexagon, are weighted by "
    "their area)."
)


@router.get(
    "/cubes/{cube}/bbox",
    operation_id="query_bbox",
    summary="Values or statistics of the zones whose centres lie in a bounding box",
    description="Zones whose centres lie in the box, ids ascending." + _AREA_DOC,
    response_model=ZonesAnswer | StatsAnswer,
    responses=_OTHER_FORMATS,
)
async def query_bbox(
    request: Request,
    service: ServiceDep,
    credentials: CredentialsDep,
    cube: CubeId,
    bbox: BboxParam,
    sel: SelectionDep,
    fmt: FormatDep,
    stats: StatsDep,
    if_none_match: IfNoneMatch = None,
) -> Response:
    west, south, east, north = parse_bbox(bbox)
    query = BboxQuery(west, south, east, north, stats, sel)
    geometry = None
    if stats and fmt == "geojson":
        geometry = _bbox_geometry(west, south, east, north)
    key = request_key(request.scope)
    return await service.answer(
        cube, query, fmt, if_none_match, credentials=credentials, geometry=geometry, key=key
    )


def _bbox_geometry(west: float, south: float, east: float, north: float) -> dict[str, Any]:
    def ring(w: float, e: float) -> list[list[list[float]]]:
        return [[[w, south], [e, south], [e, north], [w, north], [w, south]]]

    if west <= east:
        return {"type": "Polygon", "coordinates": ring(west, east)}
    return {"type": "MultiPolygon", "coordinates": [ring(west, 180.0), ring(-180.0, east)]}


async def _json_body(request: Request) -> Any:
    raw = await request.body()
    try:
        return orjson.loads(raw)
    except orjson.JSONDecodeError:
        raise InvalidInput("body", f"{len(raw)} bytes", "a JSON document") from None


@router.post(
    "/cubes/{cube}/polygon",
    operation_id="query_polygon",
    summary="Values or statistics of the zones whose centres lie in a polygon",
    description=(
        "The body is a GeoJSON Polygon or MultiPolygon, or a Feature holding one (RFC 7946). "
        "Holes are respected; a polygon crossing the antimeridian may be cut there or have "
        "an edge that steps across it." + _AREA_DOC
    ),
    response_model=ZonesAnswer | StatsAnswer,
    responses=_OTHER_FORMATS,
    openapi_extra={
        "requestBody": {
            "required": True,
            "content": {"application/json": {"schema": geometry_body_schema()}},
        }
    },
)
async def query_polygon(
    request: Request,
    service: ServiceDep,
    credentials: CredentialsDep,
    cube: CubeId,
    sel: SelectionDep,
    fmt: FormatDep,
    stats: StatsDep,
    if_none_match: IfNoneMatch = None,
) -> Response:
    body = await _json_body(request)
    area = parse_polygon(body, service.limits.max_polygon_vertices)
    props = _feature_properties(body)
    text = orjson.dumps(props, option=orjson.OPT_SORT_KEYS).decode() if props else ""
    query = PolygonQuery(area, stats, sel, properties=text)
    geometry: dict[str, Any] | None = None
    if stats and fmt == "geojson":
        # The polygon as read (RFC 7946: exterior rings counter-clockwise, cut at the
        # antimeridian), as a Feature keeping the posted Feature's properties.
        geometry = {"type": "Feature", "geometry": area.geometry, "properties": props or {}}
    return await service.answer(
        cube, query, fmt, if_none_match, credentials=credentials, geometry=geometry
    )


def _feature_properties(body: Any) -> dict[str, Any] | None:
    """A posted Feature's properties (None for a bare geometry or null properties)."""
    if isinstance(body, dict) and body.get("type") == "Feature":
        props = body.get("properties")
        if isinstance(props, dict) and props:
            return props
    return None


@router.post(
    "/cubes/{cube}/points",
    operation_id="query_points",
    summary="Values at many points at once",
    description=(
        "For pipelines: a body of equal-length `lat` and `lon` arrays; one answer row per "
        "point (and time step), with `point` the index of the input point. Arrow is the "
        "natural format."
    ),
    response_model=ZonesAnswer,
    responses=_OTHER_FORMATS,
    openapi_extra={
        "requestBody": {
            "required": True,
            "content": {
                "application/json": {"schema": {"$ref": "#/components/schemas/PointsBody"}}
            },
        }
    },
)
async def query_points(
    request: Request,
    service: ServiceDep,
    credentials: CredentialsDep,
    cube: CubeId,
    sel: SelectionDep,
    fmt: FormatDep,
    if_none_match: IfNoneMatch = None,
) -> Response:
    body = await _json_body(request)
    if not isinstance(body, dict) or set(body) != {"lat", "lon"}:
        raise InvalidInput("body", _keys(body), 'an object {"lat": [...], "lon": [...]}')
    lat, lon = body["lat"], body["lon"]
    for name, values in (("lat", lat), ("lon", lon)):
        if not isinstance(values, list) or not all(
            isinstance(v, int | float) and not isinstance(v, bool) for v in values
        ):
            raise InvalidInput(name, "not a list of numbers", "a list of numbers (degrees)")
    if len(lat) > service.limits.max_points:
        raise LimitExceeded("points per request", len(lat), service.limits.max_points)
    if not lat:
        raise InvalidInput("lat", "[]", "at least one point")
    query = PointsQuery(np.asarray(lat, dtype=float), np.asarray(lon, dtype=float), sel)
    return await service.answer(cube, query, fmt, if_none_match, credentials=credentials)


def _keys(body: Any) -> str:
    if isinstance(body, dict):
        return "an object with keys " + ",".join(sorted(map(str, body)))[:100]
    return type(body).__name__


# -- the point lane -------------------------------------------------------------------------
#
# GET /cubes/{cube}/point is answered first by a lean lane (alveary.api._lane): plainly
# valid parameters are read here, anything else goes to query_point itself.

_POINT_KEYS = frozenset({"lat", "lon", "level", "vars", "datetime", "f"})


def _point_args(scope: Scope) -> dict[str, Any] | None:
    """The point parameters if they are plainly valid, else None (the route decides)."""
    args = plain_args(scope, _POINT_KEYS)
    if args is None:
        return None
    lat = finite_in(args.get("lat", ""), -90.0, 90.0)
    lon = finite_in(args.get("lon", ""), -180.0, 180.0)
    if lat is None or lon is None:
        return None
    level = args.get("level")
    if level is not None and not (level.isdigit() and int(level) <= MAX_LEVEL):
        return None
    f = args.get("f")
    if f is not None and f not in CUBE_FORMATS:
        return None
    if len(args.get("vars", "")) > 1000 or len(args.get("datetime", "")) > 100:
        return None
    return {
        "lat": lat,
        "lon": lon,
        "level": None if level is None else int(level),
        "vars": args.get("vars"),
        "datetime": args.get("datetime"),
        "f": f,
    }


async def _point_answer(scope: Scope, args: dict[str, Any]) -> Response:
    """What query_point answers for plainly valid parameters."""
    service: Service = scope["app"].state.service
    sel = make_selection(args["level"], args["vars"], args["datetime"])
    fmt = negotiate(args["f"], header(scope, b"accept"), CUBE_FORMATS)
    query = PointQuery(args["lat"], args["lon"], sel)
    cube = scope["path_params"]["cube"]
    credentials = await service.credentials(scope)
    return await service.answer(
        cube,
        query,
        fmt,
        header(scope, b"if-none-match"),
        credentials=credentials,
        key=request_key(scope),
    )


def point_lane() -> Lane[dict[str, Any]]:
    """The lane of ``GET /cubes/{cube}/point``."""
    return Lane("query_point", _point_args, _point_answer)


def install_point_lane(app: Any) -> None:
    """Put the point lane in front of the routers (call before including them)."""
    install_lane(app, "/cubes/{cube}/point", point_lane())
