"""Pyramids and area weights: judged against the grid's own hierarchy and areas."""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pytest
from cube_sources import lonlat_axes, write_geotiff

from alveary import grid
from alveary.cube import open_cube
from alveary.ingest import child_weights, descendant_weights, ingest


def _area(zones):
    # hexagons have equal area; pentagons 5/6 of it (the grid's design note, Sahr-style
    # aperture-4 icosahedral grids)
    return np.where(grid.is_pentagon(zones), 5.0 / 6.0, 1.0)


def _by_hand(zones, depth):
    """Descendant weights from the grid's zone_children, iterated with exact fractions:
    shares multiply down the levels and add up where paths meet; each fine zone's
    relative area (grid.zone_areas over the hexagon area) is applied once, at the end."""
    weights = {int(z): {int(z): Fraction(1)} for z in zones}
    for _ in range(depth):
        parents = sorted({f for d in weights.values() for f in d})
        ids, shares = grid.zone_children(np.array(parents, dtype=np.uint64))
        kids = {
            p: [(int(c), Fraction(float(s))) for c, s in zip(ids[k], shares[k], strict=True) if s]
            for k, p in enumerate(parents)
        }
        nxt = {}
        for z, d in weights.items():
            acc = {}
            for f, w in d.items():
                for c, s in kids[f]:
                    acc[c] = acc.get(c, 0) + w * s
            nxt[z] = acc
        weights = nxt
    fine = np.array(sorted({f for d in weights.values() for f in d}), dtype=np.uint64)
    level = int(grid.zone_level(fine[:1])[0])
    share = grid.zone_areas(fine) / grid.zone_area(level)
    rel = dict(zip(fine.tolist(), share.tolist(), strict=True))
    return {(z, f): float(w) * rel[f] for z, d in weights.items() for f, w in d.items()}


@pytest.mark.parametrize(("level", "depth"), [(3, 1), (3, 2), (2, 3)])
def test_descendant_weights_equal_iterated_zone_children(level, depth):
    zones = grid.all_zones(level)
    rows, fine, w = descendant_weights(level, zones, depth)
    ours = {(int(zones[r]), int(f)): x for r, f, x in zip(rows, fine, w, strict=True)}
    ref = _by_hand(zones, depth)
    assert ours.keys() == ref.keys()
    assert max(abs(ours[k] - ref[k]) for k in ref) < 1e-12


def test_weights_are_a_partition_of_unity():
    level, depth = 3, 2
    zones = grid.all_zones(level)
    rows, fine, w = descendant_weights(level, zones, depth)
    # every zone of the finer level is covered exactly once, by its area
    per_fine = {}
    for f, x in zip(fine.tolist(), w.tolist(), strict=True):
        per_fine[f] = per_fine.get(f, 0.0) + x
    all_fine = grid.all_zones(level + depth)
    assert set(per_fine) == set(all_fine.tolist())
    np.testing.assert_allclose([per_fine[f] for f in all_fine.tolist()], _area(all_fine))
    # and each zone's weights add up to its area in units of finer zones
    np.testing.assert_allclose(np.bincount(rows, w), 4.0**depth * _area(zones))
    _, cw = child_weights(zones)
    np.testing.assert_allclose(cw.sum(axis=1), 4.0 * _area(zones))


def test_pyramid_keeps_the_global_area_mean(tmp_path):
    lon, lat = lonlat_axes(0.5)
    rng = np.random.default_rng(5)
    field = np.cos(np.radians(lat))[:, None] * np.sin(3 * np.radians(lon))[None, :] + rng.normal(
        0, 0.1, (lat.size, lon.size)
    )
    path = write_geotiff(tmp_path / "f.tif", field, west=-180, north=90, step_x=0.5)
    ingest([path], str(tmp_path / "c"), 6, pyramid=True, cube_id="f", time="2024-01-01")
    cube = open_cube(str(tmp_path / "c"))
    assert cube.levels == tuple(range(7))
    means = []
    for level in cube.levels:
        z = grid.all_zones(level)
        v = cube.read("f", z)[0]
        assert np.isfinite(v).all()
        a = _area(z)
        means.append(float((v * a).sum() / a.sum()))
    # float32 storage at every level: agreement to ~1e-7 relative
    assert max(means) - min(means) < 1e-6


def test_pyramid_regional_mean_agrees_between_levels(tmp_path):
    # a smooth regional field; the area mean over a coarse zone's footprint at the
    # fine level (its children with their weights) equals the coarse zone's value
    lon, lat = lonlat_axes(0.02, 20.0, 40.0, 26.0, 46.0)
    field = np.add.outer(lat, lon * 0.5)
    path = write_geotiff(tmp_path / "r.tif", field, west=20, north=46, step_x=0.02)
    ingest(
        [path],
        str(tmp_path / "c"),
        9,
        pyramid=True,
        pyramid_min_level=7,
        cube_id="r",
        time="2024-01-01",
    )
    cube = open_cube(str(tmp_path / "c"))
    coarse = grid.zones_in_bbox(21.0, 41.0, 25.0, 45.0, 8)
    ids, cw = child_weights(coarse)
    fine = cube.read("r", ids.ravel())[0].reshape(ids.shape)
    expect = (fine * cw).sum(axis=1) / cw.sum(axis=1)
    np.testing.assert_allclose(cube.read("r", coarse)[0], expect, rtol=1e-6)
    # and the value is the field at the zone centre for a linear field (exact mean)
    zlat, zlon = grid.zone_to_point(coarse)
    np.testing.assert_allclose(
        cube.read("r", coarse)[0], np.asarray(zlat) + 0.5 * np.asarray(zlon), atol=0.05
    )
