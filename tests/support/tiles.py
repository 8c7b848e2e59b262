"""Shared pieces of the map-tile tests: pixel centres through PROJ, PNG decoding by
Pillow, and the chunk GETs the S3 test server logged."""

from __future__ import annotations

import io
import math

import numpy as np
import pyproj
from PIL import Image

from alveary import grid
from support import analytic

__all__ = ["HALF", "chunk_gets", "decode", "level_range", "proj_pixel_centres"]

HALF = math.pi * 6378137.0  # EPSG:3857's square spans ±πR
_TO_LONLAT = pyproj.Transformer.from_crs("EPSG:3857", "EPSG:4326", always_xy=True)


def proj_pixel_centres(z, y, x, size=256):
    """Pixel-centre lat/lon of a WebMercatorQuad tile, from EPSG:3857 metres through PROJ."""
    step = 2.0 * HALF / (size * 2**z)
    idx = np.arange(size) + 0.5
    mx, my = np.meshgrid(-HALF + (x * size + idx) * step, HALF - (y * size + idx) * step)
    lon, lat = _TO_LONLAT.transform(mx, my)
    return np.asarray(lat), np.asarray(lon)


def decode(body):
    """A 256 × 256 PNG tile as RGBA integers (Pillow decodes it)."""
    image = Image.open(io.BytesIO(body))
    assert image.size == (256, 256)
    return np.asarray(image.convert("RGBA")).astype(int)


def chunk_gets(s3_server, mark, url):
    """The chunk GETs the S3 test server logged for a cube's bucket since ``mark``."""
    return [
        r
        for r in s3_server.requests(since=mark, bucket=url)
        if r.method == "GET" and "/versions/" in r.path and "/c/" in r.path
    ]


def level_range(var, level):
    """min, max of the analytic cube's variable over every zone and step at a level,
    from the field itself (what a cube build records as the level's value range)."""
    lat, lon = grid.zone_to_point(grid.all_zones(level))
    f = analytic.field if var == "temp" else analytic.rain
    days = np.arange(analytic.NTIMES, dtype=float)[:, None]
    v = f(lat[None, :], lon[None, :], days)
    return float(np.nanmin(v)), float(np.nanmax(v))
