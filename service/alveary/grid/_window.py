"""Neighbourhood windows: the lattice arithmetic of k-step disks over many zones at once.

A moving-window operation at one level gives every target zone a statistic over the zones
within k steps of it. Those zones are the targets plus a *halo*: :func:`disk_union` lists
them (what a read must fetch), :func:`disk_windows` also says where each disk's values sit,
so that the statistics can be computed with whole-array shifts instead of a loop per zone.

Away from the twelve pentagons the surface around a zone unfolds flat into its strip's
chart, and a k-disk is the chart hexagon of 3k(k+1) + 1 lattice points, each carried to
its owner by the seam rules. The targets of a strip are therefore cut into rectangular
tiles of the chart; each tile's *window* is its targets' bounding box padded by k on every
side, and ``source[x, y]`` gives, for every window cell, the position in the needed-zone
list of the zone that owns the chart point (or -1 when that zone is not needed: such cells
are never inside the disk of a flat target). A statistic over the hexagonal offsets
(da, db) of a target at window cell (x, y) reads cells (x + da, y + db).

Within k steps of an icosahedron vertex (a pentagon) the chart folds: two offsets land on
one zone. Those targets (at most 12 (3k(k+1) + 1) per level, all of them when 2k >= n),
and the apexes, get their disks exactly, by a breadth-first search over neighbours run for
all of them at once; the members are listed segment by segment with their step counts
and area shares (5/6 for pentagons, 1 otherwise). A flat disk never holds a pentagon, so
every member of a window has area share 1.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np
import numpy.typing as npt

from alveary._errors import GridError
from alveary.grid import _ids, _lattice
from alveary.grid._api import PENTAGON_SHARE
from alveary.grid._checks import steps as whole_steps

IntArray = npt.NDArray[np.int64]
Int32Array = npt.NDArray[np.int32]
IdArray = npt.NDArray[np.uint64]
FloatArray = npt.NDArray[np.float64]
BoolArray = npt.NDArray[np.bool_]

#: Chart cells per tile side: a tile's window holds at most (TILE + 2k)² cells.
TILE = 128

# Typed views of the untyped lattice helpers used here.
_as_zones: Callable[[Any, str], IdArray] = _ids.as_zones
_decode: Callable[[IdArray], tuple[IntArray, IntArray, IntArray, IntArray]] = _ids.decode
_chart_to_ids: Callable[[int, Any, Any, Any], IdArray] = _lattice.chart_to_ids
_ids_to_chart: Callable[[IdArray], tuple[IntArray, IntArray, IntArray, IntArray]] = (
    _lattice.ids_to_chart
)
_neighbors: Callable[[IdArray], IdArray] = _lattice.neighbors
_ids_to_xyz: Callable[[IdArray], FloatArray] = _lattice.ids_to_xyz


@dataclass(frozen=True, eq=False)
class WindowTile:
    """One tile of targets in one strip, and the window of chart cells their disks read.

    Attributes
    ----------
    strip:
        The strip (0..4) whose chart the window is cut from.
    a0, b0:
        Chart coordinates of window cell ``[0, 0]``: cell ``[x, y]`` is the lattice point
        ``(a0 + x, b0 + y)`` of the strip's chart, carried to its owner.
    source:
        ``(H, W)`` positions in :attr:`DiskWindows.needed` of the zone at each cell, -1
        where that zone is not needed.
    rows, cols:
        The targets' cells in the window's *interior* ``source[k:H-k, k:W-k]``.
    out:
        The targets' positions in :attr:`DiskWindows.targets`.
    """

    strip: int
    a0: int
    b0: int
    source: Int32Array
    rows: Int32Array
    cols: Int32Array
    out: Int32Array


@dataclass(frozen=True, eq=False)
class ExactDisks:
    """Disks listed member by member, for targets near a pentagon.

    Target ``out[s]`` (centred on needed zone ``centre[s]``) has the members
    ``members[start[s]:start[s + 1]]`` (positions in :attr:`DiskWindows.needed`, the centre
    among them), each with its step count from the centre and its area share.
    """

    out: IntArray
    centre: IntArray
    start: IntArray
    members: IntArray
    steps: IntArray
    area: FloatArray

    def __len__(self) -> int:
        return int(self.out.size)


@dataclass(frozen=True, eq=False)
class DiskWindows:
    """Where the k-disk of every target zone finds its values in the needed-zone list.

    Values of a variable are handed around as ``(time, len(needed))`` arrays aligned with
    :attr:`needed`; a statistic over the disks gives ``(time, len(targets))``.

    Attributes
    ----------
    level, k:
        The level of every zone, and the disk radius in steps.
    targets:
        The zones the statistic is wanted for, in the caller's order.
    needed:
        Every zone within k steps of a target (the targets included), ids ascending.
    tiles:
        Targets whose disks unfold flat, tile by tile.
    exact:
        The other targets, with their disks listed member by member.
    """

    level: int
    k: int
    targets: IdArray
    needed: IdArray
    tiles: tuple[WindowTile, ...]
    exact: ExactDisks

    @property
    def halo(self) -> IdArray:
        """The needed zones that are not targets, ids ascending."""
        keep = np.ones(self.needed.size, dtype=bool)
        keep[np.searchsorted(self.needed, self.targets)] = False
        return self.needed[keep]

    @property
    def offsets(self) -> tuple[IntArray, IntArray, IntArray]:
        """``(da, db, steps)``: the 3k(k+1) + 1 chart offsets of a flat k-disk."""
        return hex_offsets(self.k)

    @cached_property
    def unit_vectors(self) -> FloatArray:
        """``(len(needed), 3)`` unit vectors of the needed zones' centres on the authalic
        sphere (the sphere of the Earth's area, radius ``R_AUTHALIC``)."""
        return _ids_to_xyz(self.needed)


def hex_offsets(k: int) -> tuple[IntArray, IntArray, IntArray]:
    """``(da, db, steps)`` of the chart hexagon of radius k, by steps then da, db.

    >>> da, db, steps = hex_offsets(1)
    >>> list(zip(da.tolist(), db.tolist()))
    [(0, 0), (-1, 0), (-1, 1), (0, -1), (0, 1), (1, -1), (1, 0)]
    """
    r = np.arange(-k, k + 1, dtype=np.int64)
    da, db = (x.ravel() for x in np.meshgrid(r, r, indexing="ij"))
    steps = np.maximum(np.maximum(np.abs(da), np.abs(db)), np.abs(da + db))
    keep = steps <= k
    order = np.argsort(steps[keep], kind="stable")
    return da[keep][order], db[keep][order], steps[keep][order]


def _unique(x: npt.NDArray[Any]) -> npt.NDArray[Any]:
    """Sorted distinct values (a sort and a comparison: much faster than numpy.unique's
    hashing for large integer arrays)."""
    x = np.sort(x, kind="stable")
    if x.size == 0:
        return x
    keep = np.empty(x.size, dtype=bool)
    keep[0] = True
    np.not_equal(x[1:], x[:-1], out=keep[1:])
    return x[keep]


def _check(zones: Any, k: Any) -> tuple[IdArray, int, int]:
    """Validated (flat ids, level, k)."""
    steps = whole_steps(k)
    ids = _as_zones(zones, "zones").reshape(-1)
    if ids.size == 0:
        return ids, 0, steps
    level = _decode(ids)[0]
    if (level != level[0]).any():
        bad = int(np.flatnonzero(level != level[0])[0])
        raise GridError("zones", int(ids[bad]), f"zones of one level ({int(level[0])})", index=bad)
    return ids, int(level[0]), steps


def _near_vertex(a: IntArray, b: IntArray, n: int, k: int) -> BoolArray:
    """Whether an icosahedron vertex (a chart point with both coordinates multiples of n)
    lies within k steps. Within the coarse rhombus holding (a, b) the nearest such point is
    one of its four corners; the two coarse triangles' other vertices are farther."""
    u, v = a % n, b % n
    near = (u + v <= k) | (2 * n - u - v <= k)  # corners (0, 0) and (n, n)
    far_diag = np.abs(n - u - v)
    near |= np.maximum(np.maximum(n - u, v), far_diag) <= k  # corner (n, 0)
    near |= np.maximum(np.maximum(u, n - v), far_diag) <= k  # corner (0, n)
    return near


def _dilate(mask: BoolArray, k: int) -> BoolArray:
    """Every cell within k lattice steps of a marked cell (k rounds of one step)."""
    for _ in range(k):
        grown = mask.copy()
        grown[1:, :] |= mask[:-1, :]
        grown[:-1, :] |= mask[1:, :]
        grown[:, 1:] |= mask[:, :-1]
        grown[:, :-1] |= mask[:, 1:]
        grown[1:, :-1] |= mask[:-1, 1:]  # offset (+1, -1)
        grown[:-1, 1:] |= mask[1:, :-1]  # offset (-1, +1)
        mask = grown
    return mask


@dataclass(frozen=True, eq=False)
class _TileCells:
    strip: int
    a0: int
    b0: int
    ids: IdArray  # (H, W) owners of the window cells
    reach: BoolArray  # (H, W) cells within k of a target
    rows: IntArray
    cols: IntArray
    out: IntArray


def _flat_tiles(
    level: int, k: int, strip: IntArray, a: IntArray, b: IntArray, out: IntArray, tile: int
) -> list[_TileCells]:
    """Cut flat targets into chart tiles and chart each tile's window."""
    if out.size == 0:
        return []
    n = 1 << level
    nta = -(-2 * n // tile)
    ntb = -(-n // tile)
    key = (strip * nta + (a - 1) // tile) * ntb + b // tile
    order = np.argsort(key, kind="stable")
    bounds = np.flatnonzero(np.diff(key[order])) + 1
    tiles = []
    for sel in np.split(order, bounds):
        ta, tb = a[sel], b[sel]
        amin, amax, bmin, bmax = int(ta.min()), int(ta.max()), int(tb.min()), int(tb.max())
        a0, b0 = amin - k, bmin - k
        h, w = amax - amin + 1 + 2 * k, bmax - bmin + 1 + 2 * k
        s = int(strip[sel[0]])
        ids = _chart_to_ids(
            level, s, a0 + np.arange(h, dtype=np.int64)[:, None], b0 + np.arange(w)[None, :]
        )
        mark = np.zeros((h, w), dtype=bool)
        mark[ta - a0, tb - b0] = True
        tiles.append(_TileCells(s, a0, b0, ids, _dilate(mark, k), ta - amin, tb - bmin, out[sel]))
    return tiles


def _exact_disks(sources: IdArray, k: int) -> tuple[IntArray, IdArray, IntArray]:
    """(source index, member id, steps) of the k-disks of many zones, by breadth-first
    search over neighbours for all of them at once; sorted by source, then member."""
    m = sources.size
    ring_src = np.arange(m, dtype=np.int64)
    ring_zone = sources
    prev_src = np.zeros(0, dtype=np.int64)
    prev_zone = np.zeros(0, dtype=np.uint64)
    srcs, zones, steps = [ring_src], [ring_zone], [np.zeros(m, dtype=np.int64)]
    for step in range(1, k + 1):
        nb = _neighbors(ring_zone)
        cand_src = np.repeat(ring_src, nb.shape[1])
        cand_zone = nb.ravel()
        real = cand_zone != 0
        cand_src, cand_zone = cand_src[real], cand_zone[real]
        universe = _unique(np.concatenate([cand_zone, ring_zone, prev_zone]))

        def pair(src: IntArray, zone: IdArray, universe: IdArray = universe) -> IntArray:
            return np.searchsorted(universe, zone).astype(np.int64) * m + src

        old = _unique(np.concatenate([pair(ring_src, ring_zone), pair(prev_src, prev_zone)]))
        new = _unique(pair(cand_src, cand_zone))
        at = np.minimum(np.searchsorted(old, new), old.size - 1)
        new = new[old[at] != new]  # ascending, none already reached
        if new.size == 0:
            break
        prev_src, prev_zone = ring_src, ring_zone
        ring_src, ring_zone = new % m, universe[new // m]
        srcs.append(ring_src)
        zones.append(ring_zone)
        steps.append(np.full(new.size, step, dtype=np.int64))
    src, zone, st = np.concatenate(srcs), np.concatenate(zones), np.concatenate(steps)
    order = np.lexsort((zone, src))
    return src[order], zone[order], st[order]


def _is_pentagon(ids: IdArray) -> BoolArray:
    level, _strip, a, b = _ids_to_chart(ids)
    n = np.left_shift(1, level)
    return np.asarray((a % n == 0) & (b % n == 0))


@dataclass(frozen=True, eq=False)
class _Parts:
    level: int
    k: int
    targets: IdArray
    needed: IdArray
    tiles: list[_TileCells]
    exact_out: IntArray
    exact_src: IntArray
    exact_zone: IdArray
    exact_steps: IntArray


def _parts(zones: Any, k: Any, tile: int) -> _Parts:
    """Split targets into flat tiles and exact disks; list every needed zone."""
    ids, level, k = _check(zones, k)
    empty_i, empty_u = np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.uint64)
    if ids.size == 0:
        return _Parts(level, k, ids, empty_u, [], empty_i, empty_i, empty_u, empty_i)
    n = 1 << level
    _lv, region, i, j = _decode(ids)
    a, b = i + 1, j
    apex = region >= _ids.NORTH
    exact = apex | (2 * k >= n) | _near_vertex(a, b, n, k)
    flat = np.flatnonzero(~exact)
    tiles = _flat_tiles(level, k, region[flat], a[flat], b[flat], flat, tile)
    exact_out = np.flatnonzero(exact)
    src, zone, steps = _exact_disks(ids[exact_out], k)
    pieces = [t.ids[t.reach] for t in tiles] + [zone]
    needed = _unique(np.concatenate(pieces))
    return _Parts(level, k, ids, needed, tiles, exact_out, src, zone, steps)


def disk_union(zones: Any, k: int) -> IdArray:
    """Every zone within k steps of any of the given zones (themselves included).

    These are the zones a moving-window statistic of radius k over ``zones`` reads: the
    zones plus a halo k zones wide. All zones must be of one level.

    Parameters
    ----------
    zones:
        Zone ids of one level (any order; duplicates allowed).
    k:
        Disk radius in steps, >= 0.

    Returns
    -------
    numpy.ndarray
        uint64 ids, ascending, each once.

    Examples
    --------
    >>> from alveary.grid import point_to_zone, zone_disk
    >>> z = point_to_zone(10.0, 20.0, 12)
    >>> len(disk_union(z, 3))  # one hexagon's disk: 3k(k+1) + 1
    37
    >>> far = point_to_zone([10.0, 10.0], [20.0, 20.5], 12)
    >>> bool((disk_union(far, 2) == np.union1d(zone_disk(far[0], 2), zone_disk(far[1], 2))).all())
    True
    """
    return _parts(zones, k, TILE).needed


def disk_windows(zones: Any, k: int, *, tile: int = TILE) -> DiskWindows:
    """The windows through which the k-disks of ``zones`` read a needed-zone value array.

    Parameters
    ----------
    zones:
        Target zone ids of one level (any order; duplicates allowed).
    k:
        Disk radius in steps, >= 0.
    tile:
        Chart cells per tile side (bounds each window to (tile + 2k)² cells).

    Returns
    -------
    DiskWindows
        ``needed`` equals :func:`disk_union` of the same zones.

    Examples
    --------
    >>> from alveary.grid import point_to_zone, zone_from_text, zone_neighbors
    >>> z = point_to_zone(10.0, 20.0, 12)
    >>> w = disk_windows([z, zone_neighbors(z)[0]], 1)  # two neighbours
    >>> len(w.needed), len(w.halo), len(w.tiles), len(w.exact)
    (10, 8, 1, 0)
    >>> w.tiles[0].source.shape  # the targets' bounding box (2 x 1), padded by k
    (4, 3)
    >>> near_apex = disk_windows(zone_from_text("5n"), 2)  # an apex: disk listed exactly
    >>> len(near_apex.exact), len(near_apex.needed)  # 1 + 5 + 10: a pentagon's disk
    (1, 16)
    """
    if not isinstance(tile, int) or isinstance(tile, bool) or tile < 1:
        raise GridError("tile", tile, "an integer >= 1")
    p = _parts(zones, k, tile)
    needed = p.needed
    tiles = []
    for t in p.tiles:
        pos = np.minimum(np.searchsorted(needed, t.ids), max(needed.size - 1, 0))
        # int32 positions (into lists far shorter than 2**31 zones): half the memory of
        # int64, and plans holding the windows are kept for repeats
        source = np.where(needed[pos] == t.ids, pos, -1).astype(np.int32)
        small = (a.astype(np.int32) for a in (t.rows, t.cols, t.out))
        tiles.append(WindowTile(t.strip, t.a0, t.b0, source, *small))
    members = np.searchsorted(needed, p.exact_zone).astype(np.int64)
    counts = np.bincount(p.exact_src, minlength=p.exact_out.size)
    start = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    centre = np.searchsorted(needed, p.targets[p.exact_out]).astype(np.int64)
    area = np.where(_is_pentagon(p.exact_zone), PENTAGON_SHARE, 1.0)
    exact = ExactDisks(p.exact_out, centre, start, members, p.exact_steps, area)
    return DiskWindows(p.level, p.k, p.targets, needed, tuple(tiles), exact)
