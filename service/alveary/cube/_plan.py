"""Read plans: which chunks a read touches and what to take from each (pure, no I/O)."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from alveary._errors import GridError
from alveary.cube._layout import STRIPS, LevelLayout

__all__ = ["ChunkRead", "ReadPlan", "plan_cell", "plan_cells"]


@dataclass(frozen=True, eq=False)
class ChunkRead:
    """One chunk a read needs, and where its values go.

    Attributes
    ----------
    key:
        Store key relative to the cube version's root, e.g. ``"sm/6/strips/c/0/2/1/0"``.
    array:
        Path of the array inside the version, e.g. ``"sm/6/strips"``.
    coords:
        Chunk coordinates in the array's chunk grid.
    selection:
        The array selection that is exactly this chunk (clipped at the array's end).
    out_time, in_time:
        Rows of the output and the matching rows inside the chunk.
    columns:
        Output columns (positions in the requested zone list) served by this chunk.
    cells:
        Index arrays into the chunk's non-time axes for those columns.
    nbytes:
        Decoded size of the chunk in bytes (what it costs in the chunk cache).
    """

    key: str
    array: str
    coords: tuple[int, ...]
    selection: tuple[slice, ...]
    out_time: slice
    in_time: slice
    columns: np.ndarray
    cells: tuple[np.ndarray, ...]
    nbytes: int


@dataclass(frozen=True, eq=False)
class ReadPlan:
    """The exact set of chunks a read touches; computed without any I/O.

    ``len(plan)`` is the number of chunk GETs a read with an empty cache issues, and
    :attr:`max_bytes` the decoded bytes it holds at most.
    """

    variable: str
    level: int
    time: slice
    nzones: int
    reads: tuple[ChunkRead, ...] = field(repr=False)

    def __len__(self) -> int:
        return len(self.reads)

    @property
    def keys(self) -> tuple[str, ...]:
        """The chunk keys, in the order they are read."""
        return tuple(r.key for r in self.reads)

    @property
    def max_bytes(self) -> int:
        """Decoded bytes of all chunks in the plan."""
        return int(sum(r.nbytes for r in self.reads))

    @property
    def shape(self) -> tuple[int, int]:
        """Shape of the result, ``(time steps, zones)``."""
        return (self.time.stop - self.time.start, self.nzones)


def plan_cells(
    layout: LevelLayout,
    prefix: str,
    region: np.ndarray,
    i: np.ndarray,
    j: np.ndarray,
    time: slice,
    itemsize: int,
    variable: str = "",
) -> ReadPlan:
    """Plan a read of the cells ``(region, i, j)`` over time steps ``time``.

    ``prefix`` is the path of the variable's level group (``"sm/6"``); the arrays are
    ``prefix/strips`` and ``prefix/apex``. Every chunk that holds a requested cell in
    the time range appears exactly once; no other chunk appears.

    Examples
    --------
    >>> from alveary.cube._layout import ChunkShape
    >>> lay = LevelLayout(6, 100, ChunkShape(32, 64, 64))
    >>> p = plan_cells(lay, "sm/6", [0, 0, 5], [3, 70, 0], [1, 1, 0], slice(0, 40), 4)
    >>> len(p)
    6
    >>> p.keys[:2]
    ('sm/6/strips/c/0/0/0/0', 'sm/6/strips/c/1/0/0/0')
    >>> p.keys[-1]
    'sm/6/apex/c/1/0'
    """
    region = np.asarray(region, dtype=np.int64).ravel()
    i = np.asarray(i, dtype=np.int64).ravel()
    j = np.asarray(j, dtype=np.int64).ravel()
    if not (region.shape == i.shape == j.shape):
        raise GridError("zones", None, "region, i and j of equal length")
    t0, t1 = int(time.start), int(time.stop)
    tblocks = layout.time_blocks(t0, t1).tolist()
    positions = np.arange(region.size, dtype=np.int64)
    strip = region < STRIPS
    reads = [
        _read(layout, f"{prefix}/{array}", (tb, *chunk), t0, t1, cols, cells, nbytes)
        for array, chunk, cols, cells, nbytes in (
            *_strip_groups(layout, region[strip], i[strip], j[strip], positions[strip], itemsize),
            *_apex_groups(layout, region[~strip], positions[~strip], itemsize),
        )
        for tb in tblocks
    ]
    return ReadPlan(variable, int(layout.level), slice(t0, t1), int(region.size), tuple(reads))


def plan_cell(
    layout: LevelLayout,
    prefix: str,
    region: int,
    i: int,
    j: int,
    time: slice,
    itemsize: int,
    variable: str = "",
) -> ReadPlan:
    """:func:`plan_cells` for one cell, in integer arithmetic (a point query's read).

    Examples
    --------
    >>> from alveary.cube._layout import ChunkShape
    >>> lay = LevelLayout(6, 100, ChunkShape(32, 64, 64))
    >>> plan_cell(lay, "sm/6", 0, 70, 1, slice(0, 40), 4).keys
    ('sm/6/strips/c/0/0/1/0', 'sm/6/strips/c/1/0/1/0')
    >>> plan_cell(lay, "sm/6", 6, 0, 0, slice(99, 100), 4).keys
    ('sm/6/apex/c/3/0',)
    """
    t0, t1 = int(time.start), int(time.stop)
    chunk: tuple[int, ...]
    if region < STRIPS:
        rows, cols = int(layout.chunks.rows), int(layout.chunks.cols)
        (rb, di), (cb, dj) = divmod(i, rows), divmod(j, cols)
        array, chunk = f"{prefix}/strips", (region, rb, cb)
        cells: tuple[np.ndarray, ...] = (_ZERO, np.array([di]), np.array([dj]))
        nbytes = layout.strip_chunk_nbytes(itemsize)
    elif region <= 6:
        array, chunk, cells = f"{prefix}/apex", (0,), (np.array([region - 5]),)
        nbytes = layout.apex_chunk_nbytes(itemsize)
    else:
        raise GridError("zones", region, "regions 0..6")
    step = int(layout.chunks.time)
    blocks = range(t0 // step, (t1 - 1) // step + 1) if t1 > t0 else range(0)
    reads = tuple(_read(layout, array, (tb, *chunk), t0, t1, _ZERO, cells, nbytes) for tb in blocks)
    return ReadPlan(variable, int(layout.level), slice(t0, t1), 1, reads)


_ZERO = np.zeros(1, np.int64)
_ZERO.flags.writeable = False

_Group = tuple[str, tuple[int, ...], np.ndarray, tuple[np.ndarray, ...], int]


def _strip_groups(
    layout: LevelLayout,
    region: np.ndarray,
    i: np.ndarray,
    j: np.ndarray,
    pos: np.ndarray,
    itemsize: int,
) -> list[_Group]:
    """Strip cells grouped by spatial chunk: (array, chunk, columns, cells, bytes)."""
    if region.size == 0:
        return []
    rb, cb, di, dj = layout.spatial_chunk(i, j)
    _, _, nr, nc = layout.chunk_grid
    if region.size == 1:  # one zone (a point query): one chunk, nothing to group
        chunk = (int(region[0]), int(rb[0]), int(cb[0]))
        cells = (np.zeros(1, np.int64), di, dj)
        return [("strips", chunk, pos, cells, layout.strip_chunk_nbytes(itemsize))]
    sid = (region * nr + rb) * nc + cb
    order = np.argsort(sid, kind="stable")
    uniq, starts = np.unique(sid[order], return_index=True)
    bounds = np.append(starts, sid.size)
    nbytes = layout.strip_chunk_nbytes(itemsize)
    groups: list[_Group] = []
    for u, a, b in zip(uniq.tolist(), bounds[:-1].tolist(), bounds[1:].tolist(), strict=True):
        sel = order[a:b]
        kk, rest = divmod(u, nr * nc)
        rr, cc = divmod(rest, nc)
        cells = (np.zeros(sel.size, np.int64), di[sel], dj[sel])
        groups.append(("strips", (kk, rr, cc), pos[sel], cells, nbytes))
    return groups


def _apex_groups(
    layout: LevelLayout, region: np.ndarray, pos: np.ndarray, itemsize: int
) -> list[_Group]:
    """The apex cells (regions 5 and 6) as one group."""
    if region.size == 0:
        return []
    bad = (region != 5) & (region != 6)
    if bad.any():
        raise GridError("zones", int(region[bad][0]), "regions 0..6")
    return [("apex", (0,), pos, (region - 5,), layout.apex_chunk_nbytes(itemsize))]


def _read(
    layout: LevelLayout,
    array: str,
    coords: tuple[int, ...],
    t0: int,
    t1: int,
    cols: np.ndarray,
    cells: tuple[np.ndarray, ...],
    nbytes: int,
) -> ChunkRead:
    tb = coords[0]
    c0, c1 = layout.time_range(tb)
    a, b = max(t0, c0), min(t1, c1)
    selection: tuple[slice, ...]
    if len(coords) == 4:
        selection = layout.strip_chunk_selection(*coords)
    else:
        selection = layout.apex_chunk_selection(tb)
    return ChunkRead(
        key=array + "/c/" + "/".join(str(c) for c in coords),
        array=array,
        coords=tuple(int(c) for c in coords),
        selection=selection,
        out_time=slice(a - t0, b - t0),
        in_time=slice(a - c0, b - c0),
        columns=cols,
        cells=cells,
        nbytes=int(nbytes),
    )
