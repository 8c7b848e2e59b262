"""``ingest``: build a cube from rasters and point tables, split by chunks, on dask.

A build runs in five named stages: **check** the arguments (:mod:`._request`), **open**
the sources (:mod:`._sources`), **plan** the version against the published one
(:mod:`._target`), **run** the chunk tasks level by level (:mod:`._tasks`, on
:mod:`._runner`), and **publish**.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from pathlib import Path
from time import perf_counter
from typing import Any

import numpy as np
from numpy.typing import NDArray

from alveary import grid
from alveary._errors import CubeFormatError, IngestError
from alveary.cube import CubeWriter, LevelLayout, create_cube, normalize_url
from alveary.ingest._request import BuildRequest, check_request
from alveary.ingest._runner import Runner
from alveary.ingest._sources import Sources, footprint_text, open_sources, step_map
from alveary.ingest._target import Target, plan_target
from alveary.ingest._tasks import (
    APEX,
    PointTask,
    PyramidTask,
    RasterJob,
    RasterTask,
    TaskResult,
    chunk_zones,
    point_payload,
)

__all__ = ["IngestSummary", "ingest"]

Chunk = tuple[int, int, int]


@dataclass
class IngestSummary:
    """What a build wrote: per level the zones with data; chunks, bytes and time."""

    url: str
    cube_id: str
    version: str
    levels: tuple[int, ...]
    variables: tuple[str, ...]
    times: int
    zones_written: dict[int, int] = field(default_factory=dict)
    chunks_written: int = 0
    bytes_stored: int = 0
    seconds: float = 0.0
    base: str | None = None

    @property
    def total_zones(self) -> int:
        return int(sum(self.zones_written.values()))

    @property
    def zones_per_second(self) -> float:
        return self.total_zones / self.seconds if self.seconds > 0 else math.inf

    def text(self) -> str:
        per = ", ".join(f"level {k}: {v}" for k, v in sorted(self.zones_written.items()))
        based = f" (appended to {self.base})" if self.base else ""
        return (
            f"cube {self.cube_id} version {self.version}{based} at {self.url}\n"
            f"  variables: {', '.join(self.variables)}; time steps: {self.times}\n"
            f"  zones written: {self.total_zones} ({per})\n"
            f"  chunks: {self.chunks_written}; bytes: {self.bytes_stored}; "
            f"seconds: {self.seconds:.1f}"
        )


# -- the run stage: which chunks, which tasks -----------------------------------------
def _auto_depth(level: int, pixel_m: float) -> int:
    """Levels below the target at which the area mean samples the source (1..3).

    Enough that sub-zones are about the size of a source pixel, at most 3 (64
    sub-zones per zone), at least 1.
    """
    zone_m = math.sqrt(grid.zone_area(level))
    if pixel_m <= 0:
        return 3
    return int(min(3, max(1, math.ceil(math.log2(max(1.0, zone_m / pixel_m))))))


def candidate_chunks(
    layout: LevelLayout, bboxes: list[tuple[float, float, float, float]], pad_deg: float
) -> list[Chunk]:
    """Spatial chunks that may hold data: those with a zone centre in a source's lon/lat
    box widened by ``pad_deg`` (a box of 360° or more is every longitude)."""
    chunks: set[Chunk] = set()
    for w, s, e, n in bboxes:
        if e < w:  # crosses 180°: unwrap, zones_in_bbox wraps it back
            e += 360.0
        s2, n2 = max(-90.0, s - pad_deg), min(90.0, n + pad_deg)
        if e - w + 2 * pad_deg >= 360.0 and s2 == -90.0 and n2 == 90.0:
            return [(int(k), int(r), int(c)) for k, r, c in layout.all_spatial_chunks()]
        zones = grid.zones_in_bbox(w - pad_deg, s2, e + pad_deg, n2, layout.level)
        if zones.size == 0:
            zones = np.atleast_1d(grid.point_to_zone((s + n) / 2, (w + e) / 2, layout.level))
        _, region, i, j = (np.asarray(x) for x in grid.zone_to_index(zones))
        strip = region < 5
        rb, cb, _, _ = layout.spatial_chunk(i[strip], j[strip])
        chunks.update(zip(region[strip].tolist(), rb.tolist(), cb.tolist(), strict=True))
    return sorted(chunks)


def _parent_chunks(coarse: LevelLayout, fine: LevelLayout, fine_chunks: list[Chunk]) -> list[Chunk]:
    """Chunks of the coarser level whose zones have children in the given fine chunks."""
    out: set[Chunk] = set()
    for region, rb, cb in fine_chunks:
        p = grid.zone_parent(chunk_zones(fine, region, rb, cb))
        _, pr, pi, pj = (np.asarray(x) for x in grid.zone_to_index(p))
        strip = pr < 5
        prb, pcb, _, _ = coarse.spatial_chunk(pi[strip], pj[strip])
        out.update(zip(pr[strip].tolist(), prb.tolist(), pcb.tolist(), strict=True))
    return sorted(out)


def _split_time(blocks: list[int], nchunks: int, target: int = 8) -> list[tuple[int, ...]]:
    """Time blocks in a few groups, so that a build has about ``target`` tasks at least."""
    groups = max(1, min(len(blocks), -(-target // max(1, nchunks))))
    edges = np.linspace(0, len(blocks), groups + 1).round().astype(int)
    return [tuple(blocks[a:b]) for a, b in itertools.pairwise(edges.tolist()) if b > a]


def _blocks(layout: LevelLayout, steps: NDArray[np.bool_]) -> list[int]:
    """Time blocks holding any of the given steps."""
    t = int(layout.chunks.time)
    return sorted({int(i) // t for i in np.flatnonzero(steps).tolist()})


def _held(writer: CubeWriter, array: str, blocks: list[int]) -> set[Chunk]:
    """Spatial chunks the version holds (inherited) in the given time blocks."""
    coords = writer.manifest().chunks(array)
    if coords.shape[0] == 0:
        return set()
    keep = np.isin(coords[:, 0], blocks)
    return {(int(k), int(r), int(c)) for _, k, r, c in coords[keep].tolist()}


@dataclass
class _Run:
    """The run stage: tasks per level, their writes entered into the writer's manifest."""

    req: BuildRequest
    src: Sources
    target: Target
    writer: CubeWriter
    runner: Runner
    summary: IngestSummary
    changed: dict[int, set[tuple[str, int, Chunk]]] = field(default_factory=dict)

    def collect(self, level: int, results: list[TaskResult]) -> None:
        """Enter the writes; count zones; remember the changed (time block, chunk)s."""
        per_chunk: dict[Chunk, int] = {}
        changed = self.changed.setdefault(level, set())
        for r in results:
            self.writer.record(r.writes)
            self.summary.chunks_written += r.chunks_written
            per_chunk[r.chunk] = max(per_chunk.get(r.chunk, 0), r.zones_with_data)
            for w in r.writes:
                if w.state != "empty" and r.chunk != APEX:
                    changed.add((w.array.split("/", 1)[0], w.coords[0], r.chunk))
        total = self.summary.zones_written.get(level, 0) + sum(per_chunk.values())
        self.summary.zones_written[level] = total

    def overwritten(self, name: str, blocks: list[int], layout: LevelLayout) -> set[Chunk]:
        """Inherited chunks of a variable in the blocks of steps this build overwrites."""
        if not self.target.inherit or not self.req.overwrite_steps:
            return set()
        return _held(self.writer, f"{name}/{layout.level}/strips", blocks)

    def rasters(self, layout: LevelLayout) -> None:
        src, req = self.src, self.req
        if not src.rasters:
            return
        times = self.target.times
        steps = {k: step_map(times, s.times) for k, s in src.rasters.items()}
        depth = 0
        if req.method == "mean":
            pixel = min(s.pixel_size_m() for s in src.rasters.values())
            depth = req.mean_depth if req.mean_depth is not None else _auto_depth(req.level, pixel)
        job = RasterJob(
            layout, self.writer.sink, src.rasters, steps, req.method, depth, req.min_coverage
        )
        pad = math.degrees(2.0 * math.sqrt(grid.zone_area(req.level)) / grid.R_AUTHALIC)
        cand = set(candidate_chunks(layout, [src.footprints[k] for k in src.rasters], pad))
        blocks = _blocks(layout, np.any([s >= 0 for s in steps.values()], axis=0))
        for name in src.rasters:
            cand |= self.overwritten(name, blocks, layout)
        chunks = [*sorted(cand), APEX]
        groups = _split_time(blocks, len(chunks))
        tasks = [RasterTask(job, c, g) for c in chunks for g in groups]
        self.collect(layout.level, self.runner.run(tasks, f"level {layout.level}"))

    def points(self, layout: LevelLayout) -> None:
        times = self.target.times
        per_chunk: dict[Chunk, dict[str, Any]] = {}
        defined = {}
        for name, pb in self.src.points.items():
            tmap = np.searchsorted(times, pb.times)[pb.tindex]
            for var, values in ((name, pb.mean), (f"{name}_count", pb.count)):
                defined[var] = self.src.defined(var, times)
                for chunk, payload in point_payload(layout, tmap, pb.zones, values).items():
                    per_chunk.setdefault(chunk, {})[var] = payload
                blocks = _blocks(layout, defined[var])
                for chunk in self.overwritten(var, blocks, layout):
                    per_chunk.setdefault(chunk, {}).setdefault(var, _EMPTY)
        if not per_chunk:
            return
        every = tuple(_blocks(layout, np.any(list(defined.values()), axis=0)))
        sink = self.writer.sink
        tasks = [
            PointTask(sink, layout, c, every, payload, defined)
            for c, payload in sorted(per_chunk.items())
        ]
        self.collect(layout.level, self.runner.run(tasks, f"level {layout.level} points"))

    def pyramid(self, level: int) -> None:
        """Aggregate ``level`` from ``level + 1`` where the finer level changed."""
        fine, coarse = self.writer.layouts[level + 1], self.writer.layouts[level]
        changed = self.changed.get(level + 1, set())
        if not changed:
            return
        names = tuple(sorted({v for v, _, _ in changed}))
        blocks = sorted({tb for _, tb, _ in changed})
        chunks = [*_parent_chunks(coarse, fine, sorted({c for _, _, c in changed})), APEX]
        sink = self.writer.sink
        tasks = [
            PyramidTask(sink, coarse, c, g, names, self.req.min_coverage)
            for c in chunks
            for g in _split_time(blocks, len(chunks))
        ]
        self.collect(level, self.runner.run(tasks, f"level {level}"))

    def finest_wrote_nothing(self) -> IngestError:
        fp = footprint_text(self.src.coverage())
        level = self.req.level
        names = ", ".join(Path(p).name for p in self.src.paths)
        return IngestError(
            "sources",
            names,
            message=(
                f"the build wrote no zone at level {level}: the sources' footprint is {fp}, "
                f"and no zone centre of level {level} falls on data there. Nothing was "
                f"published. Check the CRS of {names}: a raster on a degree grid labelled "
                "with a projected CRS (such as UTM) lands on a few metres near that "
                "projection's origin. (A footprint smaller than one zone needs a finer "
                "--level.)"
            ),
        )


_EMPTY = (np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0, np.float64))


# -- the stages ------------------------------------------------------------------------
def _open_writer(req: BuildRequest, src: Sources, target: Target) -> CubeWriter:
    history = f"alveary ingest --level {req.level} --method {req.method}"
    if len(req.levels) > 1:
        history += " --pyramid"
    if target.inherit:
        history += " --append"
    try:
        return create_cube(
            req.out,
            cube_id=target.cube_id,
            title=target.title,
            times=target.times,
            levels=target.levels,
            variables=target.variables,
            chunks=target.chunks,
            coverage=target.coverage,
            storage_options=req.storage_options,
            summary=req.summary,
            source=", ".join(Path(s).name for s in req.sources),
            history=history,
            extra=target.extra,
            keep_versions=req.keep_versions,
            grace_seconds=req.grace_seconds,
            inherit=target.inherit,
        )
    except CubeFormatError as exc:
        raise IngestError("out", req.out, exc.allowed, message=f"--out {req.out}: {exc}") from None


def _run(run: _Run) -> None:
    layout = run.writer.layouts[run.req.level]
    run.rasters(layout)
    if run.src.points:
        run.points(layout)
    if run.summary.zones_written.get(run.req.level, 0) == 0:
        raise run.finest_wrote_nothing()
    for lv in reversed(run.target.levels[:-1]):
        run.pyramid(lv)


def ingest(
    sources: Any,
    out: str,
    level: int,
    variables: Any = None,
    method: str = "nearest",
    pyramid: bool = False,
    cube_id: str | None = None,
    scheduler: str | None = None,
    *,
    title: str | None = None,
    storage_options: dict[str, Any] | None = None,
    mean_depth: int | None = None,
    min_coverage: float = 0.5,
    pyramid_min_level: int = 0,
    time_block: int | None = None,
    spatial_block: int | None = None,
    time_step: str = "1D",
    time: Any = None,
    append: bool = False,
    replace: bool = False,
    overwrite_steps: bool = False,
    keep_versions: int | None = None,
    grace_seconds: float | None = None,
    progress: bool = False,
    summary: str = "",
) -> IngestSummary:
    """Build (a new version of) the cube at ``out`` from rasters and point tables.

    Everything is checked before anything is written: unreadable files, unknown CRS,
    missing variables, mismatched grids between files, a level outside the grid, a
    source without a time axis (unless ``time`` gives its instant), a target that holds
    a different cube, and a build that would change the published cube's variables,
    levels, time axis, chunking or title (unless ``append`` or ``replace``) all raise
    :class:`alveary.IngestError`. A build that fails later, or that writes no zone at
    the target level, removes its unpublished version; the published one stays.

    Parameters
    ----------
    sources:
        Paths of GeoTIFF, NetCDF, Zarr, CSV or Parquet sources.
    out:
        The cube's location (local path or fsspec URL).
    level:
        The target refinement level (the finest level of the cube).
    variables:
        Variable names to take (NetCDF/Zarr variables, table columns, or the name of a
        GeoTIFF series).
    method:
        ``"nearest"`` (value at the zone centre) or ``"mean"`` (area mean).
    pyramid:
        Also build every coarser level down to ``pyramid_min_level``.
    cube_id:
        The cube's id (default: the published cube's, else the last part of ``out``).
    scheduler:
        Address of a dask.distributed scheduler; default: local threads.
    mean_depth:
        Levels below ``level`` at which ``mean`` samples (default: from the pixel size).
    min_coverage:
        Share of a zone's area that must have data for the area mean to give a value.
    time_block, spatial_block:
        Chunk shape (default: the published cube's; for a new cube 32 steps, at most the
        number of steps, and 64). The time block stays for every later append.
    time:
        The instant of sources that have no time axis.
    append:
        Add the sources' new time steps (and variables) to the published cube as a new
        version that writes only the chunks that change. Steps the cube already has
        are refused unless ``overwrite_steps``.
    replace:
        Publish this build in place of the cube, whatever it held.
    keep_versions, grace_seconds:
        Retention, recorded in the cube: published versions kept, and seconds a
        retired version's objects stay (longer than any reader's refresh interval).
    """
    t_start = perf_counter()
    req = check_request(
        sources, out, level, variables, method, pyramid, pyramid_min_level, min_coverage,
        replace=replace, append=append, overwrite_steps=overwrite_steps, time=time,
        time_block=time_block, spatial_block=spatial_block, keep_versions=keep_versions,
        grace_seconds=grace_seconds, cube_id=cube_id, title=title, time_step=time_step,
        mean_depth=mean_depth, storage_options=storage_options, summary=summary,
        scheduler=scheduler, progress=progress,
    )  # fmt: skip
    src = open_sources(req)
    target = plan_target(req, src)
    runner = Runner(req.scheduler, req.progress)
    try:
        writer = _open_writer(req, src, target)
        result = IngestSummary(
            url=normalize_url(out)[1],
            cube_id=target.cube_id,
            version=writer.version,
            levels=target.levels,
            variables=tuple(target.variables),
            times=int(target.times.size),
            base=writer.base_version,
        )
        try:
            _run(_Run(req, src, target, writer, runner, result))
            result.version = writer.publish()
        except BaseException:
            writer.abort()
            raise
    finally:
        runner.close()
    result.bytes_stored = writer.bytes_written
    result.seconds = perf_counter() - t_start
    return result
