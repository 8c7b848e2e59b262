"""Pure chunk arithmetic of the five-strip layout (no I/O, no grid projection).

A variable at refinement level ``r`` (``n = 2**r``) is stored as two arrays:

- ``strips``: shape ``(time, 5, 2n, n)``, chunks ``(T, 1, R, C)``;
- ``apex``: shape ``(time, 2)``, chunks ``(T, 2)``; column 0 is the northern apex
  (region 5), column 1 the southern apex (region 6).

Everything here works on ``(region, i, j)`` cell indices and time ranges and returns
chunk coordinates, store keys and the selection inside each chunk. The functions are
vectorised with numpy and never touch a store.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from alveary._errors import InvalidInput

__all__ = [
    "APEX_REGIONS",
    "STRIPS",
    "ChunkShape",
    "LevelLayout",
    "default_chunk_shape",
]

STRIPS = 5
APEX_REGIONS = (5, 6)

# Defaults, see docs/cube-format.md ("Chunk and shard shapes").
DEFAULT_TIME_BLOCK = 32
DEFAULT_SPATIAL_BLOCK = 64


@dataclass(frozen=True)
class ChunkShape:
    """The chunk shape of a strip array: ``(time, 1, rows, cols)``.

    Examples
    --------
    >>> ChunkShape(32, 64, 64).strip_chunks
    (32, 1, 64, 64)
    """

    time: int
    rows: int
    cols: int

    def __post_init__(self) -> None:
        for name in ("time", "rows", "cols"):
            value = getattr(self, name)
            if not isinstance(value, int | np.integer) or value < 1:
                raise InvalidInput(f"chunks.{name}", value, "an integer >= 1")

    @property
    def strip_chunks(self) -> tuple[int, int, int, int]:
        return (int(self.time), 1, int(self.rows), int(self.cols))

    @property
    def apex_chunks(self) -> tuple[int, int]:
        return (int(self.time), 2)


def default_chunk_shape(
    level: int,
    ntimes: int,
    time_block: int | None = None,
    spatial_block: int | None = None,
) -> ChunkShape:
    """The default chunk shape for a level: ``min(32, time)`` steps of a 64 x 64 block.

    The spatial block is clipped to the strip, ``(2n, n)`` with ``n = 2**level``, so a
    coarse level is one chunk per strip and time block.

    Examples
    --------
    >>> default_chunk_shape(9, 365)
    ChunkShape(time=32, rows=64, cols=64)
    >>> default_chunk_shape(3, 10)
    ChunkShape(time=10, rows=16, cols=8)
    """
    n = 1 << int(level)
    tb = DEFAULT_TIME_BLOCK if time_block is None else int(time_block)
    sb = DEFAULT_SPATIAL_BLOCK if spatial_block is None else int(spatial_block)
    if tb < 1:
        raise InvalidInput("time_block", time_block, "an integer >= 1")
    if sb < 1 or sb & (sb - 1):
        raise InvalidInput("spatial_block", spatial_block, "a power of two >= 1")
    return ChunkShape(max(1, min(tb, int(ntimes))), min(sb, 2 * n), min(sb, n))


def _key(prefix: str, coords: tuple[int, ...]) -> str:
    return f"{prefix}/c/" + "/".join(str(int(c)) for c in coords)


@dataclass(frozen=True)
class LevelLayout:
    """Shapes, chunk grid and key arithmetic of one variable at one level.

    Parameters
    ----------
    level:
        Refinement level ``r``; a strip is ``(2n, n)`` with ``n = 2**r``.
    ntimes:
        Length of the time axis.
    chunks:
        The chunk shape (already clipped to the strip).

    Examples
    --------
    >>> lay = LevelLayout(4, 100, ChunkShape(32, 16, 8))
    >>> lay.strip_shape, lay.chunk_grid
    ((100, 5, 32, 16), (4, 5, 2, 2))
    >>> lay.time_blocks(30, 70)
    array([0, 1, 2])
    """

    level: int
    ntimes: int
    chunks: ChunkShape

    @property
    def n(self) -> int:
        return 1 << int(self.level)

    @property
    def strip_shape(self) -> tuple[int, int, int, int]:
        return (int(self.ntimes), STRIPS, 2 * self.n, self.n)

    @property
    def apex_shape(self) -> tuple[int, int]:
        return (int(self.ntimes), 2)

    @property
    def chunk_grid(self) -> tuple[int, int, int, int]:
        """Number of chunks along each strip-array axis."""
        t, _, r, c = self.chunks.strip_chunks
        return (-(-self.ntimes // t), STRIPS, -(-2 * self.n // r), -(-self.n // c))

    @property
    def zones_per_chunk(self) -> int:
        return int(self.chunks.rows) * int(self.chunks.cols)

    def time_blocks(self, start: int, stop: int) -> np.ndarray:
        """Time-block indices covering time steps ``start <= t < stop``."""
        if stop <= start:
            return np.zeros(0, dtype=np.int64)
        t = int(self.chunks.time)
        return np.arange(start // t, (stop - 1) // t + 1, dtype=np.int64)

    def time_range(self, block: int) -> tuple[int, int]:
        """The time steps ``[t0, t1)`` a time block covers (the last may be short)."""
        t = int(self.chunks.time)
        return block * t, min((block + 1) * t, int(self.ntimes))

    def spatial_chunk(
        self, i: ArrayLike, j: ArrayLike
    ) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]]:
        """Vectorised: row block and column block of strip cells, and the offsets in them.

        Returns
        -------
        (rb, cb, di, dj): int64 arrays; the cell sits at ``[di, dj]`` of the chunk in
        row block ``rb`` and column block ``cb`` of its strip.

        Examples
        --------
        >>> lay = LevelLayout(6, 10, ChunkShape(10, 64, 64))
        >>> [a.tolist() for a in lay.spatial_chunk([70, 5], [63, 0])]
        [[1, 0], [0, 0], [6, 5], [63, 0]]
        """
        i = np.asarray(i, dtype=np.int64)
        j = np.asarray(j, dtype=np.int64)
        r = int(self.chunks.rows)
        c = int(self.chunks.cols)
        return i // r, j // c, i % r, j % c

    def strip_key(self, prefix: str, tblock: int, region: int, rb: int, cb: int) -> str:
        """The store key of one strip chunk (zarr v3 default ``c/`` encoding).

        Examples
        --------
        >>> LevelLayout(6, 10, ChunkShape(10, 64, 64)).strip_key("sm/6/strips", 0, 2, 1, 0)
        'sm/6/strips/c/0/2/1/0'
        """
        return _key(prefix, (tblock, region, rb, cb))

    def apex_key(self, prefix: str, tblock: int) -> str:
        """The store key of one apex chunk.

        Examples
        --------
        >>> LevelLayout(6, 10, ChunkShape(10, 64, 64)).apex_key("sm/6/apex", 0)
        'sm/6/apex/c/0/0'
        """
        return _key(prefix, (tblock, 0))

    def strip_chunk_selection(
        self, tblock: int, region: int, rb: int, cb: int
    ) -> tuple[slice, slice, slice, slice]:
        """The array selection that is exactly one strip chunk (clipped to the array)."""
        t0, t1 = self.time_range(tblock)
        r, c = int(self.chunks.rows), int(self.chunks.cols)
        return (
            slice(t0, t1),
            slice(region, region + 1),
            slice(rb * r, min((rb + 1) * r, 2 * self.n)),
            slice(cb * c, min((cb + 1) * c, self.n)),
        )

    def apex_chunk_selection(self, tblock: int) -> tuple[slice, slice]:
        t0, t1 = self.time_range(tblock)
        return (slice(t0, t1), slice(0, 2))

    def strip_chunk_nbytes(self, itemsize: int) -> int:
        """Decoded size of one full strip chunk."""
        t, _, r, c = self.chunks.strip_chunks
        return t * r * c * int(itemsize)

    def apex_chunk_nbytes(self, itemsize: int) -> int:
        return int(self.chunks.time) * 2 * int(itemsize)

    def all_spatial_chunks(self) -> np.ndarray:
        """Every ``(region, rb, cb)`` of the level, shape ``(m, 3)``, in key order."""
        _, _, nr, nc = self.chunk_grid
        k, a, b = np.meshgrid(np.arange(STRIPS), np.arange(nr), np.arange(nc), indexing="ij")
        return np.stack([k.ravel(), a.ravel(), b.ravel()], axis=1).astype(np.int64)

    def chunk_cells(self, region: int, rb: int, cb: int) -> tuple[np.ndarray, np.ndarray]:
        """All ``(i, j)`` of one spatial chunk, each shaped ``(rows, cols)``, row-major."""
        r, c = int(self.chunks.rows), int(self.chunks.cols)
        i0, j0 = rb * r, cb * c
        i = np.arange(i0, min(i0 + r, 2 * self.n), dtype=np.int64)
        j = np.arange(j0, min(j0 + c, self.n), dtype=np.int64)
        ii, jj = np.meshgrid(i, j, indexing="ij")
        return ii, jj
