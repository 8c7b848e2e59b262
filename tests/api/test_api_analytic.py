"""End to end: a real ``alveary serve`` process on 127.0.0.1 serving the analytic cube from
the S3-protocol test server answers every query with the field at the zone centres.

The judge is ``support.analytic.field`` evaluated here, independently of the service, at
the centres the service reports; zone sets are judged by shapely (polygon containment),
pyproj.Geod (radius distances) and the hexagonal disk count 3k(k+1) + 1 (common practice).
"""

from __future__ import annotations

import httpx
import numpy as np
import pytest
import shapely
from pyproj import Geod

from alveary import grid
from support.analytic import NTIMES, TIMES, field, rain

GEOD = Geod(ellps="WGS84")
DAYS = np.arange(NTIMES, dtype=np.float64)
ALL = "../.."


@pytest.fixture(scope="module")
def http(service):
    with httpx.Client(base_url=service.url, timeout=30) as client:
        yield client


def values_of(body, var):
    """(zones, lat, lon, values (zone, time)) from a JSON answer."""
    rows = body["zones"]
    zones = np.array([r["zone"] for r in rows], dtype=np.uint64)
    lat = np.array([r["lat"] for r in rows])
    lon = np.array([r["lon"] for r in rows])
    vals = np.array([[np.nan if v is None else v for v in r["values"][var]] for r in rows])
    return zones, lat, lon, vals


def day_index(body):
    times = np.array([t.rstrip("Z") for t in body["times"]], dtype="datetime64[s]")
    return ((times - TIMES[0]) / np.timedelta64(1, "D")).astype(float)


@pytest.mark.parametrize(("lat", "lon"), [(45.2, 7.6), (-33.9, 151.2), (89.99, 0.0), (0.0, 179.99)])
def test_point_series_is_the_field_at_the_centre(http, lat, lon):
    r = http.get("/cubes/analytic/point", params={"lat": lat, "lon": lon, "datetime": ALL})
    assert r.status_code == 200, r.text
    body = r.json()
    assert body["level"] == 7 and body["kind"] == "point"
    zones, clat, clon, vals = values_of(body, "temp")
    assert zones.size == 1
    # The reported centre is the zone's centre, and the zone holds the point: the point
    # lies closer to that centre than to any neighbour's centre (geodesic, pyproj.Geod).
    nb = grid.zone_neighbors(zones[0])
    nlat, nlon = grid.zone_to_point(nb)
    _, _, d_own = GEOD.inv(lon, lat, clon[0], clat[0])
    _, _, d_nb = GEOD.inv(np.full(nb.size, lon), np.full(nb.size, lat), nlon, nlat)
    assert d_own <= d_nb.min() * 1.05
    np.testing.assert_allclose(vals[0], field(clat[0], clon[0], day_index(body)), rtol=1e-12)
    assert body["zones"][0]["zone_text"] == str(grid.zone_to_text(zones[0]))


def test_point_at_coarse_level_and_instant(http):
    r = http.get(
        "/cubes/analytic/point",
        params={"lat": 45.2, "lon": 7.6, "level": 3, "datetime": "2024-05-03T12:00:00Z"},
    )
    body = r.json()
    assert body["level"] == 3
    assert body["times"] == ["2024-05-03T00:00:00Z"]  # the step in force at that instant
    _, clat, clon, vals = values_of(body, "temp")
    assert vals[0, 0] == pytest.approx(float(field(clat[0], clon[0], 2.0)), rel=1e-12)


@pytest.mark.parametrize("k", [0, 1, 3, 10])
def test_disk(http, k):
    r = http.get("/cubes/analytic/disk", params={"lat": 45.2, "lon": 7.6, "k": k, "datetime": ALL})
    assert r.status_code == 200, r.text
    body = r.json()
    zones, clat, clon, vals = values_of(body, "temp")
    assert zones.size == 3 * k * (k + 1) + 1
    steps = np.array([row["steps"] for row in body["zones"]])
    assert steps[0] == 0 and steps.max() == k
    assert np.all(np.bincount(steps)[1:] == 6 * np.arange(1, k + 1))  # ring sizes 6k
    expected = field(clat[:, None], clon[:, None], day_index(body)[None, :])
    np.testing.assert_allclose(vals, expected, rtol=1e-12)


def test_disk_by_zone_text(http):
    centre = grid.point_to_zone(45.2, 7.6, 7)
    by_text = http.get(
        "/cubes/analytic/disk", params={"zone": str(grid.zone_to_text(centre)), "k": 2}
    ).json()
    by_id = http.get("/cubes/analytic/disk", params={"zone": int(centre), "k": 2}).json()
    assert by_text["zones"] == by_id["zones"] and len(by_id["zones"]) == 19


def test_radius_distances_and_values(http):
    params = {"lat": 45.2, "lon": 7.6, "meters": 120_000, "datetime": ALL}
    body = http.get("/cubes/analytic/radius", params=params).json()
    zones, clat, clon, vals = values_of(body, "temp")
    dist = np.array([row["distance_m"] for row in body["zones"]])
    _, _, geod = GEOD.inv(np.full(zones.size, 7.6), np.full(zones.size, 45.2), clon, clat)
    np.testing.assert_allclose(dist, geod, rtol=1e-9, atol=1e-3)  # pyproj.Geod
    assert np.all(geod <= 120_000) and np.all(np.diff(dist) >= 0)
    # Independent completeness check: every centre of a wide disk within 120 km is there.
    wide = grid.zone_disk(grid.point_to_zone(45.2, 7.6, 7), 4)
    wlat, wlon = grid.zone_to_point(wide)
    _, _, wd = GEOD.inv(np.full(wide.size, 7.6), np.full(wide.size, 45.2), wlon, wlat)
    assert set(wide[wd <= 120_000].tolist()) == set(zones.tolist())
    np.testing.assert_allclose(vals, field(clat[:, None], clon[:, None], DAYS[None, :]), rtol=1e-12)


def test_radius_nearest_with_data(http):
    # rain has no data south of 44.8° N: from a fix at 44.7° N the nearest zone with data
    # lies to the north.
    params = {"lat": 44.7, "lon": 7.6, "meters": 100_000, "vars": "rain", "nearest": "true"}
    body = http.get("/cubes/analytic/radius", params=params).json()
    assert len(body["zones"]) == 1
    row = body["zones"][0]
    assert row["lat"] >= 44.8
    full = http.get("/cubes/analytic/radius", params={**params, "nearest": "false"}).json()
    candidates = [z for z in full["zones"] if z["lat"] >= 44.8]
    best = min(candidates, key=lambda z: GEOD.inv(7.6, 44.7, z["lon"], z["lat"])[2])
    assert row["zone"] == best["zone"]
    assert row["values"]["rain"][0] == pytest.approx(float(rain(row["lat"], row["lon"], 5.0)))


POLY = {
    "type": "Polygon",
    "coordinates": [
        [[6.0, 44.0], [9.0, 44.2], [8.5, 46.5], [6.5, 46.0], [6.0, 44.0]],
        [[7.0, 45.0], [7.5, 45.0], [7.5, 45.5], [7.0, 45.5], [7.0, 45.0]],
    ],
}


def test_polygon_zones_and_values(http):
    r = http.post("/cubes/analytic/polygon", params={"datetime": ALL}, json=POLY)
    assert r.status_code == 200, r.text
    body = r.json()
    zones, clat, clon, vals = values_of(body, "temp")
    shape = shapely.geometry.shape(POLY)
    # Reference: shapely point-in-polygon (hole respected) for every reported centre ...
    assert shapely.contains_xy(shape, clon, clat).all()
    # ... and no centre of the surrounding zones inside the polygon is missing.
    around = grid.zones_in_bbox(5.5, 43.5, 9.5, 47.0, 7)
    alat, alon = grid.zone_to_point(around)
    inside = around[shapely.contains_xy(shape, alon, alat)]
    assert set(inside.tolist()) == set(zones.tolist())
    np.testing.assert_allclose(vals, field(clat[:, None], clon[:, None], DAYS[None, :]), rtol=1e-12)


def test_polygon_statistics_per_step(http):
    r = http.post("/cubes/analytic/polygon", params={"datetime": ALL, "stats": "all"}, json=POLY)
    body = r.json()
    assert body["kind"] == "stats"
    zones = grid.zones_in_polygon(POLY, 7)
    lat, lon = grid.zone_to_point(zones)
    f = field(lat[None, :], lon[None, :], DAYS[:, None])
    st = body["stats"]["temp"]
    # numpy reductions as the reference; equal-area zones, no pentagon near the Alps.
    np.testing.assert_allclose(st["mean"], f.mean(axis=1), rtol=1e-12)
    np.testing.assert_allclose(st["min"], f.min(axis=1), rtol=1e-12)
    np.testing.assert_allclose(st["max"], f.max(axis=1), rtol=1e-12)
    np.testing.assert_allclose(st["sum"], f.sum(axis=1), rtol=1e-12)
    np.testing.assert_allclose(st["std"], f.std(axis=1), rtol=1e-9)
    assert st["count"] == [zones.size] * NTIMES
    assert body["zone_count"] == zones.size
    assert body["area_m2"] == pytest.approx(zones.size * grid.zone_area(7), rel=1e-12)
    r2 = body["stats"]["rain"]
    have = ~np.isnan(rain(lat, lon, 0.0))
    assert r2["count"] == [int(have.sum())] * NTIMES
    np.testing.assert_allclose(r2["area_m2"], have.sum() * grid.zone_area(7), rtol=1e-12)


def test_bbox_across_the_antimeridian(http):
    body = http.get("/cubes/analytic/bbox", params={"bbox": "179,-1,-179,1"}).json()
    zones, clat, clon, vals = values_of(body, "temp")
    assert zones.size > 0
    assert np.all((clon >= 179) | (clon <= -179)) and np.all(np.abs(clat) <= 1)
    np.testing.assert_allclose(vals[:, 0], field(clat, clon, DAYS[-1]), rtol=1e-12)


def test_points_many_at_once(http):
    rng = np.random.default_rng(3)
    lat = rng.uniform(-80, 80, 500)
    lon = rng.uniform(-180, 180, 500)
    r = http.post(
        "/cubes/analytic/points",
        params={"datetime": "2024-05-02/2024-05-03", "vars": "temp"},
        json={"lat": lat.tolist(), "lon": lon.tolist()},
    )
    body = r.json()
    assert [row["point"] for row in body["zones"]] == list(range(500))
    zones, clat, clon, vals = values_of(body, "temp")
    np.testing.assert_array_equal(zones, grid.point_to_zone(lat, lon, 7))
    np.testing.assert_allclose(
        vals, field(clat[:, None], clon[:, None], np.array([1.0, 2.0])), rtol=1e-12
    )
