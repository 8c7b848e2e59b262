"""Zone counts, the id layout and areas, against the contract, analytic facts and
pyproj.Geod (geodesic areas on the WGS84 ellipsoid, Karney's algorithm)."""

from __future__ import annotations

import types

import numpy as np
import pyproj
import pytest
from grid_reference import ReferenceGrid

from alveary import GridError, grid
from support.samples import WGS84_AREA_M2, layout_id, pentagons

GEOD = pyproj.Geod(ellps="WGS84")


def geodesic_area(boundary: np.ndarray) -> float:
    """Signed area (m²) of a (m, 2) lat/lon ring on WGS84: positive when counter-clockwise."""
    area, _ = GEOD.polygon_area_perimeter(boundary[:, 1], boundary[:, 0])
    return area


def test_public_surface_is_small_sorted_and_documented():
    # house style: one sorted __all__, exactly the public names, each with a runnable
    # example (the doctests run in the suite)
    # sorted as ruff's RUF022 sorts: constants, then classes, then functions
    def rank(name: str) -> tuple[int, str]:
        return (0 if name.isupper() else 1 if name[0].isupper() else 2), name

    order = sorted(set(grid.__all__), key=rank)
    assert grid.__all__ == order
    public = {
        name
        for name, value in vars(grid).items()
        if not name.startswith("_") and not isinstance(value, types.ModuleType)
    }
    assert public == set(grid.__all__)
    for name in grid.__all__:
        value = getattr(grid, name)
        if callable(value):
            assert ">>>" in (value.__doc__ or ""), f"{name} has no example"
    # the design notes' constants: levels 0..24, pentagons 5/6 of a hexagon
    assert grid.MAX_LEVEL == 24
    assert grid.PENTAGON_SHARE == 5 / 6
    # WGS84's surface area, 510 065 621.724 km² (the authalic sphere's by construction)
    assert grid.EARTH_AREA == pytest.approx(WGS84_AREA_M2, rel=1e-12)
    assert 4 * np.pi * grid.R_AUTHALIC**2 == pytest.approx(WGS84_AREA_M2, rel=1e-12)


def test_zone_count_formula():
    # contract: 10 4^r + 2 (the icosahedral aperture-4 count: V - E + F = 2 on a sphere)
    for level in range(grid.MAX_LEVEL + 1):
        assert grid.zone_count(level) == 10 * 4**level + 2


@pytest.mark.parametrize("level", range(7))
def test_all_zones_counts_and_layout(level):
    zones = grid.all_zones(level)
    assert zones.dtype == np.uint64
    assert zones.size == 10 * 4**level + 2
    assert np.unique(zones).size == zones.size
    assert (np.diff(zones.astype(np.int64)) > 0).all(), "all_zones must be ascending"
    # exactly the ids of the contract's layout: 5 strips of (2n, n) plus two apexes
    n = 1 << level
    expected = {layout_id(level, k, i, j) for k in range(5) for i in range(2 * n) for j in range(n)}
    expected |= {layout_id(level, 5, 0, 0), layout_id(level, 6, 0, 0)}
    assert set(zones.tolist()) == expected
    assert (grid.zone_level(zones) == level).all()
    pent = np.asarray(grid.is_pentagon(zones))
    assert pent.sum() == 12
    assert sorted(zones[pent].tolist()) == pentagons(level)


@pytest.mark.parametrize("level", range(5))
def test_the_lattice_model_partitions_into_exactly_the_layout(level):
    # every lattice point of every face has exactly one owner (asserted inside), and the
    # owners are exactly all_zones: the ownership rule of the design notes holds
    ref = ReferenceGrid()
    assert ref.all_lattice_ids(level) == set(grid.all_zones(level).tolist())


def test_pentagon_centres_are_the_icosahedron_vertices():
    ref = ReferenceGrid()
    for level in (0, 1, 5, 13, 24):
        lat, lon = grid.zone_to_point(np.array(pentagons(level), dtype=np.uint64))
        got = {
            (round(float(a), 8), round(float(b), 8) % 360) for a, b in zip(lat, lon, strict=True)
        }
        want = {(round(float(a), 8), round(float(b), 8) % 360) for a, b in ref.vertex_geodetic}
        assert got == want


def test_ids_fit_in_53_bits():
    # contract: ids of every level <= 24 are exact JSON integers (IEEE doubles)
    top = grid.index_to_zone(24, 6, 0, 0)
    assert int(top) < 2**53
    assert int(grid.index_to_zone(24, 4, 2**25 - 1, 2**24 - 1)) < 2**53


def test_all_zones_refuses_big_levels():
    # contract: all_zones is for levels <= 10
    with pytest.raises(GridError):
        grid.all_zones(11)


def test_zone_area_is_the_wgs84_area_shared_out():
    # design: WGS84 surface area 510 065 621.724 km² / (10 4^r) is the hexagon area
    for level in range(grid.MAX_LEVEL + 1):
        assert grid.zone_area(level) == pytest.approx(WGS84_AREA_M2 / (10 * 4**level), rel=1e-12)


def outline_areas(zones: np.ndarray) -> np.ndarray:
    """Geodesic areas (pyproj.Geod) of the zones' true outlines."""
    rings = grid.zone_boundary(zones)
    return np.array([geodesic_area(r[~np.isnan(r[:, 0])]) for r in rings])


@pytest.mark.parametrize("level", [3, 4, 5, 6])
def test_zone_areas_are_the_geodesic_areas_of_every_zone(level):
    # Every zone's true outline, measured by pyproj.Geod on WGS84, has the area
    # zone_areas gives it (hexagons S / (10 4^r), pentagons 5/6 of that: the design
    # notes) to 0.1 % (in fact about 1e-5), and together they are the ellipsoid's area.
    zones = grid.all_zones(level)
    measured = outline_areas(zones)
    nominal = grid.zone_areas(zones)
    worst = np.abs(measured / nominal - 1)
    assert worst.max() < 1e-4, grid.zone_to_text(zones[np.argmax(worst)])
    pent = np.asarray(grid.is_pentagon(zones))
    share = measured[pent].mean() / measured[~pent].mean()
    assert share == pytest.approx(5 / 6, rel=1e-4)
    assert measured.sum() == pytest.approx(WGS84_AREA_M2, rel=1e-9)
    assert nominal.sum() == pytest.approx(WGS84_AREA_M2, rel=1e-12)


@pytest.mark.parametrize("level", [2, 5])
def test_geodesic_boundaries_tile_the_ellipsoid(level):
    # Neighbouring boundaries share their corners, so the geodesic polygons tile the
    # ellipsoid whatever the shape of the true edges: their areas (pyproj.Geod) add up to
    # the ellipsoid's area, and each is positive (counter-clockwise seen from outside).
    zones = grid.all_zones(level)
    b = grid.zone_boundary(zones, corners_only=True)
    areas = np.array(
        [
            geodesic_area(ring[~np.isnan(ring[:, 0])])
            for ring in b  # pentagons have NaN in their sixth row
        ]
    )
    assert (areas > 0).all()
    assert areas.sum() == pytest.approx(WGS84_AREA_M2, rel=1e-9)


def test_geodesic_area_of_random_zones_levels_8_to_16():
    # goal: the geodesic area of zone boundaries matches zone_area to 0.1% at levels 8-16
    rng = np.random.default_rng(7)
    for level in range(8, 17):
        lat = np.degrees(np.arcsin(rng.uniform(-1, 1, 60)))
        lon = rng.uniform(-180, 180, 60)
        zones = grid.point_to_zone(lat, lon, level)
        areas = outline_areas(zones)
        np.testing.assert_allclose(areas, grid.zone_areas(zones), rtol=1e-4, err_msg=str(level))


def test_children_weights_share_out_the_geodesic_area():
    # design notes: central child weight 1, edge children 1/2; measured with pyproj.Geod on
    # the children's boundaries, the weighted sum is the parent's geodesic area (hexagons)
    rng = np.random.default_rng(9)
    for level in (8, 11, 15):
        lat = np.degrees(np.arcsin(rng.uniform(-1, 1, 20)))
        lon = rng.uniform(-180, 180, 20)
        for zone in grid.point_to_zone(lat, lon, level):
            if grid.is_pentagon(zone):
                continue
            ids, weights = grid.zone_children(zone)
            kids = sum(
                w * geodesic_area(np.asarray(grid.zone_boundary(c)))
                for c, w in zip(ids, weights, strict=True)
            )
            assert kids == pytest.approx(
                geodesic_area(np.asarray(grid.zone_boundary(zone))), rel=1e-3
            )
