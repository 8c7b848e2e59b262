"""Neighbourhood windows (disk_union, disk_windows), judged by grid.zone_disk zone by zone.

For every target the disk that the windows describe (the window cells at the chart
hexagon's offsets, or the exactly listed members near pentagons) must be zone_disk's disk,
with the same step counts; the needed zones must be the union of those disks. Regions
cover whole coarse levels and, at finer levels, the places where the strip layout is
awkward: both apexes, the strip-corner pentagons and the three kinds of seam (design
notes, section 2), named through the layout's bit formula (support.samples).
"""

from __future__ import annotations

import numpy as np
import pytest

from alveary import GridError, grid
from support.samples import layout_id, pentagons, place_samples


def seam_region(level: int, radius: int) -> np.ndarray:
    """Disks about every kind of awkward place of the layout (support.samples)."""
    places = sorted({z for zs in place_samples(level).values() for z in zs})
    return np.unique(np.concatenate([grid.zone_disk(z, radius) for z in places]))


def disks_from_windows(w) -> dict[int, tuple[np.ndarray, np.ndarray]]:
    """Per target position: (member ids, steps) as the windows describe them."""
    out = {}
    da, db, steps = w.offsets
    for tile in w.tiles:
        h, wd = tile.source.shape
        assert tile.rows.max() + 2 * w.k < h and tile.cols.max() + 2 * w.k < wd
        for r, c, o in zip(tile.rows, tile.cols, tile.out, strict=True):
            src = tile.source[r + w.k + da, c + w.k + db]
            assert (src >= 0).all(), "a flat disk reads a zone that is not needed"
            out[int(o)] = (w.needed[src], steps)
    ex = w.exact
    for s in range(len(ex)):
        part = slice(ex.start[s], ex.start[s + 1])
        assert w.needed[ex.centre[s]] == w.targets[ex.out[s]]
        out[int(ex.out[s])] = (w.needed[ex.members[part]], ex.steps[part])
    return out


def check_against_zone_disk(targets: np.ndarray, k: int, tile: int):
    w = grid.disk_windows(targets, k, tile=tile)
    disks = disks_from_windows(w)
    assert sorted(disks) == list(range(len(targets)))  # every target exactly once
    union: set[int] = set()
    for pos, z in enumerate(targets):
        ids, steps = grid.zone_disk(z, k, return_steps=True)
        got_ids, got_steps = disks[pos]
        order = np.argsort(got_ids)
        assert np.unique(got_ids).size == got_ids.size, f"a zone counted twice around {z}"
        np.testing.assert_array_equal(got_ids[order], ids)
        np.testing.assert_array_equal(got_steps[order], steps)
        union |= set(ids.tolist())
    assert w.needed.tolist() == sorted(union)
    np.testing.assert_array_equal(grid.disk_union(targets, k), w.needed)
    return w


WHOLE_LEVELS = [(0, 0), (0, 1), (0, 3), (1, 1), (1, 2), (2, 0), (2, 1), (2, 2), (2, 5)]
WHOLE_LEVELS += [(3, 1), (3, 3), (4, 2)]


@pytest.mark.parametrize(("level", "k"), WHOLE_LEVELS)
def test_every_zone_of_a_level(level, k):
    # at levels where 2k >= n a disk wraps round the globe: every disk is listed exactly
    check_against_zone_disk(grid.all_zones(level), k, tile=8)


@pytest.mark.parametrize(("level", "k", "tile"), [(5, 1, 8), (5, 3, 16), (6, 2, 128), (7, 4, 8)])
def test_regions_at_seams_apexes_and_pentagons(level, k, tile):
    targets = seam_region(level, 3)
    rng = np.random.default_rng(level + k)
    targets = targets[rng.random(targets.size) < 0.5]  # sparse: windows over holes
    rng.shuffle(targets)
    w = check_against_zone_disk(targets, k, tile)
    assert len(w.tiles) >= 5 and len(w.exact) > 0


def test_a_bbox_region_at_a_fine_level():
    targets = grid.zones_in_bbox(-3.0, 50.0, 1.0, 52.5, 10)
    w = check_against_zone_disk(targets, 3, tile=32)
    assert len(w.exact) == 0


def test_counts_of_single_disks():
    # a hexagon's k-disk has 3k(k+1) + 1 zones, a pentagon's 5k(k+1)/2 + 1 (five sectors)
    hexagon = grid.point_to_zone(-12.0, 77.0, 9)
    pentagon = np.uint64(pentagons(9)[5])
    for k in (1, 2, 6):
        assert grid.disk_union(hexagon, k).size == 3 * k * (k + 1) + 1
        assert grid.disk_union(pentagon, k).size == 5 * k * (k + 1) // 2 + 1


def test_area_shares_and_flat_windows_hold_no_pentagon():
    level = 6
    targets = seam_region(level, 4)
    w = grid.disk_windows(targets, 3)
    five = set(pentagons(level))
    is_five = np.array([int(z) in five for z in w.needed[w.exact.members]])
    # a pentagon has 5/6 of a hexagon's area (design notes, section 1)
    np.testing.assert_array_equal(w.exact.area, np.where(is_five, 5 / 6, 1.0))
    for tile in w.tiles:
        da, db, _ = w.offsets
        for r, c in zip(tile.rows, tile.cols, strict=True):
            members = w.needed[tile.source[r + w.k + da, c + w.k + db]]
            assert not five & set(members.tolist())


def test_targets_keep_their_order_and_duplicates():
    base = grid.zones_in_bbox(20.0, -5.0, 21.0, -4.0, 9)
    targets = np.concatenate([base[::-1], base[:3]])
    w = grid.disk_windows(targets, 2)
    np.testing.assert_array_equal(w.targets, targets)
    disks = disks_from_windows(w)
    np.testing.assert_array_equal(np.sort(disks[len(base)][0]), grid.zone_disk(base[0], 2))
    halo = w.halo
    assert not set(halo.tolist()) & set(targets.tolist())
    assert set(halo.tolist()) | set(targets.tolist()) == set(w.needed.tolist())


def test_windows_are_bounded_by_the_tile():
    targets = grid.zones_in_bbox(100.0, 20.0, 110.0, 30.0, 9)
    for tile, k in ((16, 1), (64, 4)):
        w = grid.disk_windows(targets, k, tile=tile)
        assert all(max(t.source.shape) <= tile + 2 * k for t in w.tiles)
        assert sum(t.out.size for t in w.tiles) + len(w.exact) == targets.size


def test_empty_and_zero_radius():
    w = grid.disk_windows(np.zeros(0, dtype=np.uint64), 3)
    assert w.needed.size == 0 and w.tiles == () and len(w.exact) == 0
    z = grid.point_to_zone(0.0, 0.0, 5)
    np.testing.assert_array_equal(grid.disk_union(z, 0), [z])


@pytest.mark.parametrize(
    ("zones", "k", "parameter"),
    [
        ([layout_id(3, 0, 1, 1), layout_id(4, 0, 1, 1)], 1, "zones"),
        ([0], 1, "zones"),
        ([layout_id(3, 0, 1, 1)], -1, "k"),
        ([layout_id(3, 0, 1, 1)], 1.5, "k"),
        ([layout_id(3, 0, 1, 1)], True, "k"),
    ],
)
def test_bad_arguments_name_the_parameter(zones, k, parameter):
    with pytest.raises(GridError) as err:
        grid.disk_windows(np.asarray(zones, dtype=np.uint64), k)
    assert err.value.parameter == parameter
    with pytest.raises(GridError):
        grid.disk_union(np.asarray(zones, dtype=np.uint64), k)


def test_bad_tile():
    with pytest.raises(GridError) as err:
        grid.disk_windows(grid.point_to_zone(0.0, 0.0, 5), 1, tile=0)
    assert err.value.parameter == "tile"
