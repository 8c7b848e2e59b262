"""Request dependencies and parameters, as named ``Annotated`` aliases.

Every query parameter the API takes is declared once here with its bounds, description
and an example, so every operation documents it the same way.
"""

from __future__ import annotations

import functools
import re
from collections.abc import Awaitable, Callable
from typing import Annotated, Any, Literal

from fastapi import Depends, Header, HTTPException, Path, Query, Request

from alveary._errors import InvalidInput
from alveary.api._access import Credentials
from alveary.api._encode import negotiate
from alveary.api._service import Service
from alveary.grid import MAX_LEVEL
from alveary.query import (
    AGGREGATES,
    CLIMATOLOGY_KEYS,
    EVERY,
    FOCAL_STATISTICS,
    MAX_FOCAL_K,
    Selection,
    parse_datetime,
    parse_focal,
    parse_stats,
    parse_time_aggregation,
    parse_vars,
)

__all__ = [
    "AcceptHeader",
    "AggParam",
    "AnomalyParam",
    "BboxParam",
    "ClimatologyParam",
    "CredentialsDep",
    "CubeFormat",
    "CubeId",
    "EveryParam",
    "FocalKParam",
    "FocalParam",
    "FormatParam",
    "IfNoneMatch",
    "KParam",
    "KernelParam",
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
    "make_selection",
    "service_selection",
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
FocalParam = Annotated[
    str | None,
    Query(
        description=(
            "Neighbourhood statistic: every zone's value becomes the statistic over the zones "
            f"within focal_k steps of it ({', '.join(FOCAL_STATISTICS)}; NaN left out; the "
            "mean is the area mean). `gradient` gives magnitude (units per metre) and "
            "direction (degrees clockwise from north) of a least-squares plane."
        ),
        max_length=20,
        examples=["mean"],
    ),
]
FocalKParam = Annotated[
    str | None,
    Query(
        description=(
            "Disk radius of focal or kernel, in steps: 1 to the configured maximum "
            f"({MAX_FOCAL_K} unless configured). Default 1; with kernel, the number of "
            "weights minus one."
        ),
        max_length=10,
        examples=["2"],
    ),
]
KernelParam = Annotated[
    str | None,
    Query(
        description=(
            "Ring weights w0,w1,...,wK (instead of focal): a zone i steps from the centre "
            "weighs wi; normalised over the zones with data."
        ),
        max_length=500,
        examples=["1,0.6,0.2"],
    ),
]
EveryParam = Annotated[
    str | None,
    Query(
        description=(
            f"Aggregate time steps into UTC calendar periods ({', '.join(EVERY)}: days, ISO "
            "weeks from Monday, months, quarters, years); the answer gives each period's "
            "start, its bounds and its number of steps. The periods holding the selected "
            "steps are read whole."
        ),
        max_length=10,
        examples=["P1M"],
    ),
]
AggParam = Annotated[
    str | None,
    Query(
        description=f"Aggregate of each period ({', '.join(AGGREGATES)}); default mean.",
        max_length=10,
        examples=["max"],
    ),
]
ClimatologyParam = Annotated[
    str | None,
    Query(
        description=(
            f"Mean over the years per {' or '.join(CLIMATOLOGY_KEYS)} (of the steps "
            "datetime selects; without datetime, the whole time axis). Fewer than three "
            "years give a warning in the answer's metadata."
        ),
        max_length=10,
        examples=["month"],
    ),
]
AnomalyParam = Annotated[
    str | None,
    Query(
        description=(
            f"Each value minus the climatology of its {' or '.join(CLIMATOLOGY_KEYS)}, the "
            "climatology taken over the whole time axis; with every, aggregated afterwards."
        ),
        max_length=10,
        examples=["month"],
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


@functools.lru_cache(maxsize=1024)  # a Selection is immutable; refusals are not kept
def make_selection(
    level: int | None,
    vars_: str | None,
    time: str | None,
    *,
    focal: str | None = None,
    focal_k: str | None = None,
    kernel: str | None = None,
    every: str | None = None,
    agg: str | None = None,
    climatology: str | None = None,
    anomaly: str | None = None,
    max_focal_k: int = MAX_FOCAL_K,
) -> Selection:
    """Level, variables, time and analysis of a cube query, from their parameters."""
    return Selection(
        level=level,
        variables=parse_vars(vars_),
        time=read_datetime(time),
        focal=parse_focal(focal, focal_k, kernel, max_k=max_focal_k),
        timeagg=parse_time_aggregation(every, agg, climatology, anomaly),
    )


def service_selection(
    service: Service,
    level: int | None,
    vars_: str | None,
    time: str | None,
    focal: str | None = None,
    focal_k: str | None = None,
    kernel: str | None = None,
    every: str | None = None,
    agg: str | None = None,
    climatology: str | None = None,
    anomaly: str | None = None,
) -> Selection:
    """:func:`make_selection` within the service's limits (the routes' one way in)."""
    return make_selection(
        level,
        vars_,
        time,
        focal=focal,
        focal_k=focal_k,
        kernel=kernel,
        every=every,
        agg=agg,
        climatology=climatology,
        anomaly=anomaly,
        max_focal_k=service.limits.max_focal_k,
    )


async def selection(
    request: Request,
    level: LevelParam = None,
    vars_: VarsParam = None,
    time: DatetimeParam = None,
    focal: FocalParam = None,
    focal_k: FocalKParam = None,
    kernel: KernelParam = None,
    every: EveryParam = None,
    agg: AggParam = None,
    climatology: ClimatologyParam = None,
    anomaly: AnomalyParam = None,
) -> Selection:
    """Level, variables, time and analysis of a cube query."""
    service: Service = request.app.state.service
    analysis = (focal, focal_k, kernel, every, agg, climatology, anomaly)
    return service_selection(service, level, vars_, time, *analysis)


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
