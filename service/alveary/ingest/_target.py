"""The plan stage of a build: what the new version holds, against the published one.

A build into a location that holds a published cube is refused, before anything is
written, when the result would differ from it (variables, levels, time axis, chunking,
title), unless it replaces the cube or appends to it. The error names each difference.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from alveary._errors import CubeFormatError, IngestError, NotFound
from alveary.cube import (
    DEFAULT_SPATIAL_BLOCK,
    DEFAULT_TIME_BLOCK,
    ChunkShape,
    CubeMeta,
    VariableInfo,
    open_cube,
)
from alveary.ingest._request import BuildRequest
from alveary.ingest._sources import BBox, Sources, union_bbox

__all__ = ["Target", "plan_target"]

_STORAGE = ("dtype", "units", "scale_factor", "add_offset", "fill_value", "aggregation")


@dataclass(frozen=True, eq=False)
class Target:
    """The version a build writes."""

    cube_id: str
    title: str
    times: NDArray[np.datetime64] = field(repr=False)
    variables: dict[str, VariableInfo]
    levels: tuple[int, ...]
    chunks: dict[int, ChunkShape]
    coverage: BBox
    inherit: bool
    extra: dict[str, Any] = field(default_factory=dict)


def _published(req: BuildRequest) -> CubeMeta | None:
    try:
        return open_cube(req.out, storage_options=req.storage_options).meta
    except NotFound:
        return None
    except CubeFormatError as exc:
        raise IngestError("out", req.out, message=f"--out {req.out}: {exc}") from None


def _chunks(req: BuildRequest, ntimes: int, old: CubeMeta | None) -> dict[int, ChunkShape]:
    """Chunk shapes: as asked, else the published cube's, else the defaults."""
    out = {}
    for lv in req.levels:
        was = old.chunks.get(lv) if old is not None else None
        t = req.time_block or (was.time if was else min(DEFAULT_TIME_BLOCK, ntimes))
        sb = req.spatial_block or (was.cols if was else DEFAULT_SPATIAL_BLOCK)
        if was is not None and req.spatial_block is None:
            out[lv] = ChunkShape(int(t), was.rows, was.cols)
        else:
            out[lv] = ChunkShape(int(t), min(sb, 2 << lv), min(sb, 1 << lv))
    return out


def _storage(info: VariableInfo) -> tuple[Any, ...]:
    return tuple(
        "NaN" if k == "fill_value" and info.fill_value != info.fill_value else getattr(info, k)
        for k in _STORAGE
    )


def _axis(times: NDArray[np.datetime64]) -> str:
    return f"{times.size} steps {times[0]}Z..{times[-1]}Z" if times.size else "no steps"


def _differences(old: CubeMeta, new: Target) -> list[str]:
    """Every way ``new`` differs from the published ``old``, in words."""
    out = []
    if old.title != new.title:
        out.append(f"title {old.title!r} -> {new.title!r}")
    gone = sorted(set(old.variables) - set(new.variables))
    added = sorted(set(new.variables) - set(old.variables))
    if gone:
        out.append("variables removed: " + ", ".join(gone))
    if added:
        out.append("variables added: " + ", ".join(added))
    for name in sorted(set(old.variables) & set(new.variables)):
        if _storage(old.variables[name]) != _storage(new.variables[name]):
            out.append(
                f"variable {name!r} stored differently ({_storage(old.variables[name])} -> "
                f"{_storage(new.variables[name])})"
            )
    if old.levels != new.levels:
        out.append(f"levels {list(old.levels)} -> {list(new.levels)}")
    if not np.array_equal(old.times, new.times):
        out.append(f"time axis {_axis(old.times)} -> {_axis(new.times)}")
    for lv in sorted(set(old.levels) & set(new.levels)):
        if old.chunks[lv] != new.chunks[lv]:
            a, b = old.chunks[lv], new.chunks[lv]
            out.append(
                f"chunks at level {lv} (time, rows, cols) {(a.time, a.rows, a.cols)} -> "
                f"{(b.time, b.rows, b.cols)}"
            )
    return out


def _append_times(
    req: BuildRequest, src: Sources, old: CubeMeta
) -> tuple[NDArray[np.datetime64], list[str]]:
    """The grown time axis, and the reasons an append cannot be made."""
    problems = []
    last = old.times[-1]
    new = src.times[~np.isin(src.times, old.times)]
    early = new[new < last]
    if early.size:
        problems.append(
            f"{early.size} time step(s) fall between the cube's steps (first {early[0]}Z); "
            f"appending adds steps after its last step {last}Z"
        )
    if not req.overwrite_steps:
        for name in sorted(set(src.variables) & set(old.variables)):
            hit = old.times[src.defined(name, old.times)]
            if hit.size:
                problems.append(
                    f"variable {name!r} already has {hit.size} of these time steps "
                    f"({hit[0]}Z..{hit[-1]}Z); add --overwrite-steps to replace them"
                )
    return np.concatenate([old.times, np.sort(new[new > last])]), problems


def _append(req: BuildRequest, src: Sources, old: CubeMeta, cube_id: str) -> Target:
    times, problems = _append_times(req, src, old)
    variables = dict(old.variables)
    for name, info in src.variables.items():
        if name in old.variables and _storage(info) != _storage(old.variables[name]):
            problems.append(
                f"variable {name!r} is stored as {_storage(old.variables[name])} in the cube, "
                f"the sources give {_storage(info)}"
            )
        variables.setdefault(name, info)
    if old.levels != req.levels:
        problems.append(f"levels {list(old.levels)} in the cube, {list(req.levels)} asked")
    chunks = _chunks(req, times.size, old)
    for lv in sorted(set(old.levels) & set(chunks)):
        if old.chunks[lv] != chunks[lv]:
            problems.append(
                f"chunks at level {lv}: {old.chunks[lv]} in the cube, {chunks[lv]} asked"
            )
    if req.title is not None and req.title != old.title:
        problems.append(f"title {old.title!r} in the cube, {req.title!r} asked")
    if problems:
        raise IngestError(
            "append",
            req.out,
            message=f"cannot append to cube {cube_id!r} at {req.out}: " + "; ".join(problems),
        )
    coverage = union_bbox([old.coverage, src.coverage()])
    return Target(
        cube_id, old.title, times, variables, old.levels, chunks, coverage, True, dict(old.extra)
    )


def plan_target(req: BuildRequest, src: Sources) -> Target:
    """Decide what the new version holds; refuse a build that would change the published
    cube unless it replaces or appends (the error names every difference)."""
    old = _published(req)
    cube_id = req.cube_id or (old.id if old is not None else req.default_id)
    if old is not None and old.id != cube_id:
        raise IngestError(
            "cube_id", cube_id, f"{old.id!r}: the store at {req.out} already holds cube {old.id!r}"
        )
    extra = {"method": req.method, "finest_level": req.level}
    if old is not None and req.mode == "append":
        target = _append(req, src, old, cube_id)
        return Target(**{**target.__dict__, "extra": {**target.extra, **extra}})
    title = req.title or (old.title if old is not None else cube_id)
    target = Target(
        cube_id,
        title,
        src.times,
        dict(src.variables),
        req.levels,
        _chunks(req, src.times.size, None),
        src.coverage(),
        False,
        extra,
    )
    if old is not None and req.mode == "create":
        diffs = _differences(old, target)
        if diffs:
            raise IngestError(
                "out",
                req.out,
                message=(
                    f"--out {req.out} holds cube {cube_id!r} and this build differs from its "
                    "published version: " + "; ".join(diffs) + ". Nothing was written. Use "
                    "--append to add time steps or variables, or --replace to publish this "
                    "build in its place."
                ),
            )
    return target
