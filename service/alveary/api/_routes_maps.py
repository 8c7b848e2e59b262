"""Map routes: PNG map tiles and vector tiles of a cube (OGC API - Tiles paths on
WebMercatorQuad), their descriptions, a legend, the map page and its static files, and
the landing page for browsers.

A tile is resolved (no I/O), given an ETag from the cube version and the normalised
request, planned (the pixel-to-zone map from the service's cache, one read plan) and read
once; answers go through the service's answer cache like every other query. A tile
outside the cube's coverage reads nothing and is a transparent PNG.
"""

from __future__ import annotations

import functools
import html
import mimetypes
from pathlib import Path
from typing import Annotated, Any
from urllib.parse import quote

import anyio.to_thread
import cachetools
import numpy as np
import orjson
from fastapi import APIRouter, Depends, Query, Request
from starlette.responses import FileResponse, Response

from alveary import __version__
from alveary._errors import InvalidInput, LimitExceeded, NotFound
from alveary.api._access import Credentials
from alveary.api._answers import request_key
from alveary.api._colours import ColourScale, colour_scale, parse_range
from alveary.api._etag import etag_for
from alveary.api._legend import SVG_MEDIA_TYPE, legend_png, legend_svg
from alveary.api._mvt import MVT_MEDIA_TYPE, zone_tile_mvt
from alveary.api._render import PNG_MEDIA_TYPE, encode_png, render_tile, transparent_png
from alveary.api._service import Service
from alveary.api._tileset import map_tiles_document, vector_tiles_document
from alveary.api.deps import (
    AcceptHeader,
    AggParam,
    AnomalyParam,
    ClimatologyParam,
    CubeId,
    DatetimeParam,
    EveryParam,
    FocalKParam,
    FocalParam,
    IfNoneMatch,
    KernelParam,
    LevelParam,
    VarsParam,
    known_parameters,
    service_selection,
)
from alveary.query import (
    CubeSnapshot,
    ResolvedTile,
    TileAnalysis,
    TilePlan,
    analysed_range,
    parse_vars,
    plan_analysed_zones,
    plan_tile,
    read_analysed_values,
    read_tile,
    read_zone_values,
    resolve_tile,
    resolve_tile_analysis,
    tile_intersects,
    tile_zone_candidates,
    value_range,
)

__all__ = ["STATIC", "landing_html", "router", "wants_html"]

router = APIRouter(tags=["maps"])

#: The map page and the files it loads, shipped inside the package.
STATIC = Path(__file__).resolve().parent / "static"
_VECTOR_TARGET_PIXELS = 16.0
_TMS = "WebMercatorQuad"
# the analysis parameters a tile takes (carried from a description into its templates)
_ANALYSIS = ("focal", "focal_k", "kernel", "every", "agg", "climatology", "anomaly")

TileZ = Annotated[int, Query(include_in_schema=False)]
ColormapParam = Annotated[
    str | None,
    Query(
        description="Colour scale: nectar (default), clover, honey, wax or drift "
        "(see the tiles description).",
        max_length=32,
        examples=["clover"],
    ),
]
RangeParam = Annotated[
    str | None,
    Query(
        alias="range",
        description="min,max of the colour scale; default: the variable's range recorded "
        "when the cube was built (at the tile's level), carried through the analysis "
        "(see the maps documentation); required with focal=gradient.",
        max_length=100,
        examples=["0.05,0.45"],
    ),
]
LegendFormatParam = Annotated[
    str | None,
    Query(alias="f", description="png (default) or svg; overrides the Accept header."),
]
_PNG: dict[int | str, dict[str, Any]] = {
    200: {
        "description": "A 256 × 256 PNG; transparent where there is no data.",
        "content": {"image/png": {"schema": {"type": "string", "format": "binary"}}},
    },
    304: {"description": "Not modified (If-None-Match matched the ETag)."},
}
_MVT: dict[int | str, dict[str, Any]] = {
    200: {
        "description": "Zones as a Mapbox Vector Tile (layer 'zones').",
        "content": {MVT_MEDIA_TYPE: {"schema": {"type": "string", "format": "binary"}}},
    },
    304: {"description": "Not modified (If-None-Match matched the ETag)."},
}
_LEGEND: dict[int | str, dict[str, Any]] = {
    200: {
        "description": "A colour bar with the variable's name, units and range.",
        "content": {
            "image/png": {"schema": {"type": "string", "format": "binary"}},
            SVG_MEDIA_TYPE: {"schema": {"type": "string"}},
        },
    }
}
# default ranges of versions that record none (scanned once per version and variable)
_scanned: cachetools.LRUCache[tuple[str, str, str, int], tuple[float, float]] = cachetools.LRUCache(
    256
)


def _service(request: Request) -> Service:
    service: Service = request.app.state.service
    return service


def _json(body: Any, headers: dict[str, str] | None = None) -> Response:
    return Response(orjson.dumps(body), media_type="application/json", headers=headers)


async def _range(
    service: Service, cube_id: str, snap: CubeSnapshot, variable: str, level: int
) -> tuple[float, float]:
    """The default colour range of a variable at a level (recorded, or scanned once)."""
    key = (cube_id, snap.version, variable, level)
    found = _scanned.get(key)
    if found is None:
        found = await value_range(
            snap,
            variable,
            level,
            service.cache,
            max_cells=service.limits.max_cells,
            deadline=service.settings.deadline,
        )
        if snap.value_range(variable, level) is None:
            _scanned[key] = found
    return found


async def _tile_range(
    service: Service, cube_id: str, snap: CubeSnapshot, resolved: ResolvedTile, given: str | None
) -> tuple[float, float]:
    """The colour range of a tile (see :func:`_shown_range`)."""
    return await _shown_range(
        service, cube_id, snap, resolved.variable, resolved.level, resolved.analysis, given
    )


async def _shown_range(
    service: Service,
    cube_id: str,
    snap: CubeSnapshot,
    variable: str,
    level: int,
    a: TileAnalysis | None,
    given: str | None,
) -> tuple[float, float]:
    """The colour range: ``range``, else the stored range carried through the analysis
    (the tiles and the legend take it from the same parameters)."""
    found = parse_range(given)
    if found is not None:
        return found
    lo, hi = await _range(service, cube_id, snap, variable, level)
    if a is None:
        return lo, hi
    sel = a.selection
    carried = analysed_range(lo, hi, sel.focal, sel.timeagg, a.period_steps)
    if carried is None:
        raise InvalidInput("range", None, "min,max: required with focal=gradient (units per metre)")
    return carried


def _tile_query(request: Request, names: tuple[str, ...]) -> dict[str, str]:
    """The query parameters a description carries into its tile templates."""
    return {k: v for k, v in request.query_params.items() if k in names and v}


def _doc_headers(
    service: Service, cube: str, version: str, kind: str, query: dict[str, str]
) -> dict[str, str]:
    """Caching headers of a tiles description (it changes with the cube version)."""
    normalised = "&".join(f"{k}={v}" for k, v in sorted(query.items()))
    return service.headers(etag_for(f"tileset|{kind}|{cube}|{version}|{normalised}", "json"), cube)


# -- PNG map tiles ---------------------------------------------------------------------


@router.get(
    "/collections/{cube}/map/tiles",
    operation_id="map_tilesets",
    summary="Map tiles of a cube: tile set description and TileJSON",
    description=(
        "OGC API - Tiles tile set list (WebMercatorQuad) and, beside it, TileJSON 3.0 "
        "fields (`tiles`, `minzoom`, `maxzoom`, `bounds`) for web map libraries. Query "
        "parameters given here (vars, datetime, colormap, range, level) are carried into "
        "the tile URL templates."
    ),
    responses={200: {"content": {"application/json": {"schema": {"type": "object"}}}}},
)
async def map_tilesets(request: Request, cube: CubeId) -> Response:
    service = _service(request)
    credentials = await service.credentials(request.scope)
    source = service.source_for(cube, credentials)
    snap = service.cube_for(cube, credentials).snapshot()
    query = _tile_query(request, ("vars", "datetime", "colormap", "range", "level", *_ANALYSIS))
    doc = map_tiles_document(
        cube,
        title=source.title or snap.title or cube,
        levels=snap.levels,
        bounds=snap.coverage,
        query=query,
    )
    return _json(doc, _doc_headers(service, cube, snap.version, "map", query))


@router.get(
    "/collections/{cube}/map/tiles/WebMercatorQuad",
    include_in_schema=False,
    operation_id="map_tileset",
    summary="The WebMercatorQuad map tile set of a cube",
    responses={200: {"content": {"application/json": {"schema": {"type": "object"}}}}},
)
async def map_tileset(request: Request, cube: CubeId) -> Response:
    return await map_tilesets(request, cube)


def _draw(plan: TilePlan, values: np.ndarray, scale: ColourScale, lo: float, hi: float) -> bytes:
    """PNG bytes of a planned tile with its zones' values (transparent without data)."""
    tz = plan.pixels
    if tz is None or not np.isfinite(values).any():
        return transparent_png()
    edges = tz.edges if tz.draw_edges else None
    return encode_png(render_tile(tz.index, values, scale, lo, hi, edges=edges))


@router.get(
    "/collections/{cube}/map/tiles/WebMercatorQuad/{z}/{y}/{x}",
    operation_id="map_tile",
    dependencies=[Depends(known_parameters())],  # a typo such as variables= is named
    summary="A map tile: each pixel coloured by the value of the zone under it",
    description=(
        "A 256 × 256 PNG of one variable at one time step. Each pixel takes the colour of "
        "the zone under its centre at `level` (default: the level whose zones are 2.5-5 "
        "pixels across at this zoom and latitude, clamped to the cube's levels); zone "
        "outlines are drawn where zones are over 12 pixels across. Transparent where "
        "there is no data or no coverage. z is the zoom (tile matrix), y the row from the "
        "north, x the column from 180° W."
    ),
    response_class=Response,
    responses=_PNG,
)
async def map_tile(
    request: Request,
    cube: CubeId,
    z: int,
    y: int,
    x: int,
    vars_: VarsParam = None,
    time: DatetimeParam = None,
    level: LevelParam = None,
    colormap: ColormapParam = None,
    range_: RangeParam = None,
    focal: FocalParam = None,
    focal_k: FocalKParam = None,
    kernel: KernelParam = None,
    every: EveryParam = None,
    agg: AggParam = None,
    climatology: ClimatologyParam = None,
    anomaly: AnomalyParam = None,
    if_none_match: IfNoneMatch = None,
) -> Response:
    service = _service(request)
    snap = service.cube_for(cube, await service.credentials(request.scope)).snapshot()
    sel = service_selection(
        service, None, None, time, focal, focal_k, kernel, every, agg, climatology, anomaly
    )
    resolved = resolve_tile(
        cube,
        snap,
        z,
        y,
        x,
        variables=parse_vars(vars_),
        time=sel.time,
        level=level,
        focal=sel.focal,
        timeagg=sel.timeagg,
    )
    scale = colour_scale(colormap)
    lo, hi = await _tile_range(service, cube, snap, resolved, range_)
    etag = etag_for(f"{resolved.key}|{scale.name}|{lo!r},{hi!r}", "png")

    async def make() -> tuple[bytes, str]:
        plan = await anyio.to_thread.run_sync(plan_tile, resolved, service.pixels, service.limits)
        values = await read_tile(plan, service.cache, deadline=service.settings.deadline)
        body = await anyio.to_thread.run_sync(_draw, plan, values, scale, lo, hi)
        return body, PNG_MEDIA_TYPE

    return await service.cached(
        cube,
        resolved.version,
        etag,
        make,
        if_none_match,
        key=request_key(request.scope),
        operation="map_tile",
    )


# -- vector tiles ----------------------------------------------------------------------


@router.get(
    "/collections/{cube}/tiles",
    operation_id="vector_tilesets",
    summary="Vector tiles of a cube's zones: tile set description and TileJSON",
    responses={200: {"content": {"application/json": {"schema": {"type": "object"}}}}},
)
async def vector_tilesets(request: Request, cube: CubeId) -> Response:
    service = _service(request)
    credentials = await service.credentials(request.scope)
    source = service.source_for(cube, credentials)
    snap = service.cube_for(cube, credentials).snapshot()
    query = _tile_query(request, ("vars", "datetime", "level", *_ANALYSIS))
    doc = vector_tiles_document(
        cube,
        title=source.title or snap.title or cube,
        levels=snap.levels,
        variables={k: v.units for k, v in snap.variables.items()},
        bounds=snap.coverage,
        query=query,
    )
    return _json(doc, _doc_headers(service, cube, snap.version, "vector", query))


def _vector_variables(snap: CubeSnapshot, names: tuple[str, ...] | None) -> tuple[str, ...]:
    if not names:
        return tuple(snap.variables)
    unknown = [v for v in names if v not in snap.variables]
    if unknown:
        have = ", ".join(snap.variables)
        raise InvalidInput("vars", unknown[0], f"variables of this cube: {have}")
    return names


def _zones_of(resolved: ResolvedTile, max_zones: int) -> np.ndarray:
    r = resolved
    if not tile_intersects(r.z, r.y, r.x, r.cube.coverage):
        return np.zeros(0, dtype=np.uint64)
    zones = tile_zone_candidates(r.z, r.y, r.x, r.level)
    if zones.size > max_zones:
        raise LimitExceeded("zones per request", int(zones.size), max_zones)
    return zones


@router.get(
    "/collections/{cube}/tiles/WebMercatorQuad/{z}/{y}/{x}",
    operation_id="vector_tile",
    dependencies=[Depends(known_parameters())],  # a typo such as variables= is named
    summary="A vector tile: the zones under a tile with their values",
    description=(
        "A Mapbox Vector Tile (layer 'zones'): each zone with data is a polygon (its "
        "outline clipped to the tile) with properties zone (id), zone_text and one value "
        "per variable at one time step (default: the latest). `level` defaults to the "
        "level whose zones are about 16 pixels across."
    ),
    response_class=Response,
    responses=_MVT,
)
async def vector_tile(
    request: Request,
    cube: CubeId,
    z: int,
    y: int,
    x: int,
    vars_: VarsParam = None,
    time: DatetimeParam = None,
    level: LevelParam = None,
    focal: FocalParam = None,
    focal_k: FocalKParam = None,
    kernel: KernelParam = None,
    every: EveryParam = None,
    agg: AggParam = None,
    climatology: ClimatologyParam = None,
    anomaly: AnomalyParam = None,
    if_none_match: IfNoneMatch = None,
) -> Response:
    service = _service(request)
    snap = service.cube_for(cube, await service.credentials(request.scope)).snapshot()
    names = _vector_variables(snap, parse_vars(vars_))
    sel = service_selection(
        service, None, None, time, focal, focal_k, kernel, every, agg, climatology, anomaly
    )
    resolved = resolve_tile(
        cube,
        snap,
        z,
        y,
        x,
        time=sel.time,
        level=level,
        target=_VECTOR_TARGET_PIXELS,
        focal=sel.focal,
        timeagg=sel.timeagg,
    )
    etag = etag_for(f"{resolved.key}|{','.join(names)}", "mvt")

    async def values_of(zones: np.ndarray) -> dict[str, np.ndarray]:
        a, deadline = resolved.analysis, service.settings.deadline
        if a is None or zones.size == 0:
            return await read_zone_values(
                snap, names, zones, resolved.step, service.cache, deadline=deadline
            )
        plan, reads, _ = await anyio.to_thread.run_sync(
            plan_analysed_zones, snap, names, zones, a, service.limits
        )
        return await read_analysed_values(snap, a, plan, reads, service.cache, deadline=deadline)

    async def make() -> tuple[bytes, str]:
        zones = await anyio.to_thread.run_sync(_zones_of, resolved, service.limits.max_zones)
        values = await values_of(zones)
        keep = np.zeros(zones.size, dtype=bool)
        for column in values.values():
            keep |= np.isfinite(column)
        kept = {v: a[keep] for v, a in values.items()}
        body = await anyio.to_thread.run_sync(
            lambda: zone_tile_mvt(resolved.z, resolved.y, resolved.x, zones[keep], kept)
        )
        return body, MVT_MEDIA_TYPE

    return await service.cached(
        cube,
        resolved.version,
        etag,
        make,
        if_none_match,
        key=request_key(request.scope),
        operation="vector_tile",
    )


# -- legend ----------------------------------------------------------------------------


@router.get(
    "/collections/{cube}/legend",
    operation_id="legend",
    dependencies=[Depends(known_parameters())],  # a typo such as variables= is named
    summary="A legend of a variable's colours: name, units, range",
    description=(
        "PNG (default) or SVG, by f or Accept. The range and colour scale are those the map "
        "tiles take from the same parameters (default range: the finest level's)."
    ),
    response_class=Response,
    responses=_LEGEND,
)
async def legend(
    request: Request,
    cube: CubeId,
    vars_: VarsParam = None,
    colormap: ColormapParam = None,
    range_: RangeParam = None,
    level: LevelParam = None,
    time: DatetimeParam = None,
    focal: FocalParam = None,
    focal_k: FocalKParam = None,
    kernel: KernelParam = None,
    every: EveryParam = None,
    agg: AggParam = None,
    climatology: ClimatologyParam = None,
    anomaly: AnomalyParam = None,
    f: LegendFormatParam = None,
    accept: AcceptHeader = None,
) -> Response:
    service = _service(request)
    sel = service_selection(
        service, None, None, time, focal, focal_k, kernel, every, agg, climatology, anomaly
    )
    snap = service.cube_for(cube, await service.credentials(request.scope)).snapshot()
    names = parse_vars(vars_)
    variable = names[0] if names else next(iter(snap.variables))
    if (names and len(names) != 1) or variable not in snap.variables:
        have = ", ".join(snap.variables)
        raise InvalidInput("vars", vars_, f"one variable of this cube: {have}")
    levels = tuple(int(v) for v in snap.levels)
    if level is not None and level not in levels:
        raise InvalidInput("level", level, f"one of the cube's levels {list(levels)}")
    fmt = _legend_format(f, accept)
    scale = colour_scale(colormap)
    chosen = levels[-1] if level is None else int(level)
    shown = resolve_tile_analysis(np.asarray(snap.times), sel.time, sel.focal, sel.timeagg)
    lo, hi = await _shown_range(service, cube, snap, variable, chosen, shown, range_)
    info = snap.variables[variable]
    title = info.long_name or variable
    if shown is not None:
        title = f"{title}, {_analysis_words(shown)}"
    units = _shown_units(info.units, shown)
    analysis = "" if shown is None else shown.text
    key = f"legend|{cube}|{snap.version}|{variable}|{scale.name}|{lo!r},{hi!r}|{analysis}"
    etag = etag_for(key, fmt)
    if fmt == "svg":
        body, media = legend_svg(scale, lo, hi, title=title, units=units), SVG_MEDIA_TYPE
    else:
        body, media = legend_png(scale, lo, hi, title=title, units=units), PNG_MEDIA_TYPE
    return Response(body, media_type=media, headers=service.headers(etag, cube))


def _analysis_words(a: TileAnalysis) -> str:
    """What an analysed tile shows, in a few words for a legend's title.

    >>> from alveary.query import FocalSpec, Selection
    >>> from alveary.query._timeagg import parse_time_aggregation
    >>> sel = Selection(focal=FocalSpec("mean", 2), timeagg=parse_time_aggregation("P1M"))
    >>> _analysis_words(TileAnalysis(sel, 0, 31, None, 31, "P1M:2024-01-01T00:00:00Z"))
    'mean over 2 rings, mean per P1M'
    """
    sel, words = a.selection, []
    if sel.focal is not None:
        rings = "ring" if sel.focal.k == 1 else "rings"
        words.append(f"{sel.focal.statistic} over {sel.focal.k} {rings}")
    agg = sel.timeagg
    if agg is not None and agg.every:
        words.append(f"{agg.agg} per {agg.every}")
    by = {"month": "monthly", "dayofyear": "day-of-year"}
    if agg is not None and agg.climatology:
        words.append(f"{agg.agg} {by.get(agg.climatology, agg.climatology)} climatology")
    if agg is not None and agg.anomaly:
        words.append(f"anomaly from the {by.get(agg.anomaly, agg.anomaly)} mean")
    return ", ".join(words)


def _shown_units(units: str, a: TileAnalysis | None) -> str:
    """The units of what a tile shows: a count has none, a gradient is per metre.

    >>> from alveary.query import FocalSpec, Selection
    >>> grad = TileAnalysis(Selection(focal=FocalSpec("gradient", 1)), 0, 1, None, 1, "")
    >>> _shown_units("K", None), _shown_units("K", grad)
    ('K', 'K m-1')
    """
    focal = None if a is None else a.selection.focal
    agg = None if a is None else a.selection.timeagg
    if (focal is not None and focal.statistic == "count") or (
        agg is not None and agg.agg == "count"
    ):
        return "1"
    if focal is not None and focal.statistic == "gradient":
        return f"{units} m-1"
    return units


def _legend_format(f: str | None, accept: str | None) -> str:
    if f is not None:
        if f not in ("png", "svg"):
            raise InvalidInput("f", f, "png or svg")
        return f
    if accept and "image/svg+xml" in accept and "image/png" not in accept:
        return "svg"
    return "png"


# -- the map page and the landing page -------------------------------------------------


@functools.lru_cache(maxsize=4)
def _page(basemap: str) -> bytes:
    text = (STATIC / "map.html").read_text(encoding="utf-8")
    tag = '<meta name="alveary-basemap" content="">'
    filled = f'<meta name="alveary-basemap" content="{html.escape(basemap, quote=True)}">'
    return text.replace(tag, filled).encode()


@router.get(
    "/map",
    include_in_schema=False,  # a page for people, linked from / and each cube
    operation_id="map_page",
    summary="The map page: a cube's tiles, pickers, legend, and a zone's time series",
    response_class=Response,
    responses={200: {"content": {"text/html": {"schema": {"type": "string"}}}}},
)
async def map_page(request: Request) -> Response:
    service = _service(request)
    body = _page(service.settings.basemap_url)
    return Response(
        body, media_type="text/html; charset=utf-8", headers={"Cache-Control": "no-cache"}
    )


@router.get("/static/{path:path}", include_in_schema=False)
async def static_file(path: str) -> Response:
    target = (STATIC / path).resolve()
    if not target.is_relative_to(STATIC) or not target.is_file():
        raise NotFound("file", path)
    media = mimetypes.guess_type(target.name)[0] or "application/octet-stream"
    if target.suffix == ".js":
        media = "text/javascript"
    elif target.suffix == ".geojson":
        media = "application/geo+json"
    return FileResponse(target, media_type=media, headers={"Cache-Control": "public, max-age=3600"})


def wants_html(accept: str | None) -> bool:
    """Whether an Accept header prefers HTML to JSON (a browser navigating to the page).

    >>> wants_html("text/html,application/xhtml+xml,*/*;q=0.8"), wants_html(None)
    (True, False)
    >>> wants_html("application/json, text/html;q=0.5")
    False
    """
    if not accept:
        return False
    html_q, json_q = 0.0, 0.0
    html_at = json_at = len(accept)
    for order, item in enumerate(accept.split(",")):
        parts = [p.strip() for p in item.split(";")]
        media, q = parts[0].lower(), 1.0
        for p in parts[1:]:
            if p.startswith("q="):
                try:
                    q = float(p[2:])
                except ValueError:
                    q = 0.0
        if media == "text/html" and q > html_q:
            html_q, html_at = q, order
        elif media in ("application/json", "*/*", "application/*") and q > json_q:
            json_q, json_at = q, order
    return html_q > 0 and (html_q, -html_at) > (json_q, -json_at)


def landing_html(service: Service, credentials: Credentials) -> bytes:
    """The landing page for browsers: the map, the API docs, and the cubes these
    credentials may read."""
    items = []
    for source, cube in service.cubes_for(credentials):
        if cube is None:
            items.append(f"<li>{html.escape(source.title or source.id)} (not reachable yet)</li>")
            continue
        cid = quote(source.id)
        title = html.escape(source.title or cube.snapshot().title or source.id)
        items.append(
            f'<li><a href="map?cube={cid}">{title}</a> '
            f'(<a href="cubes/{cid}">metadata</a>, '
            f'<a href="collections/{cid}/map/tiles">tiles</a>)</li>'
        )
    cubes = "\n".join(items) or "<li>no cube is configured</li>"
    page = f"""<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>alveary</title>
<style>
body {{ font: 16px/1.5 system-ui, sans-serif; max-width: 44rem; margin: 2rem auto;
  padding: 0 1rem; color: #2a261f; background: #faf7f0; }}
a {{ color: #7a3b12; }}
.caveat {{ font-size: 0.9rem; color: #5a5244; border-top: 1px solid #d8d0bf; padding-top: 1rem; }}
</style>
</head>
<body>
<h1>alveary</h1>
<p>Spatial and time queries over hexagonal, equal-area data cubes (version {__version__}).</p>
<ul>
<li><a href="map">The map</a>: look at a cube, pick a variable and a time step, click a zone</li>
<li><a href="docs">API documentation</a> (<a href="openapi.json">OpenAPI document</a>)</li>
<li><a href="cubes">The cubes</a> as JSON</li>
</ul>
<h2>Cubes</h2>
<ul>
{cubes}
</ul>
<p class="caveat">Values are only as good as the data each cube was built from. Decisions
rest with local authorities and licensed practice.</p>
</body>
</html>
"""
    return page.encode()
