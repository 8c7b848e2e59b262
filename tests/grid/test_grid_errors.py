"""Bad input: every grid function raises alveary.GridError (a ValueError) naming the
parameter, the bad value and, for arrays, its position (grid-api.md)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from alveary import AlvearyError, GridError, grid
from support.samples import layout_id

U64 = np.uint64
GOOD = layout_id(5, 2, 17, 9)
ZONE_PARAMS = {"zone", "zones"}


def raises(fn, *args, parameter, value=None, index=None, **kwargs) -> GridError:
    with pytest.raises(GridError) as info:
        fn(*args, **kwargs)
    err = info.value
    assert isinstance(err, ValueError) and isinstance(err, AlvearyError)
    names = parameter if isinstance(parameter, set) else {parameter}
    assert err.parameter in names, f"parameter {err.parameter!r}, expected one of {names}"
    assert err.parameter in str(err)
    if value is not None:
        if isinstance(value, float) and math.isnan(value):
            assert isinstance(err.value, float | np.floating) and math.isnan(err.value)
        else:
            assert err.value == value
            assert str(value) in str(err) or repr(value) in str(err)
    if index is not None:
        assert np.ravel(err.index).tolist() == np.ravel(index).tolist()
    return err


# -- coordinates and levels --------------------------------------------------------------


@pytest.mark.parametrize("lat", [90.000001, -91.0, 1e300, math.inf, -math.inf, math.nan])
def test_bad_latitude(lat):
    raises(grid.point_to_zone, lat, 0.0, 5, parameter="lat", value=lat)


@pytest.mark.parametrize("lon", [math.nan, math.inf, -math.inf])
def test_bad_longitude(lon):
    raises(grid.point_to_zone, 10.0, lon, 5, parameter="lon", value=lon)


def test_bad_latitude_in_an_array_names_its_position():
    raises(
        grid.point_to_zone,
        np.array([0.0, 45.0, 95.5, 12.0]),
        np.zeros(4),
        3,
        parameter="lat",
        value=95.5,
        index=2,
    )
    raises(
        grid.point_to_zone,
        np.zeros((2, 3)),
        np.array([[0.0, 1.0, 2.0], [3.0, math.nan, 5.0]]),
        3,
        parameter="lon",
        index=(1, 1),
    )


@pytest.mark.parametrize("level", [-1, 25, 100, 2.5, "3", None])
def test_bad_level(level):
    for fn, args in (
        (grid.point_to_zone, (0.0, 0.0)),
        (grid.zone_count, ()),
        (grid.zone_area, ()),
        (grid.zones_in_bbox, (-1.0, -1.0, 1.0, 1.0)),
        (grid.zones_in_radius, (0.0, 0.0, 1000.0)),
    ):
        raises(fn, *args, level, parameter="level")


def test_all_zones_level_range():
    raises(grid.all_zones, -1, parameter="level", value=-1)
    raises(grid.all_zones, 11, parameter="level", value=11)


# -- zone ids and text ----------------------------------------------------------------------


BAD_IDS = [
    0,  # never a valid id (contract)
    1,
    32,  # highest bit 5: not 2r + 4 for any level
    (1 << 4) | (7 << 1),  # level 0, region 7
    (1 << 6) | (5 << 3) | 1,  # level 1 northern apex with j = 1
    (1 << 6) | (6 << 3) | (1 << 1),  # level 1 southern apex with i = 1
    1 << 54,  # level 25
    2**64 - 1,
]


@pytest.mark.parametrize("bad", BAD_IDS)
def test_malformed_zone_ids(bad):
    for fn in (grid.zone_to_point, grid.zone_level, grid.is_pentagon, grid.zone_to_text):
        raises(fn, U64(bad), parameter=ZONE_PARAMS)
    for fn in (grid.zone_boundary, grid.zone_neighbors, grid.zone_children):
        raises(fn, U64(bad), parameter=ZONE_PARAMS)
    raises(grid.zone_disk, U64(bad), 1, parameter=ZONE_PARAMS)


@pytest.mark.parametrize("bad", [-5, 1.5, "abc", None, [1.5, 2.5]])
def test_zone_ids_that_are_not_unsigned_integers(bad):
    raises(grid.zone_to_point, bad, parameter=ZONE_PARAMS)


def test_bad_zone_in_an_array_names_its_position():
    zs = np.array([GOOD, GOOD, 0, GOOD], dtype=U64)
    raises(grid.zone_to_point, zs, parameter=ZONE_PARAMS, value=0, index=2)
    raises(grid.zone_parent, zs, parameter=ZONE_PARAMS, index=2)


@pytest.mark.parametrize(
    "text",
    [
        "",
        "abc",
        "12x-1-1",  # strip letters a..e
        "12b-8192-0",  # rows in [0, 2n) = [0, 8192) at level 12
        "12b-1-4096",  # columns in [0, n)
        "12b-3021",
        "12n-0-0",
        "25n",  # level above 24
        "-1n",
        "12b--3-4",
        "12B-3021-877x",
    ],
)
def test_malformed_text(text):
    raises(grid.zone_from_text, text, parameter={"text", "texts"})


def test_malformed_text_in_an_array_names_its_position():
    raises(grid.zone_from_text, ["0n", "3c-2-1", "nonsense"], parameter={"text", "texts"}, index=2)


@pytest.mark.parametrize(
    "level, region, i, j, parameter",
    [
        (25, 0, 0, 0, "level"),
        (3, 7, 0, 0, "region"),
        (3, -1, 0, 0, "region"),
        (3, 0, 16, 0, "i"),  # rows in [0, 2n)
        (3, 0, 0, 8, "j"),  # columns in [0, n)
        (3, 0, -1, 0, "i"),
        (3, 5, 1, 0, {"i", "region"}),  # apexes have i = j = 0
        (3, 6, 0, 2, {"j", "region"}),
    ],
)
def test_bad_index(level, region, i, j, parameter):
    raises(grid.index_to_zone, level, region, i, j, parameter=parameter)


# -- steps, hierarchy, regions ------------------------------------------------------------


@pytest.mark.parametrize("k", [-1, 1.5, "2", None])
def test_bad_k(k):
    raises(grid.zone_disk, U64(GOOD), k, parameter="k")
    raises(grid.zone_ring, U64(GOOD), k, parameter="k")


def test_hierarchy_ends():
    raises(grid.zone_parent, U64(layout_id(0, 5, 0, 0)), parameter=ZONE_PARAMS)
    raises(grid.zone_children, U64(layout_id(24, 0, 5, 5)), parameter=ZONE_PARAMS)


@pytest.mark.parametrize("meters", [-1.0, math.nan, math.inf])
def test_bad_radius(meters):
    raises(grid.zones_in_radius, 10.0, 20.0, meters, 5, parameter="meters")


def test_bad_radius_centre():
    raises(grid.zones_in_radius, 91.0, 20.0, 1000.0, 5, parameter="lat", value=91.0)


@pytest.mark.parametrize(
    "box, parameter",
    [
        ((0.0, 95.0, 1.0, 96.0), "south"),
        ((0.0, -1.0, 1.0, 90.5), "north"),
        ((0.0, 10.0, 1.0, 5.0), {"south", "north"}),  # south above north
        ((math.nan, 0.0, 1.0, 1.0), "west"),
        ((0.0, 0.0, math.inf, 1.0), "east"),
    ],
)
def test_bad_bbox(box, parameter):
    raises(grid.zones_in_bbox, *box, 4, parameter=parameter)
    raises(grid.bbox_area, *box, parameter=parameter)


def test_lat_lon_check_names_value_range_and_position():
    err = raises(
        grid.check_lat_lon,
        [[0.0, 1.0], [2.0, -90.5]],
        0.0,
        parameter="lat",
        value=-90.5,
        index=(1, 1),
    )
    assert "[-90, 90]" in str(err)
    err = raises(
        grid.check_lat_lon, [0.0, 1.0], [10.0, 180.5], parameter="lon", value=180.5, index=1
    )
    assert "[-180, 180]" in str(err)
    raises(grid.check_lat_lon, 0.0, float("nan"), wrap=True, parameter="lon")
    raises(grid.check_lat_lon, [0.0, 1.0], [1.0, 2.0, 3.0], parameter="lon")
    lat, lon = grid.check_lat_lon([0.0, 45.0], [180.5, -540.0], wrap=True)
    assert lon.tolist() == [-179.5, 180.0 - 360.0]
    lat, lon = grid.check_lat_lon(45, 180)
    assert (float(lat), float(lon)) == (45.0, 180.0)
