"""Request dependencies and parameters, as named ``Annotated`` aliases.

Every query parameter the API takes is declared once here with its bounds, description
and an example, so every operation documents it the same way.
"""

from __future__ import annotations

import re
from collections.abc import Awaitable, Callable
from typing import Annotated, Any, Literal

from fastapi import Depends, Header, HTTPException, Path, Query, Request

from alveary._errors import InvalidInput
from alveary.api._access import Credentials
from alveary.api._encode import negotiate
from alveary.api._service import Service
from alveary.grid import MAX_LEVEL
from alveary.query import Selection, parse_datetime, parse_stats, parse_vars

__all__ = [
    "AcceptHeader",
    "BboxParam",
    "CredentialsDep",
    "CubeFormat",
    "CubeId",
    "FormatParam",
    "IfNoneMatch",
    "KParam",
    "LatParam",
    "LonParam",
    "MetersParam",
    "NearestParam",
    "OptLatParam",
    "OptLonParam",
    "SelectionDep",
    "ServiceDep",
    "StatsParam",
    "ZoneFormat",
    "ZoneParam",
    "ZonePath",
    "declared_query_parameters",
    "known_parameters",
]


async def get_service(request: Request) -> Service:
    service: Service = request.app.state.service
    return service


ServiceDep = Annotated[Service, Depends(get_service)]


async def get_credentials(request: Request) -> Credentials:
    """What the request's API key proves; hand it to Service.cube_for / cubes_for."""
    service: Service = request.app.state.service
    return await service.credentials(request.scope)


CredentialsDep = Annotated[Credentials, Depends(get_credentials)]

CubeId = Annotated[
    str,
    Path(description="Cube id, as listed by /cubes.", examples=["demo"], max_length=64),
]
LatParam = Annotated[
    float,
    Query(ge=-90, le=90, description="Latitude, degrees north (WGS84).", examples=[45.2]),
]
LonParam = Annotated[
    float,
    Query(ge=-180, le=180, description="Longitude, degrees east (WGS84).", examples=[7.6]),
]
OptLatParam = Annotated[
    float | None,
    Query(
        ge=-90, le=90, description="Latitude of the centre point (or give zone).", examples=[45.2]
    ),
]
OptLonParam = Annotated[
    float | None,
    Query(
        ge=-180, le=180, description="Longitude of the centre point (or give zone).", examples=[7.6]
    ),
]
ZoneParam = Annotated[
    str | None,
    Query(
        description="Centre zone: integer id or text form (instead of lat and lon).",
        max_length=32,
        examples=["7c-12-34"],
    ),
]
ZonePath = Annotated[
    str,
    Path(description="Zone: integer id or text form such as 7c-12-34.", max_length=32),
]
LevelParam = Annotated[
    int | None,
    Query(ge=0, le=MAX_LEVEL, description="Refinement level; default: the cube's finest."),
]
VarsParam = Annotated[
    str | None,
    Query(
        alias="vars",
        description="Comma-separated variable names; default: every variable.",
        max_length=1000,
    ),
]
DatetimeParam = Annotated[
    str | None,
    Query(
        alias="datetime",
        description=(
            "RFC 3339 instant (the time step in force then: the latest at or before it), "
            "or interval start/end with '..' for an open end (both ends included). "
            "Default: the latest time step."
        ),
        max_length=100,
        examples=["2024-06-01T00:00:00Z/.."],
    ),
]
KParam = Annotated[
    int,
    Query(
        ge=0,
        le=10_000,
        description="Rings around the centre zone (0: the zone alone).",
        examples=[2],
    ),
]
MetersParam = Annotated[
    float,
    Query(
        ge=0,
        le=20_037_509,
        description="Radius in metres (geodesic, WGS84), e.g. a GPS fix's accuracy.",
        examples=[250.0],
    ),
]
NearestParam = Annotated[
    bool,
    Query(description="Only the nearest zone with data for any selected variable and step."),
]
BboxParam = Annotated[
    str,
    Query(
        description="west,south,east,north in degrees; west > east crosses the antimeridian.",
        max_length=200,
        examples=["7.0,45.0,7.5,45.4"],
    ),
]
StatsParam = Annotated[
    str | None,
    Query(
        description=(
            "Comma-separated statistics per time step instead of per-zone values: "
            "mean,min,max,sum,count,std (or all)."
        ),
        max_length=100,
        examples=["mean,max"],
    ),
]
CubeFormat = Literal["json", "geojson", "arrow", "csv"]
ZoneFormat = Literal["json", "geojson", "arrow", "csv"]
FormatParam = Annotated[
    CubeFormat | None,
    Query(description="Output format; overrides the Accept header."),
]
ZoneFormatParam = Annotated[
    ZoneFormat | None,
    Query(alias="f", description="Output format; overrides the Accept header."),
]
AcceptHeader = Annotated[str | None, Header(include_in_schema=False)]
IfNoneMatch = Annotated[str | None, Header(include_in_schema=False)]


# An offset whose '+' arrived as a space: "...T10:00:00 02:00" (or " 0200", " 02").
_SPACED_OFFSET = re.compile(r"\d \d{2}(:?\d{2})?(/|$)")


def read_datetime(text: str | None) -> Any:
    """``datetime`` parsed; an offset whose ``+`` came through as a space gets a hint."""
    try:
        return parse_datetime(text)
    except InvalidInput as exc:
        if text is not None and _SPACED_OFFSET.search(text):
            allowed = (exc.allowed or "an RFC 3339 instant or interval") + (
                "; a '+' in a URL query string reads as a space: write it as %2B "
                "(e.g. 2025-06-01T10:00:00%2B02:00)"
            )
            raise InvalidInput("datetime", text, allowed) from None
        raise


def make_selection(level: int | None, vars_: str | None, time: str | None) -> Selection:
    """Level, variables and time of a cube query, from their parameters."""
    return Selection(level=level, variables=parse_vars(vars_), time=read_datetime(time))


async def selection(
    level: LevelParam = None, vars_: VarsParam = None, time: DatetimeParam = None
) -> Selection:
    """Level, variables and time of a cube query."""
    return make_selection(level, vars_, time)


SelectionDep = Annotated[Selection, Depends(selection)]


CUBE_FORMATS = ("json", "geojson", "arrow", "csv")
ZONE_FORMATS = CUBE_FORMATS  # /zones answers in every format too


async def cube_format(f: FormatParam = None, accept: AcceptHeader = None) -> str:
    return negotiate(f, accept, CUBE_FORMATS)


async def zone_format(f: ZoneFormatParam = None, accept: AcceptHeader = None) -> str:
    return negotiate(f, accept, ZONE_FORMATS)


FormatDep = Annotated[str, Depends(cube_format)]
ZoneFormatDep = Annotated[str, Depends(zone_format)]


async def stats_names(stats: StatsParam = None) -> tuple[str, ...]:
    return parse_stats(stats)


StatsDep = Annotated[tuple[str, ...], Depends(stats_names)]


# -- unknown query parameters ---------------------------------------------------------------

_DECLARED: dict[int, frozenset[str]] = {}


def declared_query_parameters(route: Any) -> frozenset[str]:
    """The query parameter names (aliases) a route declares, its dependencies' included."""
    key = id(route)
    names = _DECLARED.get(key)
    if names is None:
        found: set[str] = set()
        stack = [getattr(route, "dependant", None)]
        while stack:
            dependant = stack.pop()
            if dependant is None:
                continue
            found.update(p.alias for p in dependant.query_params)
            stack.extend(dependant.dependencies)
        names = frozenset(found)
        _DECLARED[key] = names
    return names


def known_parameters(status: int = 422) -> Callable[[Request], Awaitable[None]]:
    """A dependency refusing query parameters the matched route does not declare.

    Put it on a router (``APIRouter(dependencies=[Depends(known_parameters())])``): each
    route's own parameters, its dependencies' included, are read from the route itself,
    so the check needs no list of its own. A typo such as ``variables=`` for ``vars=``
    is refused instead of silently ignored. ``status`` 422 (the native routes) raises
    :class:`alveary.InvalidInput`, answered as problem+json naming the parameter and the
    allowed names; any other status (400 for OGC API routes, whose standards ask for it)
    raises an ``HTTPException`` with the same message as its detail.
    """

    async def check(request: Request) -> None:
        route = request.scope.get("route")
        if route is None:
            return
        allowed = declared_query_parameters(route)
        unknown = [k for k in dict.fromkeys(request.query_params.keys()) if k not in allowed]
        if not unknown:
            return
        names = ", ".join(sorted(allowed)) or "none"
        message = f"unknown query parameter {unknown[0]!r}; this operation takes: {names}"
        value = request.query_params[unknown[0]]
        error = InvalidInput(unknown[0], value, f"parameters: {names}", message=message)
        if status == 422:
            raise error
        raise HTTPException(status_code=status, detail=error.message)

    return check
