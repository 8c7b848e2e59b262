"""Request areas as HTTP parameters: the ``bbox`` text and the polygon body.

How a polygon is read (RFC 7946, the antimeridian, the poles, holes) is the grid's rule,
:func:`alveary.grid.read_polygon`; this module parses the query-string form of a box and
applies the request limit to a polygon body. ``Area`` is the grid's
:class:`~alveary.grid.Footprint` and ``bbox_area`` the grid's, under the names this layer
has always used.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from alveary import grid
from alveary._errors import InvalidInput

__all__ = ["Area", "bbox_area", "parse_bbox", "parse_polygon"]

Area = grid.Footprint
bbox_area = grid.bbox_area


def parse_bbox(text: str) -> tuple[float, float, float, float]:
    """Parse ``bbox=west,south,east,north`` (degrees; west > east crosses the antimeridian).

    Examples
    --------
    >>> parse_bbox("10,40,12.5,41")
    (10.0, 40.0, 12.5, 41.0)
    >>> parse_bbox("170,-10,-170,10")
    (170.0, -10.0, -170.0, 10.0)
    >>> parse_bbox("0,50,1,40")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: bbox is '0,50,1,40'; allowed: south <= north
    """
    parts = text.split(",")
    allowed = "west,south,east,north in degrees, longitudes in [-180, 180], latitudes in [-90, 90]"
    if len(parts) != 4:
        raise InvalidInput("bbox", text, allowed)
    try:
        west, south, east, north = (float(p) for p in parts)
    except ValueError:
        raise InvalidInput("bbox", text, allowed) from None
    values = np.array([west, south, east, north])
    if not np.all(np.isfinite(values)):
        raise InvalidInput("bbox", text, allowed)
    if not (
        -180 <= west <= 180 and -180 <= east <= 180 and -90 <= south <= 90 and -90 <= north <= 90
    ):
        raise InvalidInput("bbox", text, allowed)
    if south > north:
        raise InvalidInput("bbox", text, "south <= north")
    return (west, south, east, north)


def parse_polygon(body: Any, max_vertices: int) -> Area:
    """Read a GeoJSON polygon request body, refusing more than ``max_vertices`` positions.

    Raises
    ------
    InvalidInput
        Malformed GeoJSON, coordinates out of range, an unclosed ring, an invalid polygon
        (a :class:`alveary.GridError` naming ``geometry``).
    LimitExceeded
        More positions than ``max_vertices``, checked before the rings are read.

    Examples
    --------
    >>> sq = {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 1], [0, 0]]]}
    >>> parse_polygon(sq, 100).vertices
    4
    >>> parse_polygon(sq, 3)
    Traceback (most recent call last):
    ...
    alveary._errors.LimitExceeded: polygon vertices: requested 4, the limit is 3
    """
    return grid.read_polygon(body, max_vertices=max_vertices)
