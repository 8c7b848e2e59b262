"""Resolution, planning and execution over the in-memory stand-in cube.

Zone sets are checked against independent computations: the hexagon count of a k-disk
(3k(k+1) + 1, common practice for hexagonal lattices), pyproj.Geod distances for radius
queries, and the analytic field evaluated at the zone centres for values.
"""

from __future__ import annotations

import asyncio

import numpy as np
import pytest
from pyproj import Geod

from alveary import InvalidInput, LimitExceeded, NotFound, grid
from alveary.query import (
    BboxQuery,
    Catalog,
    CubeSource,
    DiskQuery,
    Limits,
    PointQuery,
    PointsQuery,
    PolygonQuery,
    RadiusQuery,
    Selection,
    StatsResult,
    execute,
    make_plan,
    parse_datetime,
    parse_polygon,
    resolve,
)
from support.memcube import MemoryCube, field

GEOD = Geod(ellps="WGS84")


@pytest.fixture
def memory_cube():
    return MemoryCube()


@pytest.fixture
def cat(memory_cube):
    c = Catalog([CubeSource("mem", "memory://mem")], opener=lambda url, opts: memory_cube)
    c.open_all()
    return c


def run(plan):
    return asyncio.run(execute(plan, None, deadline=5))


def test_resolve_defaults_and_errors(cat):
    r = resolve(cat, "mem", PointQuery(10.0, 20.0))
    assert r.level == 5 and r.variables == ("f", "g") and (r.t0, r.t1) == (3, 4)
    with pytest.raises(NotFound):
        resolve(cat, "nope", PointQuery(10.0, 20.0))
    with pytest.raises(InvalidInput) as info:
        resolve(cat, "mem", PointQuery(10.0, 20.0, Selection(level=4)))
    assert info.value.parameter == "level" and "[3, 5]" in info.value.allowed
    with pytest.raises(InvalidInput) as info:
        resolve(cat, "mem", PointQuery(10.0, 20.0, Selection(variables=("f", "rain"))))
    assert info.value.parameter == "vars" and info.value.value == "rain"


def test_key_is_normalised(cat, memory_cube):
    a = resolve(cat, "mem", PointQuery(1.0, 2.0, Selection(time=parse_datetime("2024-01-02/.."))))
    b = resolve(
        cat,
        "mem",
        PointQuery(1.0, 2.0, Selection(time=parse_datetime("2024-01-01T12:00:00Z/2030-01-01"))),
    )
    assert a.key == b.key  # same time steps selected
    memory_cube.version = "v2"
    c = resolve(cat, "mem", PointQuery(1.0, 2.0, Selection(time=parse_datetime("2024-01-02/.."))))
    assert c.key != a.key


def test_point_values_are_the_field_at_the_centre(cat):
    sel = Selection(time=parse_datetime("../.."))
    res = run(make_plan(resolve(cat, "mem", PointQuery(-33.9, 151.2, sel)), Limits()))
    zone = grid.point_to_zone(-33.9, 151.2, 5)
    assert res.zones.tolist() == [int(zone)]
    lat, lon = grid.zone_to_point(zone)
    expected = field(lat, lon, np.arange(4.0))
    np.testing.assert_allclose(res.values["f"][:, 0], expected, rtol=1e-12)
    np.testing.assert_allclose(res.values["g"][:, 0], 2 * expected, rtol=1e-12)


def test_disk_counts_and_steps(cat):
    for k in (0, 1, 4):
        plan = make_plan(resolve(cat, "mem", DiskQuery(k=k, lat=10.0, lon=20.0)), Limits())
        assert plan.zones.size == 3 * k * (k + 1) + 1
        assert plan.extra["steps"].max() == k
        assert plan.extra["steps"][0] == 0  # the centre first
        assert np.all(np.diff(plan.extra["steps"]) >= 0)
    centre = int(grid.point_to_zone(10.0, 20.0, 5))
    by_zone = make_plan(resolve(cat, "mem", DiskQuery(k=2, zone=centre)), Limits())
    by_point = make_plan(resolve(cat, "mem", DiskQuery(k=2, lat=10.0, lon=20.0)), Limits())
    assert by_zone.zones.tolist() == by_point.zones.tolist()


def test_disk_zone_of_a_level_the_cube_lacks(cat):
    zone = int(grid.point_to_zone(10.0, 20.0, 4))
    with pytest.raises(InvalidInput) as info:
        resolve(cat, "mem", DiskQuery(k=1, zone=zone))
    assert info.value.parameter == "zone"


def test_radius_distances_against_geod(cat):
    plan = make_plan(resolve(cat, "mem", RadiusQuery(45.0, 7.0, 800_000.0)), Limits())
    lat, lon = grid.zone_to_point(plan.zones)
    # Reference: pyproj.Geod inverse geodesic on WGS84.
    _, _, dist = GEOD.inv(np.full(lat.size, 7.0), np.full(lat.size, 45.0), lon, lat)
    np.testing.assert_allclose(plan.extra["distance_m"], dist, rtol=1e-6, atol=0.01)
    assert np.all(dist <= 800_000.0)
    assert np.all(np.diff(plan.extra["distance_m"]) >= 0)  # nearest first
    # Nothing just outside was missed: every centre of a wider disk that is closer is in.
    wide = grid.zone_disk(grid.point_to_zone(45.0, 7.0, 5), 6)
    wlat, wlon = grid.zone_to_point(wide)
    _, _, wd = GEOD.inv(np.full(wlat.size, 7.0), np.full(wlat.size, 45.0), wlon, wlat)
    assert set(wide[wd <= 800_000.0].tolist()) == set(plan.zones.tolist())


def test_nearest_with_data_skips_gaps():
    cube = MemoryCube(nodata_below_lat=44.9)
    c = Catalog([CubeSource("mem", "memory://mem")], opener=lambda url, opts: cube)
    c.open_all()
    res = run(
        make_plan(resolve(c, "mem", RadiusQuery(44.9, 7.0, 600_000.0, nearest=True)), Limits())
    )
    assert res.zones.size == 1
    lat, _ = grid.zone_to_point(res.zones)
    assert lat[0] >= 44.9
    # Independent brute force: the closest centre north of the gap line.
    full = make_plan(resolve(c, "mem", RadiusQuery(44.9, 7.0, 600_000.0)), Limits())
    flat, flon = grid.zone_to_point(full.zones)
    _, _, d = GEOD.inv(np.full(flat.size, 7.0), np.full(flat.size, 44.9), flon, flat)
    d[flat < 44.9] = np.inf
    assert res.zones[0] == full.zones[np.argmin(d)]


def test_points_repeat_zones_and_read_each_once(cat, memory_cube):
    lat = np.array([10.0, 10.0001, -5.0])
    lon = np.array([20.0, 20.0001, 3.0])
    plan = make_plan(resolve(cat, "mem", PointsQuery(lat, lon)), Limits())
    assert plan.read_zones.size == 2 and plan.zones.size == 3
    res = run(plan)
    assert res.extra["point"].tolist() == [0, 1, 2]
    assert res.values["f"][0, 0] == res.values["f"][0, 1]
    assert all(n == 2 for _, n, _, _ in memory_cube.reads)


def test_polygon_stats_are_area_means(cat):
    area = parse_polygon(
        {"type": "Polygon", "coordinates": [[[0, 0], [30, 0], [30, 30], [0, 30], [0, 0]]]}, 100
    )
    plan = make_plan(resolve(cat, "mem", PolygonQuery(area, ("mean", "count"))), Limits())
    res = run(plan)
    assert isinstance(res, StatsResult)
    lat, lon = grid.zone_to_point(plan.read_zones)
    expected = field(lat, lon, np.full(lat.size, 3.0)).mean()  # equal-area: plain mean
    assert res.stats["f"]["mean"][0] == pytest.approx(expected, rel=1e-12)
    assert res.stats["f"]["count"][0] == plan.read_zones.size
    assert res.area_m2 == pytest.approx(plan.read_zones.size * grid.zone_area(5))


def test_limits_refuse_before_any_read(cat, memory_cube):
    small = Limits(max_zones=50, max_k=3, max_points=2, max_cells=20)
    cases = [
        (DiskQuery(k=4, lat=0.0, lon=0.0), "k"),
        (BboxQuery(-60.0, -60.0, 60.0, 60.0), "zones per request"),
        (RadiusQuery(0.0, 0.0, 5_000_000.0), "zones per request"),
        (PointsQuery(np.zeros(3), np.zeros(3)), "points per request"),
        (
            PointQuery(0.0, 0.0, Selection(time=parse_datetime("../.."))),
            None,
        ),
    ]
    for query, limit in cases[:-1]:
        with pytest.raises(LimitExceeded) as info:
            make_plan(resolve(cat, "mem", query), small)
        assert info.value.limit == limit
    with pytest.raises(LimitExceeded) as info:
        make_plan(
            resolve(
                cat,
                "mem",
                DiskQuery(k=3, lat=0.0, lon=0.0, selection=Selection(time=parse_datetime("../.."))),
            ),
            small,
        )
    assert info.value.limit == "time steps × zones" and info.value.requested == 4 * 37
    assert memory_cube.reads == []


def test_huge_polygon_is_refused_from_its_area(cat):
    # At level 5 a 170° x 80° box holds far more than 100 zones: refused by the area
    # estimate, before the zones are enumerated.
    area = parse_polygon(
        {
            "type": "Polygon",
            "coordinates": [[[-85, -40], [85, -40], [85, 40], [-85, 40], [-85, -40]]],
        },
        100,
    )
    with pytest.raises(LimitExceeded) as info:
        make_plan(resolve(cat, "mem", PolygonQuery(area)), Limits(max_zones=100))
    assert info.value.requested > 100
