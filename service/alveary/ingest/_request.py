"""The check stage of a build: every argument validated, before any file is opened."""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any

import numpy as np

from alveary import grid
from alveary._errors import IngestError, InvalidInput
from alveary.cube import check_cube_id, normalize_url, parse_time

__all__ = ["METHODS", "MODES", "BuildRequest", "check_request"]

METHODS = ("nearest", "mean")
MODES = ("create", "append", "replace")


@dataclass(frozen=True)
class BuildRequest:
    """A build's arguments, checked. ``cube_id`` None: the published cube's, or from
    ``out``; ``time_block``/``spatial_block`` None: the cube's, or the defaults."""

    sources: tuple[str, ...]
    out: str
    level: int
    variables: tuple[str, ...] | None
    method: str
    levels: tuple[int, ...]
    cube_id: str | None
    title: str | None
    mode: str
    overwrite_steps: bool
    time: np.datetime64 | None
    time_block: int | None
    spatial_block: int | None
    time_step: str
    mean_depth: int | None
    min_coverage: float
    keep_versions: int | None
    grace_seconds: float | None
    storage_options: dict[str, Any] | None
    summary: str
    scheduler: str | None
    progress: bool

    @property
    def default_id(self) -> str:
        """The last part of ``out``, made a valid cube id."""
        name = normalize_url(self.out)[1].rstrip("/").rsplit("/", 1)[-1]
        name = re.sub(r"[^A-Za-z0-9_.-]", "-", name).strip("-.") or "cube"
        return name[:64]


def _level(level: Any) -> int:
    allowed = f"an integer in [0, {grid.MAX_LEVEL}]"
    try:
        value = int(level)
    except (TypeError, ValueError):
        raise IngestError("level", level, allowed) from None
    if not 0 <= value <= grid.MAX_LEVEL:
        raise IngestError("level", level, allowed + " (a level of the grid)")
    return value


def _blocks(time_block: int | None, spatial_block: int | None) -> None:
    if spatial_block is not None:
        sb = int(spatial_block)
        if sb < 1 or sb & (sb - 1):
            raise IngestError("spatial_block", spatial_block, "a power of two, e.g. 64")
    if time_block is not None and int(time_block) < 1:
        raise IngestError("time_block", time_block, "an integer >= 1")


def _mode(replace: bool, append: bool, overwrite_steps: bool) -> str:
    if replace and append:
        raise IngestError("replace", True, "either --append or --replace, not both")
    if overwrite_steps and not append:
        raise IngestError("overwrite_steps", True, "--overwrite-steps together with --append")
    return "replace" if replace else ("append" if append else "create")


def _ids(cube_id: str | None, out: str) -> None:
    try:
        normalize_url(out)
    except InvalidInput as exc:
        raise IngestError("out", out, exc.allowed) from None
    if cube_id is not None:
        try:
            check_cube_id(cube_id)
        except InvalidInput as exc:
            raise IngestError("cube_id", cube_id, exc.allowed) from None


def _retention(keep: int | None, grace: float | None) -> None:
    if keep is not None and int(keep) < 1:
        raise IngestError("keep_versions", keep, "an integer >= 1")
    if grace is not None and not float(grace) >= 0:
        raise IngestError("grace_seconds", grace, "seconds >= 0")


def check_request(
    sources: Any,
    out: str,
    level: Any,
    variables: Any = None,
    method: str = "nearest",
    pyramid: bool = False,
    pyramid_min_level: int = 0,
    min_coverage: float = 0.5,
    *,
    replace: bool = False,
    append: bool = False,
    overwrite_steps: bool = False,
    time: Any = None,
    time_block: int | None = None,
    spatial_block: int | None = None,
    keep_versions: int | None = None,
    grace_seconds: float | None = None,
    cube_id: str | None = None,
    title: str | None = None,
    time_step: str = "1D",
    mean_depth: int | None = None,
    storage_options: dict[str, Any] | None = None,
    summary: str = "",
    scheduler: str | None = None,
    progress: bool = False,
) -> BuildRequest:
    """Check every argument of :func:`alveary.ingest.ingest`; raise ``IngestError``."""
    lv = _level(level)
    if method not in METHODS:
        raise IngestError("method", method, " or ".join(METHODS))
    if not 0.0 <= float(min_coverage) <= 1.0:
        raise IngestError("min_coverage", min_coverage, "a fraction in [0, 1]")
    if pyramid and not 0 <= int(pyramid_min_level) <= lv:
        raise IngestError("pyramid_min_level", pyramid_min_level, f"an integer in [0, {lv}]")
    if not sources:
        raise IngestError("sources", sources, "one or more source files")
    _blocks(time_block, spatial_block)
    _ids(cube_id, out)
    _retention(keep_versions, grace_seconds)
    instant = None
    if time is not None:
        try:
            instant = parse_time(time, "time")
        except InvalidInput as exc:
            raise IngestError("time", time, exc.allowed) from None
    return BuildRequest(
        sources=tuple(str(s) for s in sources),
        out=out,
        level=lv,
        variables=tuple(variables) if variables else None,
        method=method,
        levels=tuple(range(int(pyramid_min_level), lv + 1)) if pyramid else (lv,),
        cube_id=cube_id,
        title=title,
        mode=_mode(replace, append, overwrite_steps),
        overwrite_steps=bool(overwrite_steps),
        time=instant,
        time_block=None if time_block is None else int(time_block),
        spatial_block=None if spatial_block is None else int(spatial_block),
        time_step=str(time_step),
        mean_depth=None if mean_depth is None else int(mean_depth),
        min_coverage=float(min_coverage),
        keep_versions=keep_versions,
        grace_seconds=grace_seconds,
        storage_options=storage_options,
        summary=str(summary),
        scheduler=scheduler,
        progress=bool(progress),
    )
