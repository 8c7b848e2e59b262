"""Zone outlines as GeoJSON for every zone of a level, checked with shapely and pyproj.Geod.

RFC 7946: exterior rings counter-clockwise (§3.1.6), longitudes within [-180, 180] and
geometries crossing the antimeridian cut into MultiPolygons (§3.1.9). Cutting must not
change a zone: the geodesic area (pyproj.Geod) of the cut outline equals that of the
grid's own corner ring, which is read without cutting.
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from pyproj import Geod
from shapely.geometry import shape

from alveary import grid
from alveary.api._shapes import zone_geometries

GEOD = Geod(ellps="WGS84")


@pytest.mark.parametrize("level", [1, 3])
def test_every_zone_outline(level):
    zones = grid.all_zones(level)
    geometries = zone_geometries(zones)
    cut = 0
    for zone, geometry in zip(zones, geometries, strict=True):
        geom = shape(geometry)
        assert geom.is_valid, (grid.zone_to_text(zone), shapely.is_valid_reason(geom))
        polys = (
            geometry["coordinates"]
            if geometry["type"] == "MultiPolygon"
            else [geometry["coordinates"]]
        )
        for poly in polys:
            assert len(poly) == 1  # a zone has no holes
            assert shapely.LinearRing(poly[0]).is_ccw
            xy = np.array(poly[0])
            assert np.all(np.abs(xy[:, 0]) <= 180) and np.all(np.abs(xy[:, 1]) <= 90)
        corners = grid.zone_boundary(zone, face_edges=True)
        ring_area = abs(GEOD.polygon_area_perimeter(corners[:, 1], corners[:, 0])[0])
        if np.ptp(corners[:, 1]) > 180:  # the zone crosses ±180° or holds a pole
            cut += 1
            assert abs(GEOD.geometry_area_perimeter(geom)[0]) == pytest.approx(ring_area, rel=1e-9)
    assert cut >= 2 ** (level + 1)  # zones along the antimeridian were exercised


def test_centres_lie_inside_their_outlines():
    zones = grid.all_zones(4)
    lat, lon = grid.zone_to_point(zones)
    inside = [
        shape(g).intersects(shapely.Point(x, y))
        for g, x, y in zip(zone_geometries(zones), lon, lat, strict=True)
    ]
    assert all(inside)
