"""``ingest``: build a cube from rasters and point tables, split by chunks, on dask."""

from __future__ import annotations

import itertools
import math
import os
import re
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from alveary import grid
from alveary._errors import CubeFormatError, IngestError, InvalidInput
from alveary.cube import ChunkShape, VariableInfo, create_cube, normalize_url
from alveary.cube._layout import DEFAULT_SPATIAL_BLOCK, DEFAULT_TIME_BLOCK
from alveary.cube._meta import MAX_LEVEL, check_cube_id
from alveary.ingest._points import PointBins, bin_points
from alveary.ingest._raster import RasterSource, open_geotiffs, open_xarray_sources
from alveary.ingest._tasks import APEX, LevelJob, TaskResult, chunk_zones, run_task

__all__ = ["IngestSummary", "ingest"]

_TIFF = (".tif", ".tiff", ".gtiff")
_NETCDF = (".nc", ".nc4", ".netcdf", ".cdf", ".h5", ".hdf5")
_TABLE = (".csv", ".parquet", ".pq")
METHODS = ("nearest", "mean")


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

    @property
    def total_zones(self) -> int:
        return int(sum(self.zones_written.values()))

    @property
    def zones_per_second(self) -> float:
        return self.total_zones / self.seconds if self.seconds > 0 else math.inf

    def text(self) -> str:
        per = ", ".join(f"level {k}: {v}" for k, v in sorted(self.zones_written.items()))
        return (
            f"cube {self.cube_id} version {self.version} at {self.url}\n"
            f"  variables: {', '.join(self.variables)}; time steps: {self.times}\n"
            f"  zones written: {self.total_zones} ({per})\n"
            f"  chunks: {self.chunks_written}; bytes: {self.bytes_stored}; "
            f"seconds: {self.seconds:.1f}"
        )


def _classify(path: str) -> str:
    p = Path(path)
    low = path.lower().rstrip("/")
    if low.endswith(".zarr") or (
        p.is_dir() and ((p / "zarr.json").exists() or (p / ".zgroup").exists())
    ):
        kind = "xarray"
    elif p.suffix.lower() in _TIFF:
        kind = "gtiff"
    elif p.suffix.lower() in _NETCDF:
        kind = "xarray"
    elif p.suffix.lower() in _TABLE:
        kind = "points"
    else:
        raise IngestError(
            "source", path, "a GeoTIFF (.tif), NetCDF (.nc), Zarr (.zarr), CSV or Parquet file"
        )
    if not p.exists():
        raise IngestError("source", path, "an existing, readable file (unreadable file)")
    if p.is_file() and not os.access(p, os.R_OK):
        raise IngestError("source", path, "a readable file (unreadable file)")
    return kind


def _default_id(out: str) -> str:
    name = normalize_url(out)[1].rstrip("/").rsplit("/", 1)[-1]
    name = re.sub(r"[^A-Za-z0-9_.-]", "-", name).strip("-.") or "cube"
    return name[:64]


def _auto_depth(level: int, pixel_m: float) -> int:
    """Levels below the target at which the area mean samples the source (1..3).

    Enough that sub-zones are about the size of a source pixel, at most 3 (64
    sub-zones per zone), at least 1.
    """
    zone_m = math.sqrt(grid.zone_area(level))
    if pixel_m <= 0:
        return 3
    return int(min(3, max(1, math.ceil(math.log2(max(1.0, zone_m / pixel_m))))))


def _candidate_chunks(layout, bboxes: list[tuple[float, float, float, float]], pad_deg: float):
    """Spatial chunks that may hold data, from the sources' lon/lat boxes."""
    chunks: set[tuple[int, int, int]] = set()
    for w, s, e, n in bboxes:
        if (e - w) >= 359.0 and s <= -89.0 and n >= 89.0:
            return [tuple(int(x) for x in c) for c in layout.all_spatial_chunks()]
        w2 = w - pad_deg if w - pad_deg >= -180 else w - pad_deg + 360
        e2 = e + pad_deg if e + pad_deg <= 180 else e + pad_deg - 360
        s2, n2 = max(-90.0, s - pad_deg), min(90.0, n + pad_deg)
        zones = grid.zones_in_bbox(w2, s2, e2, n2, layout.level)
        if zones.size == 0:
            zones = np.atleast_1d(grid.point_to_zone((s + n) / 2, (w + e) / 2, layout.level))
        _, region, i, j = (np.asarray(x) for x in grid.zone_to_index(zones))
        strip = region < 5
        rb, cb, _, _ = layout.spatial_chunk(i[strip], j[strip])
        chunks.update(zip(region[strip].tolist(), rb.tolist(), cb.tolist(), strict=True))
    return sorted(chunks)


def _parent_chunks(layout_coarse, layout_fine, fine_chunks) -> list[tuple[int, int, int]]:
    """Chunks of the coarser level whose zones have children in the given fine chunks."""
    out: set[tuple[int, int, int]] = set()
    for region, rb, cb in fine_chunks:
        z = chunk_zones(layout_fine, region, rb, cb)
        p = grid.zone_parent(z)
        _, pr, pi, pj = (np.asarray(x) for x in grid.zone_to_index(p))
        strip = pr < 5
        prb, pcb, _, _ = layout_coarse.spatial_chunk(pi[strip], pj[strip])
        out.update(zip(pr[strip].tolist(), prb.tolist(), pcb.tolist(), strict=True))
    return sorted(out)


class _Runner:
    """Runs tasks on dask: local threads, or a dask.distributed cluster."""

    def __init__(self, scheduler: str | None, progress: bool) -> None:
        self.client = None
        self.progress = progress
        if scheduler:
            try:
                from distributed import Client

                self.client = Client(scheduler, timeout="10s", set_as_default=False)
            except (OSError, TimeoutError, ValueError) as exc:
                raise IngestError(
                    "scheduler", scheduler, f"the address of a running dask scheduler ({exc})"
                ) from None

    def close(self) -> None:
        if self.client is not None:
            self.client.close()

    def run(self, calls: list[tuple], label: str) -> list[TaskResult]:
        if not calls:
            return []
        bar = None
        if self.progress:
            from tqdm import tqdm

            bar = tqdm(total=len(calls), desc=label, unit="chunk", file=sys.stderr, leave=False)
        try:
            if self.client is None:
                return self._threads(calls, bar)
            return self._distributed(calls, bar)
        finally:
            if bar is not None:
                bar.close()

    def _threads(self, calls, bar) -> list[TaskResult]:
        import dask
        from dask.callbacks import Callback

        tasks = [dask.delayed(run_task, pure=False)(*c) for c in calls]

        class _Tick(Callback):
            def _posttask(self, key, result, dsk, state, worker_id):
                if bar is not None and isinstance(result, TaskResult):
                    bar.update(1)

        with _Tick():
            return list(dask.compute(*tasks, scheduler="threads"))

    def _distributed(self, calls, bar) -> list[TaskResult]:
        from distributed import as_completed

        futures = [self.client.submit(run_task, *c, pure=False) for c in calls]
        results = []
        for fut in as_completed(futures, loop=self.client.loop):
            results.append(fut.result())
            if bar is not None:
                bar.update(1)
        return results


def _split_time(nblocks: int, nchunks: int, target: int = 8) -> list[list[int]]:
    groups = max(1, min(nblocks, -(-target // max(1, nchunks))))
    edges = np.linspace(0, nblocks, groups + 1).round().astype(int)
    return [list(range(a, b)) for a, b in itertools.pairwise(edges.tolist()) if b > a]


def _open_sources(sources, variables, level, time_step):
    kinds: dict[str, list[str]] = {}
    for src in sources:
        kinds.setdefault(_classify(str(src)), []).append(str(src))
    rasters: dict[str, RasterSource] = {}
    points: dict[str, PointBins] = {}
    names = list(variables) if variables else None
    if "gtiff" in kinds:
        rasters.update(open_geotiffs(kinds["gtiff"], names))
    if "xarray" in kinds:
        for k, v in open_xarray_sources(kinds["xarray"], names).items():
            if k in rasters:
                raise IngestError("variable", k, "a variable coming from one kind of source")
            rasters[k] = v
    if "points" in kinds:
        for k, v in bin_points(kinds["points"], names, level, time_step).items():
            if k in rasters or f"{k}_count" in rasters:
                raise IngestError("variable", k, "a variable coming from one kind of source")
            points[k] = v
    if names:
        found = set(rasters) | set(points)
        missing = [n for n in names if n not in found]
        if missing and not ("gtiff" in kinds and len(names) == 1):
            raise IngestError("variable", missing[0], f"a variable in the sources: {sorted(found)}")
    return rasters, points


def _variable_info(src: RasterSource) -> VariableInfo:
    kw: dict[str, Any] = {"units": src.units or "1", "long_name": src.long_name or src.name}
    if src.packing:
        kw.update(src.packing)
    return VariableInfo.from_any(src.name, kw)


def ingest(
    sources,
    out: str,
    level: int,
    variables=None,
    method: str = "nearest",
    pyramid: bool = False,
    cube_id: str | None = None,
    scheduler: str | None = None,
    *,
    title: str | None = None,
    storage_options: dict | None = None,
    mean_depth: int | None = None,
    min_coverage: float = 0.5,
    pyramid_min_level: int = 0,
    time_block: int = DEFAULT_TIME_BLOCK,
    spatial_block: int = DEFAULT_SPATIAL_BLOCK,
    time_step: str = "1D",
    progress: bool = False,
    summary: str = "",
) -> IngestSummary:
    """Build (a new version of) the cube at ``out`` from rasters and point tables.

    Everything is checked before anything is written: unreadable files, unknown CRS,
    missing variables, mismatched grids between files, a level outside the grid and a
    target that holds a different cube all raise :class:`alveary.IngestError`. A build
    that fails later removes its unpublished version; the published one stays.

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
        The cube's id (default: the last part of ``out``).
    scheduler:
        Address of a dask.distributed scheduler; default: local threads.
    mean_depth:
        Levels below ``level`` at which ``mean`` samples (default: from the pixel size).
    min_coverage:
        Share of a zone's area that must have data for the area mean to give a value.
    """
    t_start = time.perf_counter()
    try:
        level = int(level)
    except (TypeError, ValueError):
        raise IngestError("level", level, f"an integer in [0, {MAX_LEVEL}]") from None
    if not 0 <= level <= MAX_LEVEL:
        raise IngestError("level", level, f"an integer in [0, {MAX_LEVEL}] (a level of the grid)")
    if method not in METHODS:
        raise IngestError("method", method, " or ".join(METHODS))
    if not 0.0 <= float(min_coverage) <= 1.0:
        raise IngestError("min_coverage", min_coverage, "a fraction in [0, 1]")
    if pyramid and not 0 <= int(pyramid_min_level) <= level:
        raise IngestError("pyramid_min_level", pyramid_min_level, f"an integer in [0, {level}]")
    if not sources:
        raise IngestError("sources", sources, "one or more source files")
    sb, tb = int(spatial_block), int(time_block)
    if sb < 1 or sb & (sb - 1):
        raise IngestError("spatial_block", spatial_block, "a power of two, e.g. 64")
    if tb < 1:
        raise IngestError("time_block", time_block, "an integer >= 1")
    try:
        cube_id = check_cube_id(cube_id or _default_id(out))
    except InvalidInput as exc:
        raise IngestError("cube_id", cube_id, exc.allowed) from None
    try:
        normalize_url(out)
    except InvalidInput as exc:
        raise IngestError("out", out, exc.allowed) from None

    rasters, points = _open_sources(sources, variables, level, time_step)
    if not rasters and not points:
        raise IngestError("sources", sources, "at least one variable")

    all_times = [s.times for s in rasters.values()] + [p.times for p in points.values()]
    times = np.unique(np.concatenate(all_times)).astype("datetime64[s]")
    var_infos: dict[str, VariableInfo] = {k: _variable_info(s) for k, s in rasters.items()}
    for k in points:
        var_infos[k] = VariableInfo(k, long_name=f"mean of {k} per zone")
        var_infos[f"{k}_count"] = VariableInfo(
            f"{k}_count", units="1", long_name=f"number of {k} points", aggregation="sum"
        )
    levels = list(range(int(pyramid_min_level), level + 1)) if pyramid else [level]
    bboxes = [s.lonlat_bounds() for s in rasters.values()] + [p.bbox for p in points.values()]
    coverage = _union_bbox(bboxes)
    chunks = {
        lv: ChunkShape(
            min(time_block, times.size), min(spatial_block, 2 << lv), min(spatial_block, 1 << lv)
        )
        for lv in levels
    }
    source_text = ", ".join(Path(str(s)).name for s in sources)
    runner = _Runner(scheduler, progress)  # an unreachable scheduler fails before writing
    try:
        writer = create_cube(
            out,
            cube_id=cube_id,
            title=title or cube_id,
            times=times,
            levels=levels,
            variables=var_infos,
            chunks=chunks,
            coverage=coverage,
            storage_options=storage_options,
            summary=summary,
            source=source_text,
            history=f"alveary ingest --level {level} --method {method}"
            + (" --pyramid" if pyramid else ""),
            extra={"method": method, "finest_level": level},
        )
    except CubeFormatError as exc:
        runner.close()
        raise IngestError("out", out, exc.allowed, message=f"--out {out}: {exc}") from None
    except BaseException:
        runner.close()
        raise

    try:
        result = IngestSummary(
            url=normalize_url(out)[1],
            cube_id=cube_id,
            version=writer.version,
            levels=tuple(levels),
            variables=tuple(var_infos),
            times=int(times.size),
        )
        layout = writer.layouts[level]
        nblocks = layout.chunk_grid[0]
        written: list[tuple[int, int, int]] = []
        if rasters:
            steps = {k: _step_map(times, s.times) for k, s in rasters.items()}
            pixel = min(s.pixel_size_m() for s in rasters.values())
            depth = 0
            if method == "mean":
                depth = int(mean_depth) if mean_depth is not None else _auto_depth(level, pixel)
            job = LevelJob(
                level,
                layout,
                writer.sink,
                "sources",
                rasters,
                steps,
                method,
                depth,
                float(min_coverage),
            )
            pad = math.degrees(2.0 * math.sqrt(grid.zone_area(level)) / 6_371_007.0)
            cand = _candidate_chunks(layout, [s.lonlat_bounds() for s in rasters.values()], pad)
            tgroups = _split_time(nblocks, len(cand))
            calls = [(job, c, g) for c in cand for g in tgroups]
            calls += [(job, APEX, g) for g in tgroups]
            res = runner.run(calls, f"level {level}")
            written += _collect(result, level, res)
        if points:
            res = runner.run(_point_calls(writer, layout, times, points), f"level {level} points")
            written += _collect(result, level, res)
        fine_chunks = sorted(set(written))
        for lv in reversed(levels[:-1]):
            lay = writer.layouts[lv]
            cand = _parent_chunks(lay, writer.layouts[lv + 1], fine_chunks)
            job = LevelJob(lv, lay, writer.sink, "pyramid", min_coverage=float(min_coverage))
            tgroups = _split_time(lay.chunk_grid[0], len(cand))
            calls = [(job, c, g) for c in cand for g in tgroups] + [(job, APEX, g) for g in tgroups]
            res = runner.run(calls, f"level {lv}")
            fine_chunks = sorted(set(_collect(result, lv, res)))
        result.version = writer.publish()
        result.bytes_stored = writer.stored_bytes()
    except BaseException:
        try:
            writer.abort()
        except Exception:  # pragma: no cover - best effort clean-up
            pass
        raise
    finally:
        runner.close()
    result.seconds = time.perf_counter() - t_start
    return result


def _collect(summary: IngestSummary, level: int, results: list[TaskResult]):
    """Add task counters to the summary; return the spatial chunks that got data."""
    per_chunk: dict[tuple, int] = {}
    for r in results:
        summary.chunks_written += r.chunks_written
        per_chunk[r.chunk] = max(per_chunk.get(r.chunk, 0), r.zones_with_data)
    summary.zones_written[level] = summary.zones_written.get(level, 0) + sum(per_chunk.values())
    return [c for c, n in per_chunk.items() if n > 0 and c != APEX]


def _step_map(times: np.ndarray, own: np.ndarray) -> np.ndarray:
    idx = np.searchsorted(own, times)
    idx = np.clip(idx, 0, own.size - 1)
    return np.where(own[idx] == times, idx, -1).astype(np.int64)


def _union_bbox(boxes) -> tuple[float, float, float, float]:
    ws, ss, es, ns = zip(*boxes, strict=True)
    s, n = max(-90.0, min(ss)), min(90.0, max(ns))
    if any(w > e for w, e in zip(ws, es, strict=True)) or (max(es) - min(ws)) >= 359.0:
        if len(boxes) == 1:
            return (ws[0], s, es[0], n)
        return (-180.0, s, 180.0, n)
    return (max(-180.0, min(ws)), s, min(180.0, max(es)), n)


def _point_calls(writer, layout, times, points: dict[str, PointBins]) -> list[tuple]:
    job = LevelJob(layout.level, layout, writer.sink, "points")
    per_chunk: dict[tuple, dict[str, tuple]] = {}
    for name, pb in points.items():
        tmap = np.searchsorted(times, pb.times)[pb.tindex]
        _, region, i, j = (np.asarray(x) for x in grid.zone_to_index(pb.zones))
        rb, cb, di, dj = layout.spatial_chunk(i, j)
        apex = region >= 5
        key_region = np.where(apex, -1, region)
        key_rb = np.where(apex, -1, rb)
        key_cb = np.where(apex, -1, cb)
        cell = np.where(apex, region - 5, di * layout.chunks.cols + dj)
        keys = np.stack([key_region, key_rb, key_cb], axis=1)
        uniq, inv = np.unique(keys, axis=0, return_inverse=True)
        inv = inv.ravel()
        for u in range(uniq.shape[0]):
            sel = inv == u
            chunk = tuple(int(x) for x in uniq[u])
            d = per_chunk.setdefault(chunk, {})
            d[name] = (tmap[sel], cell[sel], pb.mean[sel])
            d[f"{name}_count"] = (tmap[sel], cell[sel], pb.count[sel])
    calls = []
    all_blocks = list(range(layout.chunk_grid[0]))
    for chunk, payload in sorted(per_chunk.items()):
        calls.append((job, chunk, all_blocks, payload))
    return calls
