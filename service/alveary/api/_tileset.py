"""Tile set descriptions: what ``/collections/{cube}/map/tiles`` and
``/collections/{cube}/tiles`` answer.

One JSON document serves two kinds of client. OGC API – Tiles clients read ``tilesets``:
one tile set on WebMercatorQuad with its tiling-scheme link and a templated ``item`` link
(``{tileMatrix}/{tileRow}/{tileCol}``). Web map libraries read the TileJSON 3.0 fields
beside it: ``tiles`` (a ``{z}/{x}/{y}``-style template), ``minzoom``, ``maxzoom``,
``bounds``. Query parameters given to the description (``vars``, ``datetime``,
``colormap``, ``range``, ``level``) are carried into both templates.

The ``levels`` member tells a page which grid level a tile shows without asking: the rule
of :func:`alveary.query._tiles.default_level` with its inputs (zone widths per level, the
target in pixels, the tile size).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any
from urllib.parse import quote, urlencode

from alveary import grid
from alveary.api._colours import DEFAULT_SCALE, SCALES
from alveary.api._mvt import MVT_EXTENT, MVT_MEDIA_TYPE

__all__ = [
    "TILE_MATRIX_SET",
    "TILE_MATRIX_SET_URI",
    "map_tiles_document",
    "max_zoom",
    "vector_tiles_document",
]

TILE_MATRIX_SET = "WebMercatorQuad"
TILE_MATRIX_SET_URI = "http://www.opengis.net/def/tilematrixset/OGC/1.0/WebMercatorQuad"
_CRS_3857 = "http://www.opengis.net/def/crs/EPSG/0/3857"
_TILING_SCHEME = "http://www.opengis.net/def/rel/ogc/1.0/tiling-scheme"
_TILE_SIZE = 256
_TARGET_PIXELS = 3.5  # the same as alveary.query._tiles.TARGET_PIXELS
_VECTOR_TARGET_PIXELS = 16.0
_EDGE_PIXELS = 12.0
_EQUATOR_PIXEL_Z0 = 2 * math.pi * 6378137.0 / _TILE_SIZE


def _zone_width(level: int) -> float:
    return math.sqrt(2.0 * grid.zone_area(level) / math.sqrt(3.0))


def max_zoom(levels: Sequence[int], *, pixels: float = 128.0) -> int:
    """The zoom from which the finest level's zones are ``pixels`` wide at the equator.

    Past it a map library enlarges that zoom's tiles (they add nothing new).

    >>> max_zoom([3, 7]), max_zoom([12])
    (9, 14)
    """
    finest = max(int(v) for v in levels)
    z = math.ceil(math.log2(pixels * _EQUATOR_PIXEL_Z0 / _zone_width(finest)))
    return int(min(max(z, 0), 24))


def _template(base: str, path: str, order: str, query: Mapping[str, str]) -> str:
    cells = {"xyz": "{z}/{y}/{x}", "ogc": "{tileMatrix}/{tileRow}/{tileCol}"}[order]
    url = f"{base}{path}/{TILE_MATRIX_SET}/{cells}"
    return f"{url}?{urlencode(query)}" if query else url


def _levels(levels: Sequence[int], target: float) -> dict[str, Any]:
    have = sorted({int(v) for v in levels})
    return {
        "levels": have,
        "zoneWidths": {str(v): _zone_width(v) for v in have},
        "targetPixels": target,
        "edgePixels": _EDGE_PIXELS,
        "tileSize": _TILE_SIZE,
        "rule": (
            "the level whose zones are nearest targetPixels across at the tile row's "
            "latitude (zone width: a regular hexagon of the zones' area, across flats; pixel: "
            "2πR·cos(lat)/(tileSize·2^z), R = 6378137 m), then the nearest of the cube's "
            "levels, the coarser on a tie"
        ),
    }


def _document(
    cube_id: str,
    title: str,
    *,
    path: str,
    data_type: str,
    media_type: str,
    levels: Sequence[int],
    bounds: Sequence[float] | None,
    base: str,
    query: Mapping[str, str],
    target: float,
) -> dict[str, Any]:
    keep = {k: str(v) for k, v in query.items() if v is not None and str(v) != ""}
    here = f"{base}{path}"
    tileset = {
        "title": title,
        "dataType": data_type,
        "crs": _CRS_3857,
        "tileMatrixSetURI": TILE_MATRIX_SET_URI,
        "links": [
            {"rel": "self", "type": "application/json", "href": f"{here}/{TILE_MATRIX_SET}"},
            {"rel": _TILING_SCHEME, "type": "application/json", "href": TILE_MATRIX_SET_URI},
            {
                "rel": "item",
                "type": media_type,
                "templated": True,
                "href": _template(base, path, "ogc", keep),
            },
        ],
    }
    west, south, east, north = (
        list(bounds) if bounds is not None else [-180, -85.0511, 180, 85.0511]
    )
    return {
        "title": title,
        "tilesets": [tileset],
        "links": [
            {"rel": "self", "type": "application/json", "href": here},
            {
                "rel": "collection",
                "type": "application/json",
                "href": f"{base}/cubes/{quote(cube_id)}",
            },
        ],
        # TileJSON 3.0.0, for web map libraries
        "tilejson": "3.0.0",
        "name": title,
        "scheme": "xyz",
        "tiles": [_template(base, path, "xyz", keep)],
        "tileSize": _TILE_SIZE,
        "minzoom": 0,
        "maxzoom": max_zoom(levels),
        "bounds": [
            float(west),
            max(float(south), -85.0511),
            float(east),
            min(float(north), 85.0511),
        ],
        "levels": _levels(levels, target),
    }


def map_tiles_document(
    cube_id: str,
    *,
    title: str,
    levels: Sequence[int],
    bounds: Sequence[float] | None = None,
    base: str = "",
    query: Mapping[str, str] | None = None,
) -> dict[str, Any]:
    """The description of a cube's PNG map tiles (OGC tile set list + TileJSON).

    ``base`` is prefixed to every path (an absolute URL root, or "" for root-relative
    links); ``query`` parameters are carried into the tile templates.

    >>> doc = map_tiles_document("demo", title="Demo", levels=[3, 7], query={"vars": "temp"})
    >>> doc["tiles"][0]
    '/collections/demo/map/tiles/WebMercatorQuad/{z}/{y}/{x}?vars=temp'
    >>> doc["tilesets"][0]["links"][2]["href"]
    '/collections/demo/map/tiles/WebMercatorQuad/{tileMatrix}/{tileRow}/{tileCol}?vars=temp'
    """
    doc = _document(
        cube_id,
        f"{title}: map tiles",
        path=f"/collections/{quote(cube_id)}/map/tiles",
        data_type="map",
        media_type="image/png",
        levels=levels,
        bounds=bounds,
        base=base,
        query=query or {},
        target=_TARGET_PIXELS,
    )
    doc["colormaps"] = {
        name: {"kind": s.kind, "description": s.description} for name, s in SCALES.items()
    }
    doc["defaultColormap"] = DEFAULT_SCALE
    doc["links"].append(
        {
            "rel": "describedby",
            "type": "image/svg+xml",
            "title": "legend",
            "href": f"{base}/collections/{quote(cube_id)}/legend",
        }
    )
    return doc


def vector_tiles_document(
    cube_id: str,
    *,
    title: str,
    levels: Sequence[int],
    variables: Mapping[str, str],
    bounds: Sequence[float] | None = None,
    base: str = "",
    query: Mapping[str, str] | None = None,
) -> dict[str, Any]:
    """The description of a cube's vector tiles of zones (``variables``: name -> units).

    >>> doc = vector_tiles_document("demo", title="Demo", levels=[5], variables={"t": "K"})
    >>> doc["vector_layers"][0]["id"], sorted(doc["vector_layers"][0]["fields"])
    ('zones', ['t', 'zone', 'zone_text'])
    """
    doc = _document(
        cube_id,
        f"{title}: zones as vector tiles",
        path=f"/collections/{quote(cube_id)}/tiles",
        data_type="vector",
        media_type=MVT_MEDIA_TYPE,
        levels=levels,
        bounds=bounds,
        base=base,
        query=query or {},
        target=_VECTOR_TARGET_PIXELS,
    )
    fields = {"zone": "Number: the zone id", "zone_text": "String: the zone id as text"}
    fields.update(
        {name: f"Number ({units})" if units else "Number" for name, units in variables.items()}
    )
    doc["vector_layers"] = [
        {"id": "zones", "fields": fields, "minzoom": 0, "maxzoom": doc["maxzoom"]}
    ]
    doc["extent"] = MVT_EXTENT
    return doc
