"""Resolution, planning and execution over real cubes on the in-memory store.

Zone sets are checked against independent computations: the hexagon count of a k-disk
(3k(k+1) + 1, common practice for hexagonal lattices), pyproj.Geod distances for radius
queries, shapely point-in-polygon for the zone under a point and for the centres inside
an area, and the published area of the WGS84 ellipsoid. Values are judged against what
was written into the cube for each zone id.
"""

from __future__ import annotations

import asyncio

import numpy as np
import pytest
import shapely
from pyproj import Geod

from alveary import InvalidInput, LimitExceeded, NotFound, grid
from alveary.query import (
    BboxQuery,
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
from support.memcube import memory_cube

GEOD = Geod(ellps="WGS84")
# The WGS84 ellipsoid's surface area, 510 065 621.724 km² (a published figure); an
# equal-area grid's hexagon at level r holds 1 / (10 * 4**r) of it.
WGS84_AREA_M2 = 510_065_621.724e6


@pytest.fixture(scope="module")
def mem():
    return memory_cube()


@pytest.fixture(scope="module")
def cat(mem):
    return mem.catalog()


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


def test_key_is_normalised_and_names_the_version():
    own = memory_cube(levels=(3,), ntimes=4)
    cat = own.catalog()
    query = PointQuery(1.0, 2.0, Selection(time=parse_datetime("2024-01-02/..")))
    a = resolve(cat, "mem", query)
    b = resolve(
        cat,
        "mem",
        PointQuery(1.0, 2.0, Selection(time=parse_datetime("2024-01-01T12:00:00Z/2030-01-01"))),
    )
    assert a.key == b.key  # same time steps selected
    own.publish(offset=1.0)
    assert cat.refresh() == {"mem": True}
    c = resolve(cat, "mem", query)
    assert c.key != a.key and c.version == own.versions[-1] != a.version


def test_a_plan_reads_the_version_it_was_made_from():
    # A new version is published and picked up between planning and execution: the
    # plan still reads the old version, every value of it (nothing mixed).
    own = memory_cube(levels=(3,), ntimes=4)
    cat = own.catalog()
    query = PointQuery(10.0, 20.0, Selection(time=parse_datetime("../..")))
    old = make_plan(resolve(cat, "mem", query), Limits())
    old_written = dict(own.written[("f", 3)])
    own.publish(offset=100.0)
    assert cat.refresh() == {"mem": True}
    new = make_plan(resolve(cat, "mem", query), Limits())
    zone = int(old.zones[0])
    before, after = run(old), run(new)
    assert before.version == own.versions[0] and after.version == own.versions[1]
    np.testing.assert_array_equal(before.values["f"][:, 0], old_written[zone])
    np.testing.assert_array_equal(after.values["f"][:, 0], own.written[("f", 3)][zone])
    np.testing.assert_allclose(after.values["f"] - before.values["f"], 100.0)


def test_point_answers_the_zone_holding_the_point(cat, mem):
    sel = Selection(time=parse_datetime("../.."))
    res = run(make_plan(resolve(cat, "mem", PointQuery(-33.9, 151.2, sel)), Limits()))
    assert res.zones.size == 1
    zone = int(res.zones[0])
    # Reference: shapely point-in-polygon on the zone's outline (lon, lat).
    outline = np.asarray(grid.zone_boundary(np.uint64(zone), face_edges=True)).reshape(-1, 2)
    outline = outline[~np.isnan(outline[:, 0])]
    assert shapely.Polygon(outline[:, ::-1]).contains(shapely.Point(151.2, -33.9))
    assert int(grid.zone_level(np.uint64(zone))) == 5  # the cube's finest level
    np.testing.assert_array_equal(res.values["f"][:, 0], mem.written[("f", 5)][zone])
    np.testing.assert_array_equal(res.values["g"][:, 0], mem.written[("g", 5)][zone])


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
    c = memory_cube(levels=(5,), ntimes=2, nodata_below_lat=44.9).catalog()
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


def test_points_repeat_zones_and_read_each_once(cat, mem):
    lat = np.array([10.0, 10.0001, -5.0])
    lon = np.array([20.0, 20.0001, 3.0])
    plan = make_plan(resolve(cat, "mem", PointsQuery(lat, lon)), Limits())
    assert plan.read_zones.size == 2 and plan.zones.size == 3
    assert all(read.nzones == 2 for read in plan.reads.values())  # each zone read once
    res = run(plan)
    assert res.extra["point"].tolist() == [0, 1, 2]
    for row, zone in enumerate(res.zones.tolist()):
        assert res.values["f"][0, row] == mem.written[("f", 5)][zone][-1]
    assert res.zones[0] == res.zones[1] != res.zones[2]


def test_polygon_stats_are_area_means(cat, mem):
    square = [[0, 0], [30, 0], [30, 30], [0, 30], [0, 0]]
    area = parse_polygon({"type": "Polygon", "coordinates": [square]}, 100)
    plan = make_plan(resolve(cat, "mem", PolygonQuery(area, ("mean", "count"))), Limits())
    res = run(plan)
    assert isinstance(res, StatsResult)
    # Reference: brute force over every zone of the level, centres tested by shapely
    # (on the edge counts as inside), values as written; no pentagon lies in the square,
    # so the area mean is the plain mean.
    every = grid.all_zones(5)
    clat, clon = grid.zone_to_point(every)
    inside = every[shapely.intersects_xy(shapely.Polygon(square), clon, clat)]
    assert not grid.is_pentagon(inside).any()
    expected = np.mean([mem.written[("f", 5)][z][-1] for z in inside.tolist()])
    assert res.zone_count == inside.size
    assert res.stats["f"]["mean"][0] == pytest.approx(expected, rel=1e-12)
    assert res.stats["f"]["count"][0] == inside.size
    assert res.area_m2 == pytest.approx(inside.size * WGS84_AREA_M2 / (10 * 4**5), rel=1e-9)


def test_limits_refuse_before_any_read(cat):
    stats = cat.get("mem").stats
    before = stats.snapshot()
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
    assert stats.snapshot() == before  # not one request to the store


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
