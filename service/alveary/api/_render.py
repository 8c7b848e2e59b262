"""Map tiles as pictures: per-zone values through a colour scale onto a tile's pixels, and
PNG encoding with Pillow.

A tile is drawn from its pixel-to-zone map (``index``: each pixel's position among the
tile's zones) and one value per zone: the zones are coloured once and the colours are
gathered to the pixels as 32-bit words, so drawing costs one array lookup per pixel. Zone
outlines, where asked for, replace the colour of pixels on a zone's edge with the scale's
outline colour. Pixels of zones without data stay transparent.
"""

from __future__ import annotations

import functools
import io

import numpy as np
from PIL import Image

from alveary._errors import InvalidInput
from alveary.api._colours import ColourScale, apply_scale

__all__ = ["PNG_COMPRESSION", "PNG_MEDIA_TYPE", "encode_png", "render_tile", "transparent_png"]

PNG_MEDIA_TYPE = "image/png"
#: zlib level for tiles: 1 encodes several times faster than Pillow's default (6) and the
#: files are a few per cent larger, a good trade for pictures made on request.
PNG_COMPRESSION = 1


def render_tile(
    index: np.ndarray,
    values: np.ndarray,
    scale: ColourScale,
    vmin: float,
    vmax: float,
    *,
    edges: np.ndarray | None = None,
) -> np.ndarray:
    """RGBA pixels (uint8, (h, w, 4)) of a tile.

    Parameters
    ----------
    index:
        int (h, w): each pixel's position in ``values``.
    values:
        float (n,): one value per zone of the tile; NaN for no data (transparent).
    scale, vmin, vmax:
        The colour scale and the value range it spans.
    edges:
        Optional bool (h, w): pixels to draw in the outline colour (zones with data only).

    >>> from alveary.api._colours import colour_scale
    >>> px = render_tile(np.array([[0, 1], [1, 2]]), np.array([0.0, 1.0, np.nan]),
    ...                  colour_scale("wax"), 0.0, 1.0)
    >>> px.shape, px[1, 1].tolist(), px[0, 0].tolist()
    ((2, 2, 4), [0, 0, 0, 0], [16, 13, 10, 255])
    """
    idx = np.asarray(index)
    vals = np.asarray(values, dtype=np.float64).reshape(-1)
    if idx.ndim != 2:
        raise InvalidInput("index", f"shape {idx.shape}", "a 2-D array of positions")
    if idx.size and (idx.min() < 0 or idx.max() >= vals.size):
        raise InvalidInput("index", int(idx.max()), f"positions in [0, {vals.size - 1}]")
    words = apply_scale(vals, scale, vmin, vmax).view(np.uint32).reshape(-1)
    out = words[idx]
    if edges is not None:
        mask = np.asarray(edges, dtype=bool)
        if mask.shape != idx.shape:
            raise InvalidInput("edges", f"shape {mask.shape}", f"shape {idx.shape}")
        outline = apply_scale(vals, scale, vmin, vmax, edges=True).view(np.uint32).reshape(-1)
        out[mask] = outline[idx[mask]]
    rgba: np.ndarray = out.view(np.uint8).reshape((*idx.shape, 4))
    return rgba


def encode_png(rgba: np.ndarray, *, compress_level: int = PNG_COMPRESSION) -> bytes:
    """PNG bytes of RGBA pixels (Pillow). Fully opaque pictures are written as RGB.

    >>> png = encode_png(np.zeros((4, 4, 4), np.uint8))
    >>> png[:8] == b"\\x89PNG\\r\\n\\x1a\\n"
    True
    """
    px = np.ascontiguousarray(rgba, dtype=np.uint8)
    if px.ndim != 3 or px.shape[2] != 4:
        raise InvalidInput("rgba", f"shape {px.shape}", "an (h, w, 4) array")
    h, w = px.shape[:2]
    image = Image.frombuffer("RGBA", (w, h), px, "raw", "RGBA", 0, 1)
    if px[:, :, 3].min() == 255:
        image = image.convert("RGB")
    out = io.BytesIO()
    image.save(out, format="PNG", compress_level=compress_level)
    return out.getvalue()


@functools.lru_cache(maxsize=4)
def transparent_png(size: int = 256) -> bytes:
    """A fully transparent square PNG (tiles with no data), made once.

    >>> len(transparent_png()) < 400
    True
    """
    return encode_png(np.zeros((size, size, 4), np.uint8), compress_level=9)
