"""OGC API - Environmental Data Retrieval 1.1 routes: conformance, collections, queries.

Every query route reads its parameters into the native query objects of
:mod:`alveary.query` and hands them to :meth:`Service.answer`, so EDR answers take the
path native answers take (resolve, ETag, answer and plan caches, limits, the executor)
and differ only in how parameters are read and answers encoded:

- ``coords`` is WKT (:func:`alveary.query.parse_coords`); ``datetime`` selects the time
  steps whose intervals meet it, every step without it (``Selection.steps="overlap"``);
- answers are CoverageJSON by default, GeoJSON, Arrow or CSV through ``f`` or ``Accept``;
  a query that selects no data is 204 with no body, including one wholly outside the
  cube's coverage (the native API's 404 naming the coverage);
- an invalid or unsupported parameter, including one the operation does not define, is
  400, and every error body is the EDR exception document with problem+json members
  (:mod:`alveary.api._edr_problem`).

Cubes are looked up only through :class:`Service` with the request's credentials (never
its catalogue directly), so a private cube the request may not read is 404 here as on
the native paths, and is left out of ``/collections``.
"""

from __future__ import annotations

import hashlib
from collections.abc import Awaitable, Callable, Coroutine, Mapping
from dataclasses import dataclass
from typing import Annotated, Any

import numpy as np
import orjson
from fastapi import APIRouter, Header, Path, Query, Request
from fastapi.exceptions import RequestValidationError
from fastapi.routing import APIRoute
from starlette.responses import Response
from starlette.types import Scope

from alveary._context import REQUEST_ID
from alveary._errors import AlvearyError, InvalidInput, NotFound, StoreUnavailable
from alveary.api._answers import request_key
from alveary.api._covjson import (
    COVJSON,
    COVJSON_LEGACY,
    covjson_media_type,
    encode_covjson,
    has_data,
)
from alveary.api._edr_docs import (
    OUTPUT_FORMATS,
    collection_document,
    collections_document,
    conformance_document,
    edr_format,
)
from alveary.api._edr_problem import edr_error, exception_body
from alveary.api._encode import encode
from alveary.api._lane import Lane, header, install_lane, plain_args
from alveary.api._openapi30 import openapi_30
from alveary.api._service import Encoder, Service
from alveary.grid import MAX_LEVEL
from alveary.query import (
    STATISTICS,
    BboxQuery,
    CubeSnapshot,
    CubeSource,
    PointQuery,
    PointsQuery,
    PolygonQuery,
    RadiusQuery,
    Resolved,
    Selection,
    StatsResult,
    ZoneResult,
    check_crs,
    check_z,
    coords_area,
    coords_lat_lon,
    parse_bbox,
    parse_coords,
    parse_datetime,
    parse_parameter_names,
    parse_stats,
    within_metres,
)
from alveary.query import (
    Query as CubeQuery,
)

__all__ = ["edr_guard", "install_position_lane", "router"]

PROBLEM = "application/problem+json"
_JSON = "application/json"


class EdrRoute(APIRoute):
    """A route whose errors are EDR's: 400 for invalid or unknown parameters (FastAPI's
    own validation included), the exception body, and a 400 for a query parameter the
    operation does not define or that is given twice."""

    def get_route_handler(self) -> Callable[[Request], Coroutine[Any, Any, Response]]:
        handler = super().get_route_handler()
        known = {p.alias for p in self.dependant.query_params}

        async def guarded(request: Request) -> Response:
            async def checked() -> Response:
                _check_names(request, known)
                return await handler(request)

            try:
                return await edr_guard(request.scope, checked())
            except RequestValidationError as exc:
                return _validation_response(exc)

        return guarded


async def edr_guard(scope: Scope, answering: Awaitable[Response]) -> Response:
    """The response of an EDR operation: domain errors as EDR error documents, a query
    wholly outside the cube's coverage as 204 (the route's and the lane's alike)."""
    try:
        return await answering
    except NotFound as exc:
        if exc.kind == "data":  # wholly outside the cube's coverage: no data
            return Response(status_code=204)
        return _error_response(exc, scope)
    except AlvearyError as exc:
        return _error_response(exc, scope)


def _check_names(request: Request, known: set[str]) -> None:
    params = request.query_params
    for name in params:
        if name not in known:
            allowed = ", ".join(sorted(known)) or "none"
            raise InvalidInput(name, params[name], f"the parameters of this operation: {allowed}")
        if len(params.getlist(name)) > 1:
            raise InvalidInput(name, ",".join(params.getlist(name)), "one value")


def _problem(status: int, body: dict[str, Any], headers: dict[str, str] | None = None) -> Response:
    request_id = REQUEST_ID.get()
    if request_id is not None:
        body = {**body, "request_id": request_id}
    content = orjson.dumps(body, option=orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS)
    return Response(content, status_code=status, media_type=PROBLEM, headers=headers)


def _error_response(exc: AlvearyError, scope: Scope) -> Response:
    status, body = edr_error(exc)
    headers = None
    if isinstance(exc, StoreUnavailable):
        service: Service = scope["app"].state.service
        headers = {"Retry-After": str(service.settings.retry_after)}
    return _problem(status, body, headers)


def _validation_response(exc: RequestValidationError) -> Response:
    errors = exc.errors()
    first = errors[0] if errors else {}
    loc = [str(p) for p in first.get("loc", ()) if p not in ("query", "path", "body", "header")]
    parameter = ".".join(loc) or "request"
    value = first.get("input")
    allowed = f"integers in [0, {MAX_LEVEL}]" if parameter == "level" else None
    message = str(first.get("msg", "invalid"))
    detail = f"{parameter}: {message}" + (f"; allowed: {allowed}" if allowed else "")
    body = exception_body(
        400,
        "Invalid parameter",
        detail,
        parameter=parameter,
        value=value if isinstance(value, str | int | float) else None,
        allowed=allowed,
    )
    return _problem(400, body)


router = APIRouter(tags=["OGC API - EDR"], route_class=EdrRoute)

# --- parameters, declared once --------------------------------------------------------

CollectionId = Annotated[
    str,
    Path(description="Collection id: a cube id, as listed by /collections.", max_length=64),
]
CoordsParam = Annotated[
    str | None,
    Query(
        alias="coords",
        description="WKT, longitude then latitude in degrees (CRS84).",
        examples=["POINT(7.6 45.2)"],
    ),
]
DatetimeParam = Annotated[
    str | None,
    Query(
        alias="datetime",
        description=(
            "RFC 3339 instant or interval start/end ('..' or empty for an open end): "
            "selects every time step whose interval meets it. Default: every step."
        ),
        examples=["2024-05-02T00:00:00Z/2024-05-04T00:00:00Z"],
    ),
]
ParameterNameParam = Annotated[
    str | None,
    Query(
        alias="parameter-name",
        description="Comma-separated parameter (variable) names; default: all.",
    ),
]
ParameterNamesParam = Annotated[
    str | None,
    Query(
        alias="parameter_names",
        description="Alias of parameter-name (the spelling a widely used Python client sends).",
    ),
]
CrsParam = Annotated[
    str | None,
    Query(alias="crs", description="CRS84 only (the default); any other CRS is 400."),
]
FParam = Annotated[
    str | None,
    Query(
        alias="f",
        description=f"Output format: {', '.join(OUTPUT_FORMATS)} (default: Accept, else "
        "CoverageJSON).",
    ),
]
LevelParam = Annotated[
    int | None,
    Query(
        alias="level",
        ge=0,
        le=MAX_LEVEL,
        description=(
            "Vendor parameter: the grid level of the answer, one of the collection's "
            "levels (alveary:levels in its data_queries); default: the finest."
        ),
    ),
]
ZParam = Annotated[
    str | None,
    Query(
        alias="z",
        description="Not supported (400): the collections are surface fields without "
        "vertical levels.",
    ),
]
StatsParam = Annotated[
    str | None,
    Query(
        alias="stats",
        description=(
            "Vendor parameter: statistics per time step over the area instead of values "
            f"per zone, a comma-separated subset of {','.join(STATISTICS)} (or all)."
        ),
    ),
]
WithinParam = Annotated[
    str | None,
    Query(alias="within", description="Radius, in within-units (required)."),
]
WithinUnitsParam = Annotated[
    str | None,
    Query(alias="within-units", description="m, km or mi (required)."),
]
BboxParam = Annotated[
    str | None,
    Query(
        alias="bbox",
        description="west,south,east,north in degrees (required); west > east crosses "
        "the antimeridian.",
        examples=["7.0,45.0,7.5,45.4"],
    ),
]
DocFormatParam = Annotated[
    str | None, Query(alias="f", description="json (the only format of this document).")
]
AcceptHeader = Annotated[str | None, Header(include_in_schema=False)]
IfNoneMatch = Annotated[str | None, Header(include_in_schema=False)]

_QUERY_RESPONSES: dict[int | str, dict[str, Any]] = {
    200: {
        "description": "The answer: CoverageJSON by default; GeoJSON, Arrow IPC stream or "
        "CSV by f or Accept.",
        "content": {
            COVJSON: {"schema": {"type": "object"}},
            COVJSON_LEGACY: {"schema": {"type": "object"}},
            "application/geo+json": {"schema": {"type": "object"}},
            "application/vnd.apache.arrow.stream": {
                "schema": {"type": "string", "format": "binary"}
            },
            "text/csv": {"schema": {"type": "string"}},
        },
    },
    204: {"description": "The query selects no data."},
    304: {"description": "Not modified (If-None-Match matched the ETag)."},
}


def _body_schema(coords: str, stats: bool = False) -> dict[str, Any]:
    properties: dict[str, Any] = {
        "coords": {"type": "string", "description": coords},
        "datetime": {"type": "string"},
        "parameter-name": {"type": "array", "items": {"type": "string"}},
        "parameter_names": {"type": "array", "items": {"type": "string"}},
        "crs": {"type": "string"},
        "z": {"type": "string", "description": "Not supported (400): surface fields."},
        "f": {"type": "string", "enum": list(OUTPUT_FORMATS)},
        "level": {"type": "integer", "minimum": 0, "maximum": MAX_LEVEL},
    }
    if stats:
        properties["stats"] = {"type": "string"}
    return {
        "requestBody": {
            "required": True,
            "content": {
                _JSON: {
                    "schema": {
                        "type": "object",
                        "required": ["coords"],
                        "additionalProperties": False,
                        "properties": properties,
                    }
                }
            },
        }
    }


def _json(body: Any) -> Response:
    return Response(orjson.dumps(body), media_type=_JSON)


def _doc_format(f: str | None) -> None:
    if f is not None and f.strip().lower() not in ("json", _JSON):
        raise InvalidInput("f", f, "json")


# --- metadata ---------------------------------------------------------------------------


@dataclass(frozen=True)
class _Collection:
    """A served cube as the collection documents read it (``CubeLike``)."""

    id: str
    title: str
    levels: tuple[int, ...]
    times: np.ndarray
    variables: Mapping[str, Any]
    coverage: tuple[float, float, float, float]


def _collection(source: CubeSource, snap: CubeSnapshot) -> _Collection:
    title = source.title or snap.title or source.id
    return _Collection(
        source.id, title, snap.levels, np.asarray(snap.times), snap.variables, snap.coverage
    )


@router.get(
    "/conformance",
    operation_id="edr_conformance",
    summary="The conformance classes implemented",
    responses={200: {"content": {_JSON: {"schema": {"type": "object"}}}}},
)
async def conformance(f: DocFormatParam = None) -> Response:
    _doc_format(f)
    return _json(conformance_document())


@router.get(
    "/collections",
    operation_id="edr_collections",
    summary="Every cube as an EDR collection",
    responses={200: {"content": {_JSON: {"schema": {"type": "object"}}}}},
)
async def collections(request: Request, f: DocFormatParam = None) -> Response:
    _doc_format(f)
    service: Service = request.app.state.service
    credentials = await service.credentials(request.scope)
    cubes = [_collection(source, snap) for source, snap in service.served_all(credentials)]
    return _json(collections_document(cubes))


@router.get(
    "/collections/{cube}",
    operation_id="edr_collection",
    summary="One cube as an EDR collection: extent, parameters, queries",
    responses={200: {"content": {_JSON: {"schema": {"type": "object"}}}}},
)
async def collection(request: Request, cube: CollectionId, f: DocFormatParam = None) -> Response:
    _doc_format(f)
    service: Service = request.app.state.service
    source, snap = service.served(cube, await service.credentials(request.scope))
    return _json(collection_document(_collection(source, snap)))


@router.get("/openapi-3.0.json", include_in_schema=False)
async def openapi_document_30(request: Request) -> Response:
    """The API definition in OpenAPI 3.0, for clients that read only 3.0 (the landing
    page links it as a second ``service-desc``)."""
    state = request.app.state
    body = getattr(state, "openapi_30", None)
    if body is None:
        body = orjson.dumps(openapi_30(request.app.openapi()))
        state.openapi_30 = body
    return Response(body, media_type="application/vnd.oai.openapi+json;version=3.0")


# --- queries ----------------------------------------------------------------------------


@dataclass(frozen=True)
class _Common:
    """The parameters every query shares, as sent."""

    datetime: str | None = None
    names: str | None = None
    names_alias: str | None = None
    crs: str | None = None
    f: str | None = None
    level: int | None = None
    z: str | None = None

    def selection(self) -> Selection:
        check_crs(self.crs)
        check_z(self.z)
        variables = parse_parameter_names(self.names, self.names_alias)
        return Selection(self.level, variables, parse_datetime(self.datetime), steps="overlap")


def _links(cube_id: str) -> bytes:
    link = {"href": f"/collections/{cube_id}", "rel": "collection", "type": _JSON}
    return orjson.dumps([link])


def _encoder(fmt: str, media: str, geometry: dict[str, Any] | None) -> Encoder:
    """The EDR encoding of an answer: None (204) when it holds no data."""

    def write(result: ZoneResult | StatsResult, resolved: Resolved) -> tuple[bytes, str] | None:
        if not has_data(result):
            return None
        if fmt == "covjson":
            times = np.asarray(resolved.cube.times)
            return encode_covjson(result, geometry=geometry, time_axis=times), media
        body, media_type = encode(result, fmt, geometry=geometry)
        if fmt == "geojson":  # /req/geojson/content B: links beside the features
            body = body[:-1] + b',"links":' + _links(result.cube) + b"}"
        return body, media_type

    return write


async def _answer(
    scope: Scope,
    cube: str,
    query: CubeQuery,
    common: _Common,
    accept: str | None,
    if_none_match: str | None,
    operation: str,
    geometry: dict[str, Any] | None = None,
) -> Response:
    """Hand a query to the service with the EDR encoder."""
    service: Service = scope["app"].state.service
    fmt = edr_format(common.f, accept)
    media = covjson_media_type(accept) if fmt == "covjson" else ""
    stats = isinstance(query, BboxQuery | PolygonQuery) and bool(query.stats)
    name = f"edr-{fmt}" + ("-legacy" if media == COVJSON_LEGACY else "")
    if stats and geometry is not None:
        if fmt == "covjson" and geometry.get("type") != "Polygon":
            raise InvalidInput(
                "stats",
                "with f=CoverageJSON over a " + str(geometry.get("type")),
                "statistics over one POLYGON (a bbox not crossing the antimeridian) in "
                "CoverageJSON; f=GeoJSON serves them over a MULTIPOLYGON",
            )
        # The answer carries the polygon as given: it is part of the ETag.
        digest = hashlib.blake2b(orjson.dumps(geometry), digest_size=8).hexdigest()
        name += f"-{digest}"
    return await service.answer(
        cube,
        query,
        name,
        if_none_match,
        credentials=await service.credentials(scope),
        geometry=geometry if stats else None,
        key=request_key(scope),
        encoder=_encoder(fmt, media, geometry if stats else None),
        operation=operation,
    )


def _required(name: str, value: Any, allowed: str) -> Any:
    if value is None or (isinstance(value, str) and not value.strip()):
        raise InvalidInput(name, None, allowed)
    return value


def _position_query(coords: str | None, common: _Common, service: Service) -> CubeQuery:
    text = _required("coords", coords, "WKT POINT(lon lat) or MULTIPOINT((lon lat), ...)")
    limit = service.limits.max_points
    geometry = parse_coords(text, ("Point", "MultiPoint"), max_positions=limit)
    lat, lon = coords_lat_lon(geometry)
    sel = common.selection()
    if geometry["type"] == "Point":
        return PointQuery(float(lat[0]), float(lon[0]), sel)
    return PointsQuery(lat, lon, sel)


def _area_query(
    coords: str | None, stats: str | None, common: _Common, service: Service
) -> tuple[CubeQuery, dict[str, Any]]:
    text = _required("coords", coords, "WKT POLYGON((lon lat, ...)) or MULTIPOLYGON(...)")
    area = coords_area(text, service.limits.max_polygon_vertices)
    given = parse_coords(text, ("Polygon", "MultiPolygon"))
    return PolygonQuery(area, parse_stats(stats), common.selection()), given


_POSITION = "Time series at the zone under a point, or under each point of a MULTIPOINT"
_AREA = "Values or statistics of the zones whose centres lie in a polygon"


@router.get(
    "/collections/{cube}/position",
    operation_id="edr_position",
    summary=_POSITION,
    description=(
        "`coords` is a WKT `POINT(lon lat)` (a CoverageJSON PointSeries at the zone "
        "centre) or `MULTIPOINT` (a MultiPointSeries, one row per point)."
    ),
    responses=_QUERY_RESPONSES,
)
async def position(
    request: Request,
    cube: CollectionId,
    coords: CoordsParam = None,
    datetime: DatetimeParam = None,
    parameter_name: ParameterNameParam = None,
    parameter_names: ParameterNamesParam = None,
    crs: CrsParam = None,
    f: FParam = None,
    level: LevelParam = None,
    z: ZParam = None,
    accept: AcceptHeader = None,
    if_none_match: IfNoneMatch = None,
) -> Response:
    common = _Common(datetime, parameter_name, parameter_names, crs, f, level, z)
    query = _position_query(coords, common, request.app.state.service)
    return await _answer(request.scope, cube, query, common, accept, if_none_match, "edr_position")


# The hot path of field apps (one POINT per GPS fix) takes a lean lane (alveary.api._lane):
# the route's own functions and error handling without FastAPI's parameter machinery;
# an unknown or repeated parameter, crs, z or a level that is not plainly an integer in
# range goes to the route.
_POSITION_KEYS = frozenset(
    {"coords", "datetime", "parameter-name", "parameter_names", "f", "level"}
)


def _position_args(scope: Scope) -> dict[str, Any] | None:
    args: dict[str, Any] | None = plain_args(scope, _POSITION_KEYS)
    if args is None or len(scope["path_params"]["cube"]) > 64:
        return None
    level = args.get("level")
    if level is not None:
        if not (level.isdigit() and int(level) <= MAX_LEVEL):
            return None
        args["level"] = int(level)
    return args


async def _position_lane(scope: Scope, args: dict[str, Any]) -> Response:
    async def answering() -> Response:
        common = _Common(
            args.get("datetime"),
            args.get("parameter-name"),
            args.get("parameter_names"),
            f=args.get("f"),
            level=args.get("level"),
        )
        query = _position_query(args.get("coords"), common, scope["app"].state.service)
        accept, if_none_match = header(scope, b"accept"), header(scope, b"if-none-match")
        cube = scope["path_params"]["cube"]
        return await _answer(scope, cube, query, common, accept, if_none_match, "edr_position")

    return await edr_guard(scope, answering())


def install_position_lane(app: Any) -> None:
    """Put the lane of ``GET /collections/{cube}/position`` in front of the routers."""
    lane = Lane("edr_position", _position_args, _position_lane)
    install_lane(app, "/collections/{cube}/position", lane)


@router.get(
    "/collections/{cube}/radius",
    operation_id="edr_radius",
    summary="Values of the zones whose centres lie within a distance of a point",
    description=(
        "`coords` is a WKT `POINT(lon lat)`; `within` and `within-units` are required. "
        "Zones nearest first (geodesic distance on WGS84), as a MultiPointSeries."
    ),
    responses=_QUERY_RESPONSES,
)
async def radius(
    request: Request,
    cube: CollectionId,
    coords: CoordsParam = None,
    within: WithinParam = None,
    within_units: WithinUnitsParam = None,
    datetime: DatetimeParam = None,
    parameter_name: ParameterNameParam = None,
    parameter_names: ParameterNamesParam = None,
    crs: CrsParam = None,
    f: FParam = None,
    level: LevelParam = None,
    z: ZParam = None,
    accept: AcceptHeader = None,
    if_none_match: IfNoneMatch = None,
) -> Response:
    common = _Common(datetime, parameter_name, parameter_names, crs, f, level, z)
    text = _required("coords", coords, "WKT POINT(lon lat)")
    lat, lon = coords_lat_lon(parse_coords(text, ("Point",)))
    metres = within_metres(within, within_units)
    query = RadiusQuery(float(lat[0]), float(lon[0]), metres, False, common.selection())
    return await _answer(request.scope, cube, query, common, accept, if_none_match, "edr_radius")


@router.get(
    "/collections/{cube}/area",
    operation_id="edr_area",
    summary=_AREA,
    description=(
        "`coords` is a WKT `POLYGON` or `MULTIPOLYGON` (holes kept; edges the short way "
        "round). Zones as a MultiPointSeries; with `stats`, a PolygonSeries of statistics "
        "per time step. POST the same parameters as JSON for long polygons."
    ),
    responses=_QUERY_RESPONSES,
)
async def area(
    request: Request,
    cube: CollectionId,
    coords: CoordsParam = None,
    datetime: DatetimeParam = None,
    parameter_name: ParameterNameParam = None,
    parameter_names: ParameterNamesParam = None,
    crs: CrsParam = None,
    f: FParam = None,
    level: LevelParam = None,
    z: ZParam = None,
    stats: StatsParam = None,
    accept: AcceptHeader = None,
    if_none_match: IfNoneMatch = None,
) -> Response:
    common = _Common(datetime, parameter_name, parameter_names, crs, f, level, z)
    query, given = _area_query(coords, stats, common, request.app.state.service)
    return await _answer(
        request.scope, cube, query, common, accept, if_none_match, "edr_area", geometry=given
    )


@router.get(
    "/collections/{cube}/cube",
    operation_id="edr_cube",
    summary="Values or statistics of the zones whose centres lie in a bounding box",
    description=(
        "`bbox` is required; `z` is refused (surface fields). Zones as a "
        "MultiPointSeries; with `stats`, a PolygonSeries on the box."
    ),
    responses=_QUERY_RESPONSES,
)
async def cube_query(
    request: Request,
    cube: CollectionId,
    bbox: BboxParam = None,
    datetime: DatetimeParam = None,
    parameter_name: ParameterNameParam = None,
    parameter_names: ParameterNamesParam = None,
    crs: CrsParam = None,
    f: FParam = None,
    level: LevelParam = None,
    z: ZParam = None,
    stats: StatsParam = None,
    accept: AcceptHeader = None,
    if_none_match: IfNoneMatch = None,
) -> Response:
    common = _Common(datetime, parameter_name, parameter_names, crs, f, level, z)
    box = _required("bbox", bbox, "west,south,east,north in degrees")
    west, south, east, north = parse_bbox(box)
    query = BboxQuery(west, south, east, north, parse_stats(stats), common.selection())
    return await _answer(
        request.scope,
        cube,
        query,
        common,
        accept,
        if_none_match,
        "edr_cube",
        geometry=_box_geometry(west, south, east, north),
    )


def _box_geometry(west: float, south: float, east: float, north: float) -> dict[str, Any]:
    def ring(w: float, e: float) -> list[list[list[float]]]:
        return [[[w, south], [e, south], [e, north], [w, north], [w, south]]]

    if west <= east:
        return {"type": "Polygon", "coordinates": ring(west, east)}
    return {"type": "MultiPolygon", "coordinates": [ring(west, 180.0), ring(-180.0, east)]}


# --- POST: the same parameters as a JSON object -------------------------------------------

_BODY_KEYS = {"coords", "datetime", "parameter-name", "parameter_names", "crs", "f", "level", "z"}


async def _body(request: Request, extra: set[str]) -> dict[str, Any]:
    raw = await request.body()
    try:
        body = orjson.loads(raw)
    except orjson.JSONDecodeError:
        raise InvalidInput("body", f"{len(raw)} bytes", "a JSON object") from None
    if not isinstance(body, dict):
        raise InvalidInput("body", type(body).__name__, "a JSON object")
    allowed = _BODY_KEYS | extra
    for name, value in body.items():
        if name not in allowed:
            raise InvalidInput(name, _short(value), f"members {', '.join(sorted(allowed))}")
    for name in ("parameter-name", "parameter_names"):
        value = body.get(name)
        if isinstance(value, list):
            if not all(isinstance(v, str) for v in value):
                raise InvalidInput(name, _short(value), "a list of parameter names")
            body[name] = ",".join(value)
    for name, value in body.items():
        if name == "level":
            if value is not None and (not isinstance(value, int) or isinstance(value, bool)):
                raise InvalidInput("level", _short(value), f"integers in [0, {MAX_LEVEL}]")
            if value is not None and not 0 <= value <= MAX_LEVEL:
                raise InvalidInput("level", value, f"integers in [0, {MAX_LEVEL}]")
        elif value is not None and not isinstance(value, str):
            raise InvalidInput(name, _short(value), "a string")
    return body


def _short(value: Any) -> str:
    text = orjson.dumps(value).decode() if not isinstance(value, str) else value
    return text if len(text) <= 100 else text[:97] + "..."


def _common_of(body: dict[str, Any], f: str | None) -> _Common:
    if f is not None and body.get("f") is not None:
        raise InvalidInput("f", f, "f in the query string or in the body, not both")
    return _Common(
        body.get("datetime"),
        body.get("parameter-name"),
        body.get("parameter_names"),
        body.get("crs"),
        f if f is not None else body.get("f"),
        body.get("level"),
        body.get("z"),
    )


@router.post(
    "/collections/{cube}/position",
    operation_id="edr_position_post",
    summary=_POSITION + " (parameters in a JSON body)",
    responses=_QUERY_RESPONSES,
    openapi_extra=_body_schema("WKT POINT or MULTIPOINT"),
)
async def position_post(
    request: Request,
    cube: CollectionId,
    f: FParam = None,
    accept: AcceptHeader = None,
    if_none_match: IfNoneMatch = None,
) -> Response:
    body = await _body(request, set())
    common = _common_of(body, f)
    query = _position_query(body.get("coords"), common, request.app.state.service)
    return await _answer(request.scope, cube, query, common, accept, if_none_match, "edr_position")


@router.post(
    "/collections/{cube}/area",
    operation_id="edr_area_post",
    summary=_AREA + " (parameters in a JSON body, for long polygons)",
    responses=_QUERY_RESPONSES,
    openapi_extra=_body_schema("WKT POLYGON or MULTIPOLYGON", stats=True),
)
async def area_post(
    request: Request,
    cube: CollectionId,
    f: FParam = None,
    accept: AcceptHeader = None,
    if_none_match: IfNoneMatch = None,
) -> Response:
    body = await _body(request, {"stats"})
    common = _common_of(body, f)
    service = request.app.state.service
    query, given = _area_query(body.get("coords"), body.get("stats"), common, service)
    return await _answer(
        request.scope, cube, query, common, accept, if_none_match, "edr_area", geometry=given
    )
