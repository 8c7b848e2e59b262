"""The equal-area hexagonal grid: zones, their ids, geometry, neighbours and hierarchy.

WGS84 latitudes are mapped to the authalic sphere, the sphere is cut into the twenty faces
of an icosahedron in the standard orientation, each face is projected with Snyder's
equal-area polyhedral projection, and zones are the hexagons (and twelve pentagons) of an
aperture-4 triangular lattice on the faces. Every hexagon has the same area.

All functions take numpy arrays or scalars and raise :class:`alveary.GridError` (a
``ValueError``) naming the bad value. GeoJSON polygons are read in one place
(:func:`read_polygon`) and zone outlines written in one place (:func:`zone_to_geojson`).
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
    zone_fields,
    zone_from_text,
    zone_level,
    zone_neighbors,
    zone_parent,
    zone_ring,
    zone_to_geojson,
    zone_to_index,
    zone_to_point,
    zone_to_text,
)
from alveary.grid._authalic import EARTH_AREA, R_AUTHALIC
from alveary.grid._checks import check_lat_lon
from alveary.grid._ids import MAX_LEVEL
from alveary.grid._polygon import Footprint, read_polygon
from alveary.grid._raster import raster_to_zone
from alveary.grid._region_api import bbox_area, zones_in_bbox, zones_in_polygon, zones_in_radius
from alveary.grid._window import disk_union, disk_windows

__all__ = [
    "EARTH_AREA",
    "MAX_LEVEL",
    "PENTAGON_SHARE",
    "R_AUTHALIC",
    "Footprint",
    "all_zones",
    "bbox_area",
    "check_lat_lon",
    "disk_union",
    "disk_windows",
    "index_to_zone",
    "is_pentagon",
    "point_to_zone",
    "raster_to_zone",
    "read_polygon",
    "zone_area",
    "zone_areas",
    "zone_boundary",
    "zone_children",
    "zone_count",
    "zone_disk",
    "zone_fields",
    "zone_from_text",
    "zone_level",
    "zone_neighbors",
    "zone_parent",
    "zone_ring",
    "zone_to_geojson",
    "zone_to_index",
    "zone_to_point",
    "zone_to_text",
    "zones_in_bbox",
    "zones_in_polygon",
    "zones_in_radius",
]
