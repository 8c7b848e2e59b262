"""The units of work of a build: one spatial chunk (and a run of time blocks) each.

There is one task type per kind of work: :class:`RasterTask` resamples rasters,
:class:`PointTask` writes binned points, :class:`PyramidTask` aggregates a finer level.
Each is a small picklable object whose :meth:`run` computes its chunks and writes them
through a :class:`alveary.cube.ChunkSink`, so the same task runs in a thread or in a
worker process of a dask.distributed cluster. Tasks write disjoint chunks and return
what they wrote.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np
from numpy.typing import NDArray

from alveary import grid
from alveary.cube import ChunkSink, ChunkWrite, LevelLayout
from alveary.ingest._raster import RasterSource
from alveary.ingest._weights import aggregate_children, child_weights, descendant_weights

__all__ = [
    "APEX",
    "PointTask",
    "PyramidTask",
    "RasterJob",
    "RasterTask",
    "Task",
    "TaskResult",
    "apex_zones",
    "chunk_zones",
    "run_task",
]

APEX = (-1, -1, -1)  # the spatial "chunk" id of the two apex zones
Chunk = tuple[int, int, int]
_Floats = NDArray[np.float64]


@dataclass
class TaskResult:
    """What a task wrote: its chunk writes and the zones of its chunk that hold data."""

    chunk: Chunk
    writes: list[ChunkWrite] = field(default_factory=list)
    zones_with_data: int = 0

    @property
    def chunks_written(self) -> int:
        return sum(w.state == "written" for w in self.writes)


class Task(Protocol):
    """A unit of work: one spatial chunk over some time blocks."""

    @property
    def chunk(self) -> Chunk: ...

    def run(self) -> TaskResult: ...


def run_task(task: Task) -> TaskResult:
    """Run one task (a module-level function, so that dask can ship it to workers)."""
    return task.run()


def chunk_zones(layout: LevelLayout, region: int, rb: int, cb: int) -> NDArray[np.uint64]:
    """Zone ids of one spatial chunk, row-major ``(rows * cols,)``."""
    ii, jj = layout.chunk_cells(region, rb, cb)
    k = np.full(ii.shape, region, dtype=np.int64)
    return np.asarray(grid.index_to_zone(layout.level, k.ravel(), ii.ravel(), jj.ravel()))


def apex_zones(level: int) -> NDArray[np.uint64]:
    return np.asarray(grid.index_to_zone(level, [5, 6], [0, 0], [0, 0]), dtype=np.uint64)


def _zones_of(layout: LevelLayout, chunk: Chunk) -> NDArray[np.uint64]:
    return apex_zones(layout.level) if chunk == APEX else chunk_zones(layout, *chunk)


def _write(
    sink: ChunkSink,
    layout: LevelLayout,
    variable: str,
    chunk: Chunk,
    tb: int,
    block: _Floats,
    steps: NDArray[np.bool_] | None,
) -> ChunkWrite:
    """Write values ``(t, zones of the chunk)`` as the chunk's time block ``tb``."""
    if chunk == APEX:
        return sink.write_apex_chunk(variable, layout.level, tb, block, steps)
    region, rb, cb = chunk
    shape = layout.chunk_cells(region, rb, cb)[0].shape
    values = block.reshape(block.shape[0], *shape)
    return sink.write_strip_chunk(variable, layout.level, tb, region, rb, cb, values, steps)


def _record(result: TaskResult, has_data: NDArray[np.bool_], w: ChunkWrite, block: _Floats) -> None:
    result.writes.append(w)
    if w.state == "written":
        has_data |= np.isfinite(block).any(axis=0)


class _Sampler:
    """Zone values from rasters on one pixel grid: nearest centre or area mean."""

    def __init__(self, job: RasterJob, src: RasterSource, zones: NDArray[np.uint64]) -> None:
        self.n = zones.size
        self.method = job.method
        self.min_coverage = job.min_coverage
        if job.method == "mean" and job.depth > 0:
            rows, fine, w = descendant_weights(job.layout.level, zones, job.depth)
            uniq, inv = np.unique(fine, return_inverse=True)
            lat, lon = grid.zone_to_point(uniq)
            self.rows, self.inv, self.w = rows, inv, w
            self.total = np.bincount(rows, weights=w, minlength=self.n)
        else:
            lat, lon = grid.zone_to_point(zones)
            self.method = "nearest"
        self.prow, self.pcol = src.pixel_index(np.asarray(lat), np.asarray(lon))

    @property
    def touches(self) -> bool:
        return bool((self.prow >= 0).any())

    def values(self, src: RasterSource, step: int) -> _Floats:
        """Zone values of ``src`` (on the grid this sampler was made for) at one step."""
        v = src.sample(step, self.prow, self.pcol)
        if self.method == "nearest":
            return v
        vf = v[self.inv]
        ok = np.isfinite(vf)
        wv = np.where(ok, self.w, 0.0)
        num = np.bincount(self.rows, weights=wv * np.where(ok, vf, 0.0), minlength=self.n)
        den = np.bincount(self.rows, weights=wv, minlength=self.n)
        with np.errstate(invalid="ignore", divide="ignore"):
            out = num / den
            frac = den / self.total
        out[~(frac >= self.min_coverage) | (den == 0)] = np.nan
        return np.asarray(out, dtype=np.float64)


@dataclass(frozen=True, eq=False)
class RasterJob:
    """What every raster task of a level shares."""

    layout: LevelLayout
    sink: ChunkSink
    rasters: dict[str, RasterSource]
    steps: dict[str, NDArray[np.int64]]  # per variable: cube step -> source step (-1)
    method: str = "nearest"
    depth: int = 0
    min_coverage: float = 0.5


@dataclass(frozen=True, eq=False)
class RasterTask:
    """Resample the rasters onto one spatial chunk over some time blocks."""

    job: RasterJob
    chunk: Chunk
    tblocks: tuple[int, ...]

    def run(self) -> TaskResult:
        job, lay = self.job, self.job.layout
        zones = _zones_of(lay, self.chunk)
        result = TaskResult(self.chunk)
        has_data = np.zeros(zones.size, dtype=bool)
        samplers: dict[tuple[str, bytes, bytes], _Sampler] = {}
        for name, src in job.rasters.items():
            key = (src.crs_wkt, src.x.tobytes(), src.y.tobytes())
            sampler = samplers.get(key)
            if sampler is None:
                sampler = samplers[key] = _Sampler(job, src, zones)
            steps = job.steps[name]
            for tb in self.tblocks:
                t0, t1 = lay.time_range(tb)
                own = steps[t0:t1] >= 0
                if not own.any():
                    continue
                block = np.full((t1 - t0, zones.size), np.nan)
                if sampler.touches:
                    for t in np.flatnonzero(own).tolist():
                        block[t] = sampler.values(src, int(steps[t0 + t]))
                w = _write(job.sink, lay, name, self.chunk, tb, block, own)
                _record(result, has_data, w, block)
        result.zones_with_data = int(has_data.sum())
        return result


@dataclass(frozen=True, eq=False)
class PointTask:
    """Write binned points of one spatial chunk over some time blocks.

    ``payload`` maps each variable to ``(time index, cell index, value)`` arrays and
    ``defined`` to the cube steps the variable's tables cover.
    """

    sink: ChunkSink
    layout: LevelLayout
    chunk: Chunk
    tblocks: tuple[int, ...]
    payload: dict[str, tuple[NDArray[np.int64], NDArray[np.int64], _Floats]]
    defined: dict[str, NDArray[np.bool_]]

    def run(self) -> TaskResult:
        lay = self.layout
        zones = _zones_of(lay, self.chunk)
        result = TaskResult(self.chunk)
        has_data = np.zeros(zones.size, dtype=bool)
        for name, (ti, ci, vals) in self.payload.items():
            for tb in self.tblocks:
                t0, t1 = lay.time_range(tb)
                own = self.defined[name][t0:t1]
                if not own.any():
                    continue
                block = np.full((t1 - t0, zones.size), np.nan)
                sel = (ti >= t0) & (ti < t1)
                block[ti[sel] - t0, ci[sel]] = vals[sel]
                w = _write(self.sink, lay, name, self.chunk, tb, block, own)
                _record(result, has_data, w, block)
        result.zones_with_data = int(has_data.sum())
        return result


@dataclass(frozen=True, eq=False)
class PyramidTask:
    """Aggregate one spatial chunk of a level from the level below it."""

    sink: ChunkSink
    layout: LevelLayout
    chunk: Chunk
    tblocks: tuple[int, ...]
    variables: tuple[str, ...]
    min_coverage: float = 0.5

    def run(self) -> TaskResult:
        lay = self.layout
        zones = _zones_of(lay, self.chunk)
        result = TaskResult(self.chunk)
        has_data = np.zeros(zones.size, dtype=bool)
        cids, cw = child_weights(zones)
        cids = np.where(cw > 0, cids, cids[:, :1])  # pentagon padding reads the centre
        uniq, inv = np.unique(cids, return_inverse=True)
        inv = inv.reshape(cids.shape)
        for name in self.variables:
            info = self.sink.variables[name]
            for tb in self.tblocks:
                t0, t1 = lay.time_range(tb)
                fine = self.sink.read(name, lay.level + 1, uniq, t0, t1)
                block = aggregate_children(fine[:, inv], cw, info.aggregation, self.min_coverage)
                w = _write(self.sink, lay, name, self.chunk, tb, block, None)
                _record(result, has_data, w, block)
        result.zones_with_data = int(has_data.sum())
        return result


def point_payload(
    layout: LevelLayout, tmap: NDArray[np.int64], zones: NDArray[np.uint64], values: _Floats
) -> dict[Chunk, tuple[NDArray[np.int64], NDArray[np.int64], _Floats]]:
    """Binned points split by spatial chunk: ``{chunk: (time index, cell, value)}``."""
    _, region, i, j = (np.asarray(x) for x in grid.zone_to_index(zones))
    rb, cb, di, dj = layout.spatial_chunk(i, j)
    apex = region >= 5
    keys = np.stack(
        [np.where(apex, -1, region), np.where(apex, -1, rb), np.where(apex, -1, cb)], axis=1
    )
    cell = np.where(apex, region - 5, di * layout.chunks.cols + dj)
    uniq, inv = np.unique(keys, axis=0, return_inverse=True)
    inv = inv.ravel()
    out: dict[Chunk, Any] = {}
    for u in range(uniq.shape[0]):
        sel = inv == u
        chunk = (int(uniq[u, 0]), int(uniq[u, 1]), int(uniq[u, 2]))
        out[chunk] = (tmap[sel], cell[sel], values[sel])
    return out
