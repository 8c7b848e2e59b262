"""Chunk arithmetic of the five-strip layout, judged against zarr's own chunk grid."""

from __future__ import annotations

import numpy as np
import pytest
import zarr
from zarr.storage import MemoryStore, WrapperStore

from alveary import grid
from alveary.cube import ChunkShape, LevelLayout, default_chunk_shape, plan_cells


class _KeyRecorder(WrapperStore):
    """Records the keys zarr itself asks for (zarr is the reference for chunk keys)."""

    def __init__(self, store):
        super().__init__(store)
        self.keys: list[str] = []

    async def get(self, key, prototype, byte_range=None):
        self.keys.append(key)
        return await self._store.get(key, prototype, byte_range)


def _zarr_keys_for(layout: LevelLayout, region, i, j, t0, t1) -> set[str]:
    """The chunk keys zarr reads for exactly these cells (one orthogonal read per cell)."""
    rec = _KeyRecorder(MemoryStore())
    strips = zarr.create_array(
        rec,
        name="v/strips",
        shape=layout.strip_shape,
        chunks=layout.chunks.strip_chunks,
        dtype="f4",
        fill_value=np.nan,
        zarr_format=3,
    )
    apex = zarr.create_array(
        rec,
        name="v/apex",
        shape=layout.apex_shape,
        chunks=layout.chunks.apex_chunks,
        dtype="f4",
        fill_value=np.nan,
        zarr_format=3,
    )
    rec.keys.clear()
    for k, a, b in zip(region, i, j, strict=True):
        if k < 5:
            strips.get_orthogonal_selection((slice(t0, t1), [int(k)], [int(a)], [int(b)]))
        else:
            apex.get_orthogonal_selection((slice(t0, t1), [int(k) - 5]))
    return {key for key in rec.keys if "/c/" in key}


def test_every_zone_is_in_exactly_one_cell():
    # Zone count 10 * 4**r + 2 of an aperture-4 icosahedral grid (the grid's design note;
    # also in the geodesic-grid literature): the layout stores each zone once, no padding.
    for level in range(0, 6):
        lay = LevelLayout(level, 1, default_chunk_shape(level, 1))
        z = grid.all_zones(level)
        assert z.size == 10 * 4**level + 2
        _, region, i, j = grid.zone_to_index(z)
        strip = np.asarray(region) < 5
        cells = (
            np.asarray(region)[strip] * 10**8 + np.asarray(i)[strip] * 10**4 + np.asarray(j)[strip]
        )
        assert np.unique(cells).size == strip.sum()
        assert strip.sum() == int(np.prod(lay.strip_shape[1:]))
        assert sorted(np.asarray(region)[~strip].tolist()) == [5, 6]


@pytest.mark.parametrize(
    ("level", "chunks", "ntimes"),
    [(4, ChunkShape(5, 8, 4), 23), (6, ChunkShape(32, 64, 64), 40), (3, ChunkShape(1, 2, 8), 3)],
)
def test_plan_keys_equal_the_chunks_zarr_reads(level, chunks, ntimes):
    rng = np.random.default_rng(level)
    lay = LevelLayout(level, ntimes, chunks)
    zones = rng.choice(grid.all_zones(level), size=40, replace=False)
    zones = np.concatenate([zones, grid.all_zones(level)[[0, -1]]])  # include an apex or two
    _, region, i, j = grid.zone_to_index(zones)
    for t0, t1 in [(0, ntimes), (ntimes - 1, ntimes), (1, max(2, ntimes // 2))]:
        plan = plan_cells(lay, "v", region, i, j, slice(t0, t1), 4)
        assert len(set(plan.keys)) == len(plan.keys)
        assert set(plan.keys) == _zarr_keys_for(lay, region, i, j, t0, t1)


def test_plan_selection_reproduces_values():
    # Values put into an in-memory zarr array come back through the plan's selections.
    level, ntimes = 4, 9
    lay = LevelLayout(level, ntimes, ChunkShape(4, 8, 8))
    data = np.random.default_rng(1).normal(size=lay.strip_shape).astype("f4")
    apex = np.random.default_rng(2).normal(size=lay.apex_shape).astype("f4")
    zones = grid.all_zones(level)[::7]
    _, region, i, j = grid.zone_to_index(zones)
    plan = plan_cells(lay, "v", region, i, j, slice(2, 9), 4)
    out = np.full(plan.shape, np.nan)
    for cr in plan.reads:
        src = data if cr.array.endswith("strips") else apex
        chunk = src[cr.selection]
        out[cr.out_time, cr.columns] = chunk[(cr.in_time, *cr.cells)]
    region, i, j = (np.asarray(x) for x in (region, i, j))
    expect = np.empty_like(out)
    strip = region < 5
    expect[:, strip] = data[2:9, region[strip], i[strip], j[strip]]
    expect[:, ~strip] = apex[2:9, region[~strip] - 5]
    np.testing.assert_array_equal(out, expect)


def test_single_zone_single_block_is_one_chunk():
    lay = LevelLayout(8, 365, default_chunk_shape(8, 365))
    z = grid.point_to_zone(35.0, 139.0, 8)
    _, region, i, j = grid.zone_to_index(np.atleast_1d(z))
    assert len(plan_cells(lay, "v", region, i, j, slice(0, 1), 4)) == 1
    # a year of daily steps in 32-step blocks: ceil(365 / 32) = 12 chunks
    assert len(plan_cells(lay, "v", region, i, j, slice(0, 365), 4)) == 12


def test_default_chunk_shape_clips_to_the_strip():
    assert default_chunk_shape(0, 5) == ChunkShape(5, 2, 1)
    assert default_chunk_shape(10, 1000) == ChunkShape(32, 64, 64)
    assert LevelLayout(10, 1000, default_chunk_shape(10, 1000)).chunk_grid == (32, 5, 32, 16)
