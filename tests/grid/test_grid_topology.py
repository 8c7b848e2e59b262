"""Topology of the grid: zones of points, neighbours, disks and rings, the hierarchy,
boundaries and ids, everywhere including the seams between strips and both apexes.

The expected answers come from grid_reference.ReferenceGrid, a lattice model built from
the written contract on top of the projection (itself checked against PROJ in
test_grid_projection.py), and from the design notes' seam rules and analytic counts.
"""

from __future__ import annotations

import numpy as np
import pytest
from grid_reference import (
    ReferenceGrid,
    authalic_to_geodetic,
    geodetic_to_authalic,
    latlon,
    unit,
)
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from alveary import grid
from support.samples import layout_id, layout_index, pentagons, place_samples, sample_zones
from support.strategies import edge_zones, levels, zones

SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
U64 = np.uint64


@pytest.fixture(scope="module")
def ref() -> ReferenceGrid:
    return ReferenceGrid()


_REF = None


def reference() -> ReferenceGrid:
    global _REF
    if _REF is None:
        _REF = ReferenceGrid()
    return _REF


def as_ids(values) -> np.ndarray:
    return np.asarray(list(values), dtype=U64)


def to_sphere(lat, lon) -> np.ndarray:
    """Unit vectors on the authalic sphere of geodetic (lat, lon)."""
    return unit(geodetic_to_authalic(np.asarray(lat, float)), np.asarray(lon, float))


def bfs(zone: int, k: int) -> dict[int, int]:
    """Steps from zone to every zone within k steps, by breadth-first search over
    zone_neighbors (written here, independent of zone_disk)."""
    steps = {int(zone): 0}
    frontier = [int(zone)]
    for step in range(1, k + 1):
        if not frontier:
            break
        nb = np.asarray(grid.zone_neighbors(as_ids(frontier))).reshape(len(frontier), -1)
        new = {int(z) for z in nb.ravel() if z != 0} - steps.keys()
        for z in new:
            steps[z] = step
        frontier = sorted(new)
    return steps


# -- zone of a point, centre of a zone ---------------------------------------------------


@SETTINGS
@given(zones(levels(0, 24)))
def test_zone_of_a_zones_centre_is_the_zone(zone):
    lat, lon = grid.zone_to_point(U64(zone))
    level = layout_index(zone)[0]
    assert int(grid.point_to_zone(lat, lon, level)) == zone


@pytest.mark.parametrize("level", range(25))
def test_round_trip_at_every_place_and_level(level):
    zs = as_ids(sample_zones(level))
    lat, lon = grid.zone_to_point(zs)
    assert (grid.point_to_zone(lat, lon, level) == zs).all()


@pytest.mark.parametrize("level", [0, 1, 2, 3, 6, 11, 17, 24])
def test_centres_match_the_lattice_model(ref, level):
    zs = sample_zones(level)
    lat, lon = grid.zone_to_point(as_ids(zs))
    want = np.array([ref.centre(z) for z in zs])
    # compared as geodetic unit vectors; 1e-9 degrees is about 0.1 mm
    got, expected = unit(lat, lon), unit(want[:, 0], want[:, 1])
    assert np.degrees(np.linalg.norm(got - expected, axis=1)).max() < 1e-9


@pytest.mark.parametrize("level", [0, 1, 2, 4, 7, 12, 18, 24])
def test_point_to_zone_matches_the_lattice_model(ref, level):
    rng = np.random.default_rng(100 + level)
    lat = np.degrees(np.arcsin(rng.uniform(-1, 1, 3000)))
    lon = rng.uniform(-180, 180, 3000)
    expected, margin = ref.locate(lat, lon, level)
    spacing = ref.C * np.sqrt(3) / (1 << level)
    clear = margin > 1e-7 * spacing  # not on a zone edge (a tie either way is fine)
    assert clear.mean() > 0.99
    got = grid.point_to_zone(lat, lon, level)
    assert got.dtype == U64 and got.shape == lat.shape
    bad = np.flatnonzero((got != expected) & clear)
    assert bad.size == 0, f"e.g. lat={lat[bad[0]]!r}, lon={lon[bad[0]]!r}, level={level}"


@SETTINGS
@given(zones(levels(0, 24)), st.integers(0, 2**32 - 1))
def test_points_well_inside_a_zone_fall_in_it(zone, seed):
    # the boundary shrunk by 10% toward the centre, on the sphere, then random points in
    # the fan of triangles from the centre
    level = layout_index(zone)[0]
    ring = np.asarray(grid.zone_boundary(U64(zone)))
    corners = to_sphere(ring[:, 0], ring[:, 1])
    c = to_sphere(*grid.zone_to_point(U64(zone)))
    shrunk = c + 0.9 * (corners - c)
    shrunk /= np.linalg.norm(shrunk, axis=1, keepdims=True)
    rng = np.random.default_rng(seed)
    m = corners.shape[0]
    k = rng.integers(0, m, 64)
    w = rng.dirichlet([1, 1, 1], 64)
    p = w[:, :1] * c + w[:, 1:2] * shrunk[k] + w[:, 2:] * shrunk[(k + 1) % m]
    beta, lon = latlon(p)
    lat = authalic_to_geodetic(beta)
    assert (grid.point_to_zone(lat, lon, level) == U64(zone)).all()


# -- neighbours, disks, rings --------------------------------------------------------------


def check_neighbors(ref: ReferenceGrid, zone: int) -> None:
    nb = np.asarray(grid.zone_neighbors(U64(zone)))
    pentagon = bool(grid.is_pentagon(U64(zone)))
    assert nb.shape == ((5,) if pentagon else (6,))
    assert nb.dtype == U64
    assert len(set(nb.tolist())) == nb.size and zone not in nb.tolist()
    assert set(nb.tolist()) == ref.neighbors(zone)
    for other in nb:  # symmetric
        assert zone in np.asarray(grid.zone_neighbors(other)).tolist()


@SETTINGS
@given(zones(levels(0, 24)))
def test_neighbours_are_symmetric_distinct_and_the_models(zone):
    check_neighbors(reference(), zone)


@SETTINGS
@given(edge_zones(levels(1, 24)))
def test_neighbours_on_strip_and_face_edges(zone):
    check_neighbors(reference(), zone)


@pytest.mark.parametrize("level", [0, 1, 2, 3])
def test_neighbours_of_every_zone_at_coarse_levels(ref, level):
    for zone in grid.all_zones(level).tolist():
        check_neighbors(ref, zone)


@pytest.mark.parametrize("level", [1, 2, 3, 6, 15, 24])
def test_neighbours_at_every_kind_of_place(ref, level):
    for _name, zs in place_samples(level).items():
        for zone in zs:
            check_neighbors(ref, zone)


def test_neighbours_array_form_pads_pentagons():
    zs = as_ids(pentagons(5) + sample_zones(5)[:20])
    nb = np.asarray(grid.zone_neighbors(zs))
    assert nb.shape == (zs.size, 6)
    pent = np.asarray(grid.is_pentagon(zs))
    assert (nb[pent, 5] == 0).all() and (nb[~pent] != 0).all()
    for z, row in zip(zs, nb, strict=True):
        single = np.asarray(grid.zone_neighbors(z))
        assert set(row[row != 0].tolist()) == set(single.tolist())


@pytest.mark.parametrize("level", [3, 9])
def test_seam_rules_of_the_design_notes(level):
    # design notes, section 2: a lattice step out of strip k lands in the next strip by
    # the band seam (s, t) -> (s+1, t-1), the northern cap seam (s, t) -> (s+t, -s) and the
    # southern cap seam (a, b) -> (a+b, -a) about Q; in array terms (i = s n - 1, j = t n):
    n = 1 << level
    for k in range(5):
        km, kp = (k - 1) % 5, (k + 1) % 5
        for m in (1, n // 2, n - 2):
            # band seam: from (i, n-1) with s <= 1 one step in t
            nb = np.asarray(grid.zone_neighbors(U64(layout_id(level, k, m - 1, n - 1)))).tolist()
            assert layout_id(level, km, m - 1 + n, 0) in nb
            # northern cap seam: from (0, j) one step back in s
            nb = np.asarray(grid.zone_neighbors(U64(layout_id(level, k, 0, m)))).tolist()
            assert layout_id(level, km, m - 1, 0) in nb
            # southern cap seam: from (2n-1, j) one step on in s
            nb = np.asarray(grid.zone_neighbors(U64(layout_id(level, k, 2 * n - 1, m)))).tolist()
            assert layout_id(level, kp, n + m, n - 1) in nb


def check_disk(zone: int, k: int) -> None:
    expected = bfs(zone, k)
    disk = np.asarray(grid.zone_disk(U64(zone), k))
    assert disk.dtype == U64
    assert (np.diff(disk.astype(np.int64)) > 0).all(), "zone_disk must be sorted ascending"
    assert set(disk.tolist()) == set(expected)
    ids, steps = grid.zone_disk(U64(zone), k, return_steps=True)
    assert [expected[int(z)] for z in ids] == np.asarray(steps).tolist()
    # away from pentagons a disk is a flat hexagon of 3k(k+1)+1 zones (analytic)
    wider = bfs(zone, k + 1)
    if not np.asarray(grid.is_pentagon(as_ids(wider))).any():
        assert disk.size == 3 * k * (k + 1) + 1
    ring = np.asarray(grid.zone_ring(U64(zone), k))
    inner = set(np.asarray(grid.zone_disk(U64(zone), k - 1)).tolist()) if k else set()
    assert set(ring.tolist()) == set(disk.tolist()) - inner
    assert ring.size == len(set(ring.tolist()))


@SETTINGS
@given(zones(levels(0, 24)), st.integers(0, 6))
def test_disks_are_breadth_first_searches(zone, k):
    check_disk(zone, k)


@pytest.mark.parametrize("level", [0, 2, 4, 12])
def test_disks_at_every_kind_of_place(level):
    for zs in place_samples(level).values():
        for zone in zs[:2]:
            check_disk(zone, 3)


def test_disk_that_covers_the_globe():
    for level in (0, 1):
        assert set(np.asarray(grid.zone_disk(U64(layout_id(level, 5, 0, 0)), 20)).tolist()) == set(
            grid.all_zones(level).tolist()
        )


def test_disk_around_a_pentagon_counts():
    # a pentagon's k-disk: 1 + 5 (1 + 2 + ... + k) zones (five wedges of the flat lattice)
    for zone in pentagons(8):
        for k in (1, 2, 5):
            assert np.asarray(grid.zone_disk(U64(zone), k)).size == 1 + 5 * k * (k + 1) // 2


# -- hierarchy -------------------------------------------------------------------------


def check_children(ref: ReferenceGrid, zone: int) -> None:
    ids, weights = grid.zone_children(U64(zone))
    ids, weights = np.asarray(ids), np.asarray(weights)
    pentagon = bool(grid.is_pentagon(U64(zone)))
    assert ids.shape == weights.shape == ((6,) if pentagon else (7,))
    assert dict(zip(ids.tolist(), weights.tolist(), strict=True)) == ref.children(zone)
    # weights times the children's areas add up to the zone's area (design notes; the
    # areas themselves are judged by geodesic outline areas in test_grid_counts.py)
    assert (weights * grid.zone_areas(ids)).sum() == pytest.approx(
        float(grid.zone_areas(U64(zone))), rel=1e-12
    )
    # the central child's parent is the zone; an edge child's parent is the smaller id of
    # the two zones whose shared edge it sits on (the documented tie rule)
    parents = np.asarray(grid.zone_parent(ids))
    assert (parents[weights == 1.0] == U64(zone)).all()
    for child, parent in zip(ids[weights == 0.5], parents[weights == 0.5], strict=True):
        assert int(parent) == ref.parent(int(child))
        assert int(parent) <= zone


@SETTINGS
@given(zones(levels(0, 23)))
def test_children_weights_and_parents(zone):
    check_children(reference(), zone)


@pytest.mark.parametrize("level", [0, 1, 2, 5, 14, 23])
def test_children_at_every_kind_of_place(ref, level):
    for zs in place_samples(level).values():
        for zone in zs[:3]:
            check_children(ref, zone)


@pytest.mark.parametrize("level", [1, 2, 3, 4])
def test_every_zones_parent(ref, level):
    zs = grid.all_zones(level)
    got = np.asarray(grid.zone_parent(zs))
    assert got.dtype == U64
    assert got.tolist() == [ref.parent(int(z)) for z in zs]


def test_edge_childs_centre_is_midway_between_its_two_candidate_parents(ref):
    # the grid is a Voronoi diagram in the face plane: an edge child's centre is the
    # midpoint of the two parents' centres there (checked where all three share a face)
    from alveary.grid import _snyder

    rng = np.random.default_rng(8)
    checked = 0
    for level in (3, 7, 12, 20):
        n = 1 << level
        zs = as_ids(
            layout_id(level, int(rng.integers(5)), int(i), int(j))
            for i, j in zip(rng.integers(0, 2 * n, 40), rng.integers(0, n, 40), strict=True)
        )
        for zone in zs:
            ids, weights = grid.zone_children(zone)
            for child in np.asarray(ids)[np.asarray(weights) == 0.5]:
                cands = ref.parent_candidates(int(child))
                assert int(zone) in cands and len(cands) == 2
                la, lo = grid.zone_to_point(as_ids([child, *cands]))
                f, x, y = _snyder.project(geodetic_to_authalic(la), lo)
                f, xy = np.asarray(f), np.stack([x, y], 1)
                if not (f == f[0]).all():
                    continue
                assert np.linalg.norm(xy[0] - (xy[1] + xy[2]) / 2) < 1e-3
                checked += 1
    assert checked > 500


def test_children_array_form_pads_pentagons():
    zs = as_ids(pentagons(4)[:3] + sample_zones(4)[:10])
    ids, weights = grid.zone_children(zs)
    ids, weights = np.asarray(ids), np.asarray(weights)
    assert ids.shape == weights.shape == (zs.size, 7)
    pent = np.asarray(grid.is_pentagon(zs))
    assert (ids[pent, 6] == 0).all() and (weights[pent, 6] == 0).all()
    np.testing.assert_allclose(weights.sum(1), np.where(pent, 3.5, 4.0))


# -- boundaries ---------------------------------------------------------------------------


def check_boundary(ref: ReferenceGrid, zone: int) -> None:
    ring = np.asarray(grid.zone_boundary(U64(zone), corners_only=True))
    want = ref.boundary(zone)
    assert ring.shape == (want.shape[0], 2)
    got = to_sphere(ring[:, 0], ring[:, 1])
    # same corners in the same cyclic (counter-clockwise seen from outside) order
    start = int(np.argmin(np.linalg.norm(want - got[0], axis=1)))
    rolled = np.roll(want, -start, axis=0)
    err = np.linalg.norm(got - rolled, axis=1).max() * ref.snyder.R_AUTHALIC
    assert err < 1e-3, f"zone {zone}: corners {err:.3g} m from the model's"


@pytest.mark.parametrize("level", [0, 1, 2, 4, 9, 24])
def test_boundaries_match_the_lattice_model(ref, level):
    for zs in place_samples(level).values():
        for zone in zs:
            check_boundary(ref, zone)


@SETTINGS
@given(zones(levels(0, 24)))
def test_boundaries_of_random_zones(zone):
    check_boundary(reference(), zone)


def test_boundary_array_form_pads_pentagons():
    zs = as_ids(pentagons(3)[:2] + sample_zones(3)[:10])
    b = np.asarray(grid.zone_boundary(zs, corners_only=True))
    assert b.shape == (zs.size, 6, 2)
    pent = np.asarray(grid.is_pentagon(zs))
    assert np.isnan(b[pent, 5]).all() and not np.isnan(b[~pent]).any()
    assert not np.isnan(b[:, :5]).any()


# -- ids and text ---------------------------------------------------------------------------


def test_text_form_of_the_contract():
    # grid-api.md: "12b-3021-877" is level 12, strip b, row 3021, column 877
    zone = grid.index_to_zone(12, 1, 3021, 877)
    assert int(zone) == layout_id(12, 1, 3021, 877)
    assert str(grid.zone_to_text(zone)) == "12b-3021-877"
    assert int(grid.zone_from_text("12b-3021-877")) == int(zone)
    assert str(grid.zone_to_text(U64(layout_id(12, 5, 0, 0)))) == "12n"
    assert str(grid.zone_to_text(U64(layout_id(12, 6, 0, 0)))) == "12s"
    assert int(grid.zone_from_text("0s")) == layout_id(0, 6, 0, 0)


@SETTINGS
@given(st.lists(zones(levels(0, 24)), min_size=1, max_size=30))
def test_ids_text_and_index_round_trip(zs):
    ids = as_ids(zs)
    texts = np.asarray(grid.zone_to_text(ids))
    assert texts.shape == ids.shape
    assert (np.asarray(grid.zone_from_text(texts)) == ids).all()
    for text, z in zip(texts, zs, strict=True):
        level = layout_index(z)[0]
        assert str(text).startswith(str(level))  # a person can read the level
    level, region, i, j = (np.asarray(a) for a in grid.zone_to_index(ids))
    assert list(zip(level.tolist(), region.tolist(), i.tolist(), j.tolist(), strict=True)) == [
        layout_index(z) for z in zs
    ]
    assert (np.asarray(grid.index_to_zone(level, region, i, j)) == ids).all()
    assert (np.asarray(grid.zone_level(ids)) == level).all()
