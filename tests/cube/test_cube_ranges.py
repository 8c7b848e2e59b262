"""Value ranges recorded when a cube is built: per variable and level, the least and
greatest value stored (as decoded, so packing's rounding counts), judged against numpy on
what was written; kept and widened by a version that inherits; and, for versions that
record none, the range the map tiles fall back on (a scan of the coarsest level)."""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from alveary import grid
from alveary.cube import ChunkShape, VariableInfo, create_cube, open_cube
from alveary.query import value_range

_N = itertools.count()
TIMES = np.datetime64("2024-01-01", "s") + np.arange(3) * np.timedelta64(1, "D")


def url():
    return f"memory://ranges/{next(_N)}"


def values(level, shift=0.0):
    lat, lon = grid.zone_to_point(grid.all_zones(level))
    days = np.arange(TIMES.size, dtype=float)[:, None]
    v = 20.0 + 0.3 * lat[None, :] + 0.05 * lon[None, :] + days + shift
    return np.where(lat[None, :] > 70.0, np.nan, v)  # no data in the far north


def test_ranges_are_those_of_the_values_stored():
    where = url()
    packed = {"units": "K", "dtype": "int16", "scale_factor": 0.01, "add_offset": 20.0}
    w = create_cube(
        where,
        cube_id="r",
        times=TIMES,
        levels=[2, 4],
        variables={"t": {"units": "K", "dtype": "float64"}, "p": packed},
    )
    for level in (2, 4):
        zones = grid.all_zones(level)
        w.write("t", level, zones, values(level))
        w.write("p", level, zones, values(level) / 10.0)
    w.publish()
    cube = open_cube(where)
    info = VariableInfo.from_any("p", packed)
    for level in (2, 4):
        v = values(level)
        assert cube.value_range("t", level) == (np.nanmin(v), np.nanmax(v))
        stored = info.decode(info.encode(v / 10.0))  # packing rounds to 0.01
        assert cube.value_range("p", level) == (np.nanmin(stored), np.nanmax(stored))
    assert cube.value_range("t", 3) is None


def test_an_inheriting_version_keeps_and_widens_the_range():
    where = url()
    kw = dict(
        cube_id="r",
        levels=[3],
        chunks=ChunkShape(4, 16, 8),
        variables={"t": {"units": "K", "dtype": "float64"}},
    )
    w = create_cube(where, times=TIMES[:2], **kw)
    w.write("t", 3, grid.all_zones(3), values(3)[:2])
    w.publish()
    first = open_cube(where).value_range("t", 3)
    w = create_cube(where, times=TIMES, inherit=True, **kw)
    w.write("t", 3, grid.all_zones(3), values(3, shift=50.0)[2:], start=2)
    w.publish()
    lo, hi = open_cube(where).value_range("t", 3)
    assert lo == first[0]  # from the inherited steps
    assert hi == np.nanmax(values(3, shift=50.0)[2:])


class Unrecorded:
    """A real cube version seen as one built before ranges were recorded."""

    def __init__(self, snap):
        self.snap = snap

    def __getattr__(self, name):
        return getattr(self.snap, name)

    def value_range(self, variable, level):
        return None


async def test_unrecorded_ranges_fall_back_on_the_coarsest_level():
    where = url()
    w = create_cube(
        where,
        cube_id="r",
        times=TIMES,
        levels=[2, 5],
        variables={"t": {"units": "K", "dtype": "float64"}},
    )
    for level in (2, 5):
        w.write("t", level, grid.all_zones(level), values(level, shift=level))
    w.publish()
    snap = open_cube(where).snapshot()
    recorded = await value_range(snap, "t", 5, None, max_cells=10**6)
    assert recorded == (np.nanmin(values(5, 5)), np.nanmax(values(5, 5)))
    scanned = await value_range(Unrecorded(snap), "t", 5, None, max_cells=10**6)
    assert scanned == (np.nanmin(values(2, 2)), np.nanmax(values(2, 2)))
    with pytest.raises(ValueError, match="range"):
        await value_range(Unrecorded(snap), "t", 5, None, max_cells=10)


def test_chunks_written_by_build_workers_are_recorded():
    where = url()
    w = create_cube(
        where,
        cube_id="r",
        times=TIMES,
        levels=[1],
        variables={"t": {"units": "K", "dtype": "float64"}},
    )
    sink = w.sink  # what a build worker holds
    block = np.arange(TIMES.size * 4 * 2, dtype=float).reshape(TIMES.size, 4, 2) - 3.5
    block[0, 0, 0] = np.nan
    written = sink.write_strip_chunk("t", 1, 0, 2, 0, 0, block)
    apex = sink.write_apex_chunk("t", 1, 0, np.full((TIMES.size, 2), 99.0))
    w.record([written, apex])
    w.publish()
    assert open_cube(where).value_range("t", 1) == (np.nanmin(block), 99.0)
