"""Grid routes (no cube): one zone's geometry and relations, and the zone under a point."""

from __future__ import annotations

from typing import Annotated, Any

import numpy as np
import orjson
from fastapi import APIRouter, Query
from starlette.responses import Response

from alveary import grid
from alveary._errors import InvalidInput, NotFound
from alveary.api._schemas import ZoneInfo
from alveary.api._shapes import zone_geometries
from alveary.api.deps import LatParam, LonParam, ServiceDep, ZoneFormatDep, ZonePath
from alveary.query import parse_zone

__all__ = ["router"]

router = APIRouter(tags=["grid"])

RequiredLevel = Annotated[
    int, Query(ge=0, le=grid.MAX_LEVEL, description="Refinement level.", examples=[9])
]

_GEOJSON: dict[int | str, dict[str, Any]] = {
    200: {
        "description": "The zone. JSON by default; a GeoJSON Feature by Accept or f.",
        "content": {"application/geo+json": {"schema": {"type": "object"}}},
    }
}


def _ref(ids: np.ndarray) -> list[dict[str, Any]]:
    ids = np.asarray(ids, dtype=np.uint64).reshape(-1)
    ids = ids[ids != 0]
    if ids.size == 0:
        return []
    text = grid.zone_to_text(ids).tolist()
    return [{"zone": int(z), "zone_text": t} for z, t in zip(ids.tolist(), text, strict=True)]


def zone_info(zone: int) -> dict[str, Any]:
    """Everything the grid knows about one zone, as a JSON-ready dict."""
    z = np.uint64(zone)
    level = int(grid.zone_level(z))
    lat, lon = grid.zone_to_point(z)
    pentagon = bool(grid.is_pentagon(z))
    area = float(grid.zone_areas(z))
    parent = _ref(grid.zone_parent(z))[0] if level > 0 else None
    children: list[dict[str, Any]] = []
    if level < grid.MAX_LEVEL:
        kids, weights = grid.zone_children(z)
        children = [
            {**ref, "weight": float(w)}
            for ref, w in zip(
                _ref(kids), np.asarray(weights)[np.asarray(kids) != 0].tolist(), strict=True
            )
        ]
    return {
        "zone": int(zone),
        "zone_text": str(grid.zone_to_text(z)),
        "level": level,
        "pentagon": pentagon,
        "area_m2": area,
        "centre": {"lat": float(lat), "lon": float(lon)},
        "geometry": zone_geometries(np.array([zone], dtype=np.uint64))[0],
        "neighbours": _ref(grid.zone_neighbors(z)),
        "parent": parent,
        "children": children,
    }


def _encode(info: dict[str, Any], fmt: str, headers: dict[str, str]) -> Response:
    if fmt == "geojson":
        props = {k: v for k, v in info.items() if k != "geometry"}
        body = {
            "type": "Feature",
            "id": info["zone"],
            "geometry": info["geometry"],
            "properties": props,
        }
        return Response(orjson.dumps(body), media_type="application/geo+json", headers=headers)
    return Response(orjson.dumps(info), media_type="application/json", headers=headers)


def _headers(service: Any) -> dict[str, str]:
    return {
        "Cache-Control": f"public, max-age={max(service.settings.max_age, 3600)}",
        "Vary": "Accept",
    }


@router.get(
    "/zones",
    operation_id="find_zone",
    summary="The zone under a point at a level",
    description="The grid alone, no cube: the zone whose area holds (lat, lon) at `level`.",
    response_model=ZoneInfo,
    responses=_GEOJSON,
)
async def find_zone(
    service: ServiceDep, lat: LatParam, lon: LonParam, level: RequiredLevel, fmt: ZoneFormatDep
) -> Response:
    zone = int(grid.point_to_zone(lat, lon, level))
    return _encode(zone_info(zone), fmt, _headers(service))


@router.get(
    "/zones/{zone}",
    operation_id="get_zone",
    summary="One zone: level, centre, boundary, neighbours, parent and children",
    description=(
        "The zone is given by its integer id or its text form. Children carry their area "
        "weight: 1 for the central child, 1/2 for the six edge children shared with a "
        "neighbour."
    ),
    response_model=ZoneInfo,
    responses=_GEOJSON,
)
async def get_zone(service: ServiceDep, zone: ZonePath, fmt: ZoneFormatDep) -> Response:
    try:
        zone_id = parse_zone(zone)
    except InvalidInput:
        raise NotFound("zone", zone) from None
    return _encode(zone_info(zone_id), fmt, _headers(service))
