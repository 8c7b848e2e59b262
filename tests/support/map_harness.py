"""TEST HARNESS ONLY: a minimal stand-in service for the map page, until the real routes
exist. It is not part of alveary and must not be imported by it.

It serves the packaged page and its static files, and answers the few routes the page
uses (``/cubes``, ``/cubes/{cube}``, ``/collections/{cube}/map/tiles`` and its tiles,
``/collections/{cube}/legend``, ``/zones``, ``/cubes/{cube}/point``, vector tiles) for one
invented cube whose values are an analytic field at zone centres, drawn with the
service's own tile functions. Run it as a real process::

    PYTHONPATH=tests python -m uvicorn support.map_harness:app --port 8123

The real routes will replace it; the page's browser test then runs against them.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
from fastapi import FastAPI, Request
from fastapi.responses import FileResponse, JSONResponse, Response
from fastapi.staticfiles import StaticFiles

import alveary.api
from alveary import grid
from alveary._errors import InvalidInput
from alveary.api._colours import colour_scale, parse_range
from alveary.api._legend import SVG_MEDIA_TYPE, legend_png, legend_svg
from alveary.api._mvt import MVT_MEDIA_TYPE, zone_tile_mvt
from alveary.api._render import PNG_MEDIA_TYPE, encode_png, render_tile, transparent_png
from alveary.api._tileset import map_tiles_document
from alveary.query import format_time, parse_datetime, select_times
from alveary.query._tiles import (
    PixelZoneCache,
    check_tile,
    default_level,
    tile_intersects,
    tile_zone_candidates,
)

__all__ = ["COVERAGE", "CUBE_ID", "LEVELS", "RANGES", "TIMES", "VARIABLES", "app", "field"]

STATIC = Path(alveary.api.__file__).resolve().parent / "static"
CUBE_ID = "harness-field"
LEVELS = (3, 5, 7)
#: west, south, east, north: the invented cube covers this box only.
COVERAGE = (-30.0, -45.0, 50.0, 65.0)
TIMES = np.datetime64("2025-03-01T00:00:00", "s") + np.arange(8) * np.timedelta64(1, "D")
VARIABLES = {
    "moisture": {"units": "m3 m-3", "long_name": "root-zone moisture (invented)"},
    "canopy_temp": {"units": "K", "long_name": "canopy temperature (invented)"},
}
#: The stored value range of each variable (what ingest would record).
RANGES = {"moisture": (0.05, 0.45), "canopy_temp": (270.0, 300.0)}


def field(variable: str, lat, lon, step) -> np.ndarray:
    """The invented cube's values: analytic in (lat, lon, step), NaN outside COVERAGE."""
    lat, lon, step = np.broadcast_arrays(
        np.asarray(lat, float), np.asarray(lon, float), np.asarray(step, float)
    )
    west, south, east, north = COVERAGE
    inside = (lat >= south) & (lat <= north) & (lon >= west) & (lon <= east)
    wave = np.sin(np.radians(3.0 * lat)) * np.cos(np.radians(2.0 * lon))
    if variable == "moisture":
        value = 0.25 + 0.15 * wave + 0.006 * step
    else:
        value = 285.0 - 0.2 * np.abs(lat) + 4.0 * wave + 0.5 * step
    return np.where(inside, value, np.nan)


app = FastAPI(title="map page test harness (not alveary)")
app.mount("/static", StaticFiles(directory=STATIC), name="static")
_pixels = PixelZoneCache(32 << 20)
_counts: dict[str, int] = {}


@app.middleware("http")
async def _count(request: Request, call_next):
    head = "/".join(request.url.path.split("/")[:3])
    _counts[head] = _counts.get(head, 0) + 1
    return await call_next(request)


@app.exception_handler(InvalidInput)
async def _invalid(request: Request, exc: InvalidInput) -> JSONResponse:
    body = {"title": "Invalid parameter", "status": 400, "detail": str(exc)}
    return JSONResponse(body, status_code=400, media_type="application/problem+json")


def _cube(full: bool) -> dict[str, Any]:
    text = format_time(TIMES)
    axis: dict[str, Any] = {"start": text[0], "end": text[-1], "steps": len(text)}
    if full:
        axis["values"] = text
    return {
        "id": CUBE_ID,
        "title": "Invented test field",
        "available": True,
        "version": "v1",
        "levels": list(LEVELS),
        "variables": VARIABLES,
        "time": axis,
        "coverage": list(COVERAGE),
        "links": [{"href": f"/cubes/{CUBE_ID}", "rel": "self", "type": "application/json"}],
    }


def _known(cube: str) -> None:
    if cube != CUBE_ID:
        raise InvalidInput("cube", cube, CUBE_ID)


def _variable(text: str | None) -> str:
    name = (text or next(iter(VARIABLES))).strip()
    if name not in VARIABLES:
        raise InvalidInput("vars", name, f"one variable of: {', '.join(VARIABLES)}")
    return name


def _step(text: str | None) -> int:
    t0, t1 = select_times(parse_datetime(text), TIMES)
    if t1 - t0 != 1:
        raise InvalidInput("datetime", text, "one time step")
    return t0


@app.get("/map")
async def map_page() -> FileResponse:
    return FileResponse(STATIC / "map.html", media_type="text/html")


@app.get("/cubes")
async def cubes() -> dict[str, Any]:
    return {"cubes": [_cube(False)]}


@app.get("/cubes/{cube}")
async def cube(cube: str) -> dict[str, Any]:
    _known(cube)
    return _cube(True)


@app.get("/collections/{cube}/map/tiles")
async def tiles_doc(cube: str, request: Request) -> dict[str, Any]:
    _known(cube)
    return map_tiles_document(
        cube,
        title="Invented test field",
        levels=LEVELS,
        bounds=COVERAGE,
        query=dict(request.query_params),
    )


@app.get("/collections/{cube}/map/tiles/WebMercatorQuad/{z}/{y}/{x}")
def map_tile(
    cube: str,
    z: int,
    y: int,
    x: int,
    vars: str | None = None,
    datetime: str | None = None,
    colormap: str | None = None,
    range: str | None = None,
    level: int | None = None,
) -> Response:
    _known(cube)
    z, y, x = check_tile(z, y, x)
    variable, step = _variable(vars), _step(datetime)
    scale = colour_scale(colormap)
    vmin, vmax = parse_range(range) or RANGES[variable]
    if not tile_intersects(z, y, x, COVERAGE):
        return Response(transparent_png(), media_type=PNG_MEDIA_TYPE)
    lv = default_level(z, y, LEVELS) if level is None else level
    if lv not in LEVELS:
        raise InvalidInput("level", lv, f"one of {list(LEVELS)}")
    tz = _pixels.get(z, y, x, lv)
    lat, lon = grid.zone_to_point(tz.zones)
    values = field(variable, lat, lon, step)
    rgba = render_tile(
        tz.index, values, scale, vmin, vmax, edges=tz.edges if tz.draw_edges else None
    )
    return Response(encode_png(rgba), media_type=PNG_MEDIA_TYPE)


@app.get("/collections/{cube}/tiles/WebMercatorQuad/{z}/{y}/{x}")
def vector_tile(cube: str, z: int, y: int, x: int, datetime: str | None = None) -> Response:
    _known(cube)
    z, y, x = check_tile(z, y, x)
    step = _step(datetime)
    lv = default_level(z, y, LEVELS, target=16.0)
    zones = tile_zone_candidates(z, y, x, lv)
    lat, lon = grid.zone_to_point(zones)
    values = {v: field(v, lat, lon, step) for v in VARIABLES}
    return Response(zone_tile_mvt(z, y, x, zones, values), media_type=MVT_MEDIA_TYPE)


@app.get("/collections/{cube}/legend")
def legend(
    cube: str,
    vars: str | None = None,
    colormap: str | None = None,
    range: str | None = None,
    f: str = "png",
) -> Response:
    _known(cube)
    variable = _variable(vars)
    vmin, vmax = parse_range(range) or RANGES[variable]
    meta = VARIABLES[variable]
    args = dict(title=meta["long_name"] or variable, units=meta["units"])
    if f == "svg":
        body = legend_svg(colour_scale(colormap), vmin, vmax, **args)
        return Response(body, media_type=SVG_MEDIA_TYPE)
    return Response(legend_png(colour_scale(colormap), vmin, vmax, **args), media_type="image/png")


@app.get("/zones")
def zones(lat: float, lon: float, level: int) -> dict[str, Any]:
    zone = grid.point_to_zone(lat, lon, level)
    ring = grid.zone_boundary(zone)[:, ::-1].tolist()
    clat, clon = grid.zone_to_point(zone)
    return {
        "zone": int(zone),
        "zone_text": str(grid.zone_to_text(zone)),
        "level": level,
        "centre": {"lat": float(clat), "lon": float(clon)},
        "geometry": {"type": "Polygon", "coordinates": [[*ring, ring[0]]]},
    }


@app.get("/cubes/{cube}/point")
def point(
    cube: str,
    lat: float,
    lon: float,
    level: int | None = None,
    vars: str | None = None,
    datetime: str | None = None,
) -> dict[str, Any]:
    _known(cube)
    lv = LEVELS[-1] if level is None else level
    if lv not in LEVELS:
        raise InvalidInput("level", lv, f"one of {list(LEVELS)}")
    names = [_variable(v) for v in vars.split(",")] if vars else list(VARIABLES)
    t0, t1 = select_times(parse_datetime(datetime), TIMES)
    zone = grid.point_to_zone(lat, lon, lv)
    clat, clon = grid.zone_to_point(zone)
    steps = np.arange(t0, t1)
    values = {}
    for v in names:
        series = field(v, clat, clon, steps)
        values[v] = [None if np.isnan(s) else float(s) for s in series]
    return {
        "cube": CUBE_ID,
        "version": "v1",
        "level": lv,
        "variables": {v: VARIABLES[v] for v in names},
        "times": format_time(TIMES[t0:t1]),
        "kind": "zones",
        "zones": [
            {
                "zone": int(zone),
                "zone_text": str(grid.zone_to_text(zone)),
                "lat": float(clat),
                "lon": float(clon),
                "values": values,
            }
        ],
    }


@app.get("/harness/requests")
async def requests() -> dict[str, int]:
    """How many requests each path prefix got (for the tests)."""
    return dict(_counts)


@app.get("/healthz")
async def healthz() -> dict[str, str]:
    return {"status": "ok"}
