"""Grid routes (no cube): one zone's geometry and relations, and the zone under a point."""

from __future__ import annotations

import io
from typing import Annotated, Any

import numpy as np
import orjson
import pyarrow as pa
import pyarrow.csv as pacsv
import shapely
from fastapi import APIRouter, Depends, Query
from starlette.responses import Response

from alveary import grid
from alveary._errors import InvalidInput, NotFound
from alveary.api._encode import FORMATS
from alveary.api._schemas import ZoneInfo
from alveary.api.deps import (
    LatParam,
    LonParam,
    ServiceDep,
    ZoneFormatDep,
    ZonePath,
    known_parameters,
)
from alveary.query import parse_zone

__all__ = ["router"]

router = APIRouter(tags=["grid"], dependencies=[Depends(known_parameters())])

RequiredLevel = Annotated[
    int, Query(ge=0, le=grid.MAX_LEVEL, description="Refinement level.", examples=[9])
]

_GEOJSON: dict[int | str, dict[str, Any]] = {
    200: {
        "description": (
            "The zone. JSON by default; by Accept or f a GeoJSON Feature, or one row as an "
            "Arrow IPC stream or CSV (outline as WKT; neighbours and children as lists, "
            "in CSV as space-separated ids)."
        ),
        "content": {
            "application/geo+json": {"schema": {"type": "object"}},
            "application/vnd.apache.arrow.stream": {
                "schema": {"type": "string", "format": "binary"}
            },
            "text/csv": {"schema": {"type": "string"}},
        },
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
        "geometry": grid.zone_to_geojson(z),
        "neighbours": _ref(grid.zone_neighbors(z)),
        "parent": parent,
        "children": children,
    }


def zone_table(info: dict[str, Any]) -> pa.Table:
    """One zone as one table row: the JSON answer's fields, the outline as WKT."""
    parent = info["parent"]
    kids = info["children"]
    cols: dict[str, pa.Array] = {
        "zone": pa.array([info["zone"]], pa.uint64()),
        "zone_text": pa.array([info["zone_text"]], pa.string()),
        "level": pa.array([info["level"]], pa.int8()),
        "pentagon": pa.array([info["pentagon"]], pa.bool_()),
        "area_m2": pa.array([info["area_m2"]], pa.float64()),
        "lat": pa.array([info["centre"]["lat"]], pa.float64()),
        "lon": pa.array([info["centre"]["lon"]], pa.float64()),
        "parent": pa.array([None if parent is None else parent["zone"]], pa.uint64()),
        "neighbours": pa.array([[n["zone"] for n in info["neighbours"]]], pa.list_(pa.uint64())),
        "children": pa.array([[c["zone"] for c in kids]], pa.list_(pa.uint64())),
        "children_weight": pa.array([[c["weight"] for c in kids]], pa.list_(pa.float64())),
        "geometry": pa.array([shapely.geometry.shape(info["geometry"]).wkt], pa.string()),
    }
    meta = {"geometry": "WKT, longitude latitude (EPSG:4326)", "area_m2": "m2"}
    return pa.table(cols).replace_schema_metadata(meta)


def _zone_csv(table: pa.Table) -> bytes:
    cols = []
    for name in table.column_names:
        col = table.column(name)
        if pa.types.is_list(col.type):
            text = [
                " ".join(repr(v) if isinstance(v, float) else str(v) for v in row or [])
                for row in col.to_pylist()
            ]
            col = pa.array(text, pa.string())
        cols.append(col)
    out = io.BytesIO()
    plain = pa.Table.from_arrays(cols, names=table.column_names)
    pacsv.write_csv(plain, out, pacsv.WriteOptions(quoting_style="needed"))
    return out.getvalue()


def _zone_arrow(table: pa.Table) -> bytes:
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    return bytes(sink.getvalue().to_pybytes())


def _encode(info: dict[str, Any], fmt: str, headers: dict[str, str]) -> Response:
    if fmt == "arrow":
        return Response(_zone_arrow(zone_table(info)), media_type=FORMATS["arrow"], headers=headers)
    if fmt == "csv":
        return Response(_zone_csv(zone_table(info)), media_type=FORMATS["csv"], headers=headers)
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
