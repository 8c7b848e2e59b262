"""Response and body schemas, for the OpenAPI document (answers are encoded directly)."""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field

__all__ = [
    "CubeList",
    "CubeMeta",
    "EdrProblem",
    "Landing",
    "PointsBody",
    "Problem",
    "Ready",
    "StatsAnswer",
    "ZoneInfo",
    "ZonesAnswer",
]


class _Open(BaseModel):
    model_config = ConfigDict(extra="allow")


class Link(BaseModel):
    href: str
    rel: str
    type: str | None = None
    title: str | None = None


class Landing(BaseModel):
    title: str
    description: str = Field(description="What the service offers, and its version.")
    links: list[Link]


class VariableMeta(BaseModel):
    units: str = Field(description="CF units string.")
    long_name: str = Field(description="Human-readable name.")


class TimeAxis(BaseModel):
    start: str | None = Field(description="First time step (RFC 3339, UTC).")
    end: str | None = Field(description="Last time step (RFC 3339, UTC).")
    steps: int = Field(ge=0, description="Number of time steps.")
    values: list[str] | None = Field(None, description="Every time step (only on /cubes/{cube}).")


class CubeMeta(BaseModel):
    id: str
    title: str
    available: bool = Field(description="False while the cube's store cannot be reached.")
    version: str | None = Field(description="The published version now served.")
    levels: list[int] = Field(description="Refinement levels held, ascending.")
    variables: dict[str, VariableMeta]
    time: TimeAxis | None
    coverage: list[float] | None = Field(description="west, south, east, north in degrees.")
    links: list[Link]


class CubeList(BaseModel):
    cubes: list[CubeMeta]


class ZoneRow(BaseModel):
    zone: int = Field(description="Zone id (fits in 53 bits).")
    zone_text: str = Field(description="Readable form of the zone id.")
    lat: float = Field(description="Latitude of the zone centre.")
    lon: float = Field(description="Longitude of the zone centre.")
    steps: int | None = Field(None, description="Disk: steps from the centre zone.")
    distance_m: float | None = Field(None, description="Radius: geodesic distance in metres.")
    point: int | None = Field(None, description="Multi-point: index of the input point.")
    values: dict[str, list[float | None]] = Field(
        description="Variable -> one value per time step (null: no data)."
    )


class _AnalysisAxis(BaseModel):
    """The time axis of an answer with time aggregation, and what was computed."""

    time_bounds: list[list[str]] | None = Field(
        None, description="With every: [start, end) of each period, RFC 3339 UTC."
    )
    time_steps: list[int] | None = Field(
        None, description="With every: the cube's time steps each period holds."
    )
    month: list[int] | None = Field(
        None, description="climatology=month: the months (1-12) of the rows, instead of times."
    )
    dayofyear: list[int] | None = Field(
        None,
        description="climatology=dayofyear: the days (1-365, 29 February as 28) instead of times.",
    )
    analysis: dict[str, Any] | None = Field(
        None,
        description=(
            "With focal, kernel, every, climatology or anomaly: what was computed, the "
            "climatology's years per key, and warnings (fewer than three years)."
        ),
    )


class ZonesAnswer(_AnalysisAxis):
    cube: str
    version: str
    level: int
    kind: str = Field(description="point, disk, radius, bbox, polygon or points.")
    variables: dict[str, VariableMeta]
    times: list[str] | None = Field(
        None,
        description=(
            "The selected time steps, RFC 3339 UTC; with every, each period's start "
            "(absent for a climatology)."
        ),
    )
    zones: list[ZoneRow]
    note: str | None = Field(
        None,
        description=(
            "Present when the answer needs a word of explanation, e.g. a `nearest` radius "
            "query that found no zone with data."
        ),
    )


class StatsAnswer(_AnalysisAxis):
    cube: str
    version: str
    level: int
    kind: Literal["stats"]
    variables: dict[str, VariableMeta]
    times: list[str] | None = Field(
        None, description="Time steps or period starts (absent for a climatology)."
    )
    zone_count: int = Field(description="Zones whose centres lie in the area.")
    area_m2: float = Field(description="Area of those zones, m².")
    stats: dict[str, dict[str, list[float | None]]] = Field(
        description=(
            "Variable -> statistic -> one value per time step. Zones are equal-area, so "
            "the mean is the area mean; area_m2 is the area of zones with data."
        )
    )


class ZoneRef(BaseModel):
    zone: int
    zone_text: str


class ChildRef(ZoneRef):
    weight: float = Field(description="Fraction of the child's area inside the zone.")


class Centre(BaseModel):
    lat: float
    lon: float


class ZoneInfo(BaseModel):
    zone: int
    zone_text: str
    level: int
    pentagon: bool
    area_m2: float
    centre: Centre
    geometry: dict[str, Any] = Field(description="GeoJSON Polygon (or MultiPolygon) outline.")
    neighbours: list[ZoneRef]
    parent: ZoneRef | None
    children: list[ChildRef]


class Problem(_Open):
    type: str = "about:blank"
    title: str
    status: int
    detail: str
    parameter: str | None = None
    allowed: str | None = None
    limit: str | None = None
    requested: float | None = None
    maximum: float | None = None


class EdrProblem(Problem):
    """An error on an OGC API - EDR path: the EDR exception (``code``, ``description``)
    and the problem+json members in one document."""

    code: str = Field(description="EDR exception code, e.g. InvalidParameterValue.")
    description: str = Field(description="What went wrong (the same text as detail).")


class Ready(BaseModel):
    ready: bool
    cubes: dict[str, str]


class PointsBody(BaseModel):
    """Many points, as two equal-length arrays (degrees, WGS84)."""

    model_config = ConfigDict(extra="forbid")

    lat: list[float] = Field(description="Latitudes, degrees north.", max_length=1_000_000)
    lon: list[float] = Field(description="Longitudes, degrees east.", max_length=1_000_000)


def _ring_schema() -> dict[str, Any]:
    position = {"type": "array", "items": {"type": "number"}, "minItems": 2, "maxItems": 3}
    return {"type": "array", "items": position, "minItems": 4}


def geometry_body_schema() -> dict[str, Any]:
    """The OpenAPI schema of the polygon request body (RFC 7946 shapes)."""
    ring = _ring_schema()
    polygon = {
        "type": "object",
        "required": ["type", "coordinates"],
        "properties": {
            "type": {"type": "string", "enum": ["Polygon"]},
            "coordinates": {"type": "array", "items": ring, "minItems": 1},
        },
    }
    multi = {
        "type": "object",
        "required": ["type", "coordinates"],
        "properties": {
            "type": {"type": "string", "enum": ["MultiPolygon"]},
            "coordinates": {
                "type": "array",
                "items": {"type": "array", "items": ring, "minItems": 1},
                "minItems": 1,
            },
        },
    }
    feature = {
        "type": "object",
        "required": ["type", "geometry"],
        "properties": {
            "type": {"type": "string", "enum": ["Feature"]},
            "geometry": {"oneOf": [polygon, multi]},
            "properties": {"type": ["object", "null"]},
        },
    }
    return {"oneOf": [polygon, multi, feature]}
