"""The units of work of a build: one spatial chunk (and a run of time blocks) each.

Every function here is module-level and takes only picklable arguments, so the same
task runs in a thread or in a worker process of a dask.distributed cluster. Tasks write
disjoint chunks through a :class:`alveary.cube.ChunkSink` and return small counters.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from alveary import grid
from alveary.cube import ChunkSink, LevelLayout
from alveary.ingest._raster import RasterSource
from alveary.ingest._weights import aggregate_children, child_weights, descendant_weights

__all__ = ["LevelJob", "TaskResult", "apex_zones", "chunk_zones", "run_task"]

APEX = (-1, -1, -1)  # the spatial "chunk" id of the two apex zones


@dataclass(frozen=True, eq=False)
class LevelJob:
    """What every task of one level needs to know."""

    level: int
    layout: LevelLayout
    sink: ChunkSink
    kind: str  # "sources", "points" or "pyramid"
    rasters: dict[str, RasterSource] = field(default_factory=dict)
    steps: dict[str, np.ndarray] = field(default_factory=dict)  # cube t -> source step (-1)
    method: str = "nearest"
    depth: int = 0
    min_coverage: float = 0.5


@dataclass
class TaskResult:
    chunk: tuple[int, int, int]
    chunks_written: int = 0
    zones_with_data: int = 0


def chunk_zones(layout: LevelLayout, region: int, rb: int, cb: int) -> np.ndarray:
    """Zone ids of one spatial chunk, row-major ``(rows * cols,)``."""
    ii, jj = layout.chunk_cells(region, rb, cb)
    k = np.full(ii.shape, region, dtype=np.int64)
    return np.asarray(grid.index_to_zone(layout.level, k.ravel(), ii.ravel(), jj.ravel()))


def apex_zones(level: int) -> np.ndarray:
    return np.asarray(grid.index_to_zone(level, [5, 6], [0, 0], [0, 0]), dtype=np.uint64)


class _Sampler:
    """Zone values from rasters on one pixel grid: nearest centre or area mean."""

    def __init__(self, job: LevelJob, src: RasterSource, zones: np.ndarray) -> None:
        self.n = zones.size
        self.method = job.method
        self.min_coverage = job.min_coverage
        if job.method == "mean" and job.depth > 0:
            rows, fine, w = descendant_weights(job.level, zones, job.depth)
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

    def values(self, src: RasterSource, step: int) -> np.ndarray:
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
        return out


def _time_blocks(job: LevelJob, tblocks) -> list[tuple[int, int, int]]:
    return [(tb, *job.layout.time_range(tb)) for tb in tblocks]


def _write(job, variable, chunk, tb, block) -> int:
    if chunk == APEX:
        return job.sink.write_apex_chunk(variable, job.level, tb, block)
    region, rb, cb = chunk
    shape = job.layout.chunk_cells(region, rb, cb)[0].shape
    return job.sink.write_strip_chunk(
        variable, job.level, tb, region, rb, cb, block.reshape(block.shape[0], *shape)
    )


def _zones_of(job: LevelJob, chunk) -> np.ndarray:
    if chunk == APEX:
        return apex_zones(job.level)
    return chunk_zones(job.layout, *chunk)


def run_task(job: LevelJob, chunk: tuple[int, int, int], tblocks, payload=None) -> TaskResult:
    """Compute and write one spatial chunk over the given time blocks."""
    chunk = tuple(int(c) for c in chunk)
    zones = _zones_of(job, chunk)
    result = TaskResult(chunk)
    has_data = np.zeros(zones.size, dtype=bool)
    blocks = _time_blocks(job, tblocks)
    if job.kind == "sources":
        samplers: dict[tuple, _Sampler] = {}
        for name, src in job.rasters.items():
            key = (src.crs_wkt, src.x.tobytes(), src.y.tobytes())
            sampler = samplers.get(key)
            if sampler is None:
                sampler = samplers[key] = _Sampler(job, src, zones)
            if not sampler.touches:
                continue
            steps = job.steps[name]
            for tb, t0, t1 in blocks:
                block = np.full((t1 - t0, zones.size), np.nan)
                for t in range(t0, t1):
                    if steps[t] >= 0:
                        block[t - t0] = sampler.values(src, int(steps[t]))
                has_data |= np.isfinite(block).any(axis=0)
                result.chunks_written += _write(job, name, chunk, tb, block) > 0
    elif job.kind == "points":
        # payload: {variable: (t index array, cell index array, values)}
        for name, (ti, ci, vals) in (payload or {}).items():
            for tb, t0, t1 in blocks:
                block = np.full((t1 - t0, zones.size), np.nan)
                sel = (ti >= t0) & (ti < t1)
                block[ti[sel] - t0, ci[sel]] = vals[sel]
                has_data |= np.isfinite(block).any(axis=0)
                result.chunks_written += _write(job, name, chunk, tb, block) > 0
    elif job.kind == "pyramid":
        cids, cw = child_weights(zones)
        cids = np.where(cw > 0, cids, cids[:, :1])  # pentagon padding reads the centre
        uniq, inv = np.unique(cids, return_inverse=True)
        inv = inv.reshape(cids.shape)
        for name, info in job.sink.variables.items():
            for tb, t0, t1 in blocks:
                fine = job.sink.read(name, job.level + 1, uniq, t0, t1)
                block = aggregate_children(fine[:, inv], cw, info.aggregation, job.min_coverage)
                has_data |= np.isfinite(block).any(axis=0)
                result.chunks_written += _write(job, name, chunk, tb, block) > 0
    else:  # pragma: no cover - programming error
        raise ValueError(job.kind)
    result.zones_with_data = int(has_data.sum())
    return result
