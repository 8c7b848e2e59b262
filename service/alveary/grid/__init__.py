"""The equal-area hexagonal grid: zones, their ids, geometry, neighbours and hierarchy.

WGS84 latitudes are mapped to the authalic sphere, the sphere is cut into the twenty faces
of an icosahedron in the standard orientation, each face is projected with Snyder's
equal-area polyhedral projection, and zones are the hexagons (and twelve pentagons) of an
aperture-4 triangular lattice on the faces. Every hexagon has the same area.

All functions take numpy arrays or scalars and raise :class:`alveary.GridError` (a
``ValueError``) naming the bad value.
"""

from alveary.grid._api import (
    PENTAGON_SHARE,
    all_zones,
    index_to_zone,
    is_pentagon,
    point_to_zone,
    zone_area,
    zone_areas,
    zone_boundary,
    zone_children,
    zone_count,
    zone_disk,
    zone_from_text,
    zone_level,
    zone_neighbors,
    zone_parent,
    zone_ring,
    zone_to_index,
    zone_to_point,
    zone_to_text,
    zones_in_bbox,
    zones_in_polygon,
    zones_in_radius,
)
from alveary.grid._authalic import EARTH_AREA, R_AUTHALIC
from alveary.grid._ids import MAX_LEVEL
from alveary.grid._window import disk_union, disk_windows

__all__ = [
    "EARTH_AREA",
    "MAX_LEVEL",
    "PENTAGON_SHARE",
    "R_AUTHALIC",
    "all_zones",
    "disk_union",
    "disk_windows",
    "index_to_zone",
    "is_pentagon",
    "point_to_zone",
    "zone_area",
    "zone_areas",
    "zone_boundary",
    "zone_children",
    "zone_count",
    "zone_disk",
    "zone_from_text",
    "zone_level",
    "zone_neighbors",
    "zone_parent",
    "zone_ring",
    "zone_to_index",
    "zone_to_point",
    "zone_to_text",
    "zones_in_bbox",
    "zones_in_polygon",
    "zones_in_radius",
]
