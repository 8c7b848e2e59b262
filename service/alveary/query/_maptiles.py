"""Map tiles of a cube: a tile request bound to one cube version, its one read plan, and
the read.

Like every query, a tile is first resolved without I/O (:func:`resolve_tile`: the cube
version, one variable, one time step, the level, the tile; its ``key`` is the normalised
request an ETag is made from), then planned without I/O (:func:`plan_tile`: the zones
under the tile's pixels, from a :class:`PixelZoneCache`, and the chunks that hold them),
then read (:func:`read_tile`, the only step that touches the store). A tile outside the
cube's coverage has no zones and no chunk to read.

A tile may carry an analysis (:class:`TileAnalysis`): a neighbourhood statistic of the
zones under its pixels (their halo is part of the tile's plan) and a time aggregation of
which the tile shows one period (the one holding ``datetime``) or, for a climatology,
one key. It goes through the hook every per-zone query takes
(:func:`~alveary.query.plan_analysis`, :func:`~alveary.query.apply_analysis`).
"""

from __future__ import annotations

import asyncio
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from alveary import grid
from alveary._errors import DeadlineExceeded, InvalidInput, LimitExceeded
from alveary.cube import ChunkCache, ReadPlan
from alveary.query._analysis import AnalysisPlan, apply_analysis, plan_analysis
from alveary.query._cube import CubeSnapshot
from alveary.query._failures import as_domain_error
from alveary.query._focal import FocalSpec
from alveary.query._models import Selection
from alveary.query._plan import Limits
from alveary.query._result import ResultVariable
from alveary.query._tiles import (
    PixelZoneCache,
    TileZones,
    check_tile,
    default_level,
    tile_intersects,
)
from alveary.query._time import TimeSpec, format_time, parse_datetime, select_times
from alveary.query._timeagg import TimeAggregation, _keys, period_starts

__all__ = [
    "ResolvedTile",
    "TileAnalysis",
    "TilePlan",
    "analysed_range",
    "one_variable",
    "plan_analysed_zones",
    "plan_tile",
    "read_analysed_values",
    "read_tile",
    "read_zone_values",
    "resolve_tile",
    "resolve_tile_analysis",
    "value_range",
]


@dataclass(frozen=True)
class TileAnalysis:
    """The analysis of a tile: ``selection`` carries the statistic, the aggregation and
    (as an interval) the steps the shown period holds; ``r0``, ``r1`` are the steps read
    (with an anomaly or a climatology, the whole time axis); ``key`` the climatology key
    shown (a month 1-12 or a day of the year 1-365), else None; ``period_steps`` the
    number of steps the shown period holds; ``label`` names what is shown."""

    selection: Selection
    r0: int
    r1: int
    key: int | None
    period_steps: int
    label: str

    @property
    def text(self) -> str:
        """The normalised analysis (for cache keys)."""
        return f"{self.selection.analysis_key()}|{self.label}|{self.r0}:{self.r1}"


def _selected_step(time: TimeSpec, times: np.ndarray) -> int:
    t0, t1 = select_times(time, times)
    if t1 - t0 != 1:
        raise InvalidInput(
            "datetime",
            "an interval" if t1 - t0 > 1 else "no time step",
            "one time step: an instant, or an interval holding one step",
        )
    return t0


def _period_of(time: TimeSpec, times: np.ndarray, every: str) -> tuple[int, int, np.datetime64]:
    """The steps ``[s0, s1)`` of the period ``time`` picks: the period holding an instant
    (default: the latest step's); an interval's steps must lie in one period."""
    starts = period_starts(times, every)[0]
    if time.kind == "interval":
        t0, t1 = select_times(time, times)
        picked = np.unique(starts[t0:t1])
        if picked.size != 1:
            found = "no time step" if picked.size == 0 else f"{picked.size} periods"
            raise InvalidInput("datetime", found, f"an instant or an interval within one {every}")
        start = picked[0]
    else:
        when = times[-1] if time.kind == "latest" else time.start
        start = period_starts(np.atleast_1d(np.asarray(when).astype("datetime64[s]")), every)[0][0]
    s0 = int(np.searchsorted(starts, start, side="left"))
    s1 = int(np.searchsorted(starts, start, side="right"))
    if s1 == s0:
        day = format_time(np.atleast_1d(start))[0]
        raise InvalidInput(
            "datetime", str(time.start), f"a {every} period holding time steps (not {day})"
        )
    return s0, s1, start


def resolve_tile_analysis(
    times: np.ndarray,
    time: TimeSpec,
    focal: FocalSpec | None,
    timeagg: TimeAggregation | None,
) -> TileAnalysis | None:
    """What a tile with ``focal`` and ``timeagg`` reads and shows (None: no analysis).

    Without ``every`` or a climatology, ``datetime`` picks one step as for a plain tile;
    with ``every``, the period holding the instant (default: the latest step's period);
    with ``climatology``, the month or day of the year of the instant (default: the
    latest step's), over every year of the axis.

    Examples
    --------
    >>> from alveary.query._timeagg import parse_time_aggregation
    >>> axis = np.arange("2024-01-25", "2024-02-05", dtype="datetime64[D]").astype("datetime64[s]")
    >>> a = resolve_tile_analysis(axis, parse_datetime("2024-01-28"), None, parse_time_aggregation("P1M"))
    >>> a.r0, a.r1, a.period_steps, a.label
    (0, 7, 7, 'P1M:2024-01-01T00:00:00Z')
    """  # noqa: E501
    if focal is None and timeagg is None:
        return None
    times = np.asarray(times).astype("datetime64[s]")
    n = len(times)
    if n == 0:
        raise InvalidInput("datetime", "no time step", "a cube with time steps")
    if timeagg is not None and timeagg.climatology is not None:
        by = timeagg.climatology
        if time.kind == "latest":
            when = times[-1]
        elif time.kind == "interval":
            when = times[_selected_step(time, times)]
        else:
            when = np.asarray(time.start)
        key = int(_keys(np.atleast_1d(np.asarray(when).astype("datetime64[s]")), by)[1][0])
        held = _keys(times, by)[1]
        if not (held == key).any():
            raise InvalidInput("datetime", str(when), f"a {by} the time axis holds")
        sel = Selection(focal=focal, timeagg=timeagg)
        return TileAnalysis(sel, 0, n, key, int((held == key).sum()), f"{by}:{key}")
    if timeagg is not None and timeagg.every is not None:
        s0, s1, start = _period_of(time, times, timeagg.every)
        label = f"{timeagg.every}:{format_time(np.atleast_1d(start))[0]}"
    else:
        s0 = _selected_step(time, times)
        s1, label = s0 + 1, f"step:{s0}"
    span = TimeSpec(
        "interval", times[s0].astype("datetime64[us]"), times[s1 - 1].astype("datetime64[us]")
    )
    sel = Selection(time=span, focal=focal, timeagg=timeagg)
    r0, r1 = (0, n) if timeagg is not None and timeagg.anomaly is not None else (s0, s1)
    return TileAnalysis(sel, r0, r1, None, s1 - s0, label)


def analysed_range(
    lo: float, hi: float, focal: FocalSpec | None, timeagg: TimeAggregation | None, steps: int
) -> tuple[float, float] | None:
    """The default colour range of an analysed variable whose stored range is
    ``[lo, hi]``, without reading anything (so neighbouring tiles agree); None where no
    range follows from the stored one (a gradient: the request must give ``range``).

    A mean, kernel, minimum, maximum, first or last of values in ``[lo, hi]`` lies in it;
    ``count`` lies in ``[0, N]`` (N: a full hexagonal disk, 3k(k+1)+1 zones, or the steps
    of the period shown); ``sum`` of a full disk or period in ``[N lo, N hi]``; ``std`` in
    ``[0, (hi - lo)/2]``; an anomaly (a value minus a mean of values in the range) in
    ``[-(hi - lo), hi - lo]``, centred on zero. Statistic first, then time, as computed.

    >>> analysed_range(0.0, 2.0, FocalSpec("sum", 1), None, 1)
    (0.0, 14.0)
    >>> from alveary.query._timeagg import parse_time_aggregation
    >>> analysed_range(280.0, 290.0, None, parse_time_aggregation(anomaly="month"), 1)
    (-10.0, 10.0)
    >>> analysed_range(280.0, 290.0, FocalSpec("count", 2), parse_time_aggregation("P1M"), 31)
    (0.0, 19.0)
    """

    def through(stat: str, lo: float, hi: float, size: int) -> tuple[float, float] | None:
        if stat == "count":
            return 0.0, float(size)
        if stat == "sum":
            return size * lo, size * hi
        if stat == "std":
            return 0.0, (hi - lo) / 2.0
        if stat == "gradient":
            return None
        return lo, hi  # mean, kernel, min, max, first, last

    found: tuple[float, float] | None = (float(lo), float(hi))
    if focal is not None:
        stat = "kernel" if focal.kernel is not None else focal.statistic
        found = through(stat, float(lo), float(hi), 3 * focal.k * (focal.k + 1) + 1)
    if found is not None and timeagg is not None and timeagg.climatology is None:
        if timeagg.anomaly is not None:
            width = found[1] - found[0]
            found = (-width, width)
        if timeagg.every is not None:
            found = through(timeagg.agg, found[0], found[1], steps)
    if found is None:
        return None
    a, b = found
    return (a, b) if b > a else (a - 0.5, b + 0.5)


@dataclass(frozen=True)
class ResolvedTile:
    """A tile request bound to one cube version: variable, time step and level fixed."""

    cube_id: str
    cube: CubeSnapshot = field(repr=False)
    version: str
    variable: str
    step: int
    level: int
    z: int
    y: int
    x: int
    analysis: TileAnalysis | None = None

    @property
    def time(self) -> np.datetime64:
        return np.datetime64(self.cube.times[self.step])

    @property
    def key(self) -> str:
        """The normalised request: equal for requests that must give equal tiles."""
        return "|".join(
            [
                "tile",
                self.cube_id,
                self.version,
                str(self.level),
                self.variable,
                f"{self.step}:{self.step + 1}",
                f"{self.z}/{self.y}/{self.x}",
            ]
            + ([] if self.analysis is None else [self.analysis.text])
        )


def one_variable(cube: CubeSnapshot, names: tuple[str, ...] | None) -> str:
    """The one variable a picture shows (default: the cube's first).

    Raises :class:`InvalidInput` naming ``vars`` for several or unknown variables.
    """
    have = tuple(cube.variables)
    if not names:
        return have[0]
    if len(names) != 1:
        raise InvalidInput("vars", ",".join(names), "one variable")
    if names[0] not in cube.variables:
        raise InvalidInput("vars", names[0], f"one variable of this cube: {', '.join(have)}")
    return names[0]


def resolve_tile(
    cube_id: str,
    cube: CubeSnapshot,
    z: int,
    y: int,
    x: int,
    *,
    variables: tuple[str, ...] | None = None,
    time: TimeSpec | None = None,
    level: int | None = None,
    target: float | None = None,
    focal: FocalSpec | None = None,
    timeagg: TimeAggregation | None = None,
) -> ResolvedTile:
    """Bind a tile request to a cube version (no I/O).

    ``time`` must select exactly one step (an instant selects the step in force then;
    default: the latest step); ``level`` defaults to the level whose zones are a few
    pixels across at this zoom (:func:`default_level`, ``target`` pixels if given),
    clamped to the cube's levels. With ``focal`` or ``timeagg``, ``time`` picks what
    :func:`resolve_tile_analysis` says.
    """
    z, y, x = check_tile(z, y, x)
    variable = one_variable(cube, variables)
    times = np.asarray(cube.times)
    spec = time if time is not None else parse_datetime(None)
    analysis = resolve_tile_analysis(times, spec, focal, timeagg)
    if analysis is None:
        t0 = _selected_step(spec, times)
    else:
        t0 = analysis.r0 if analysis.key is not None else _first_step(analysis, times)
    levels = tuple(int(v) for v in cube.levels)
    if level is None:
        chosen = default_level(z, y, levels, **({} if target is None else {"target": target}))
    else:
        chosen = int(level)
        if chosen not in levels:
            raise InvalidInput("level", chosen, f"one of the cube's levels {list(levels)}")
    return ResolvedTile(cube_id, cube, cube.version, variable, t0, chosen, z, y, x, analysis)


def _first_step(analysis: TileAnalysis, times: np.ndarray) -> int:
    """The first step of the period or step an analysis shows."""
    start = analysis.selection.time.start
    axis = np.asarray(times).astype("datetime64[us]")
    return int(np.searchsorted(axis, np.asarray(start), side="left"))


@dataclass(frozen=True)
class TilePlan:
    """What a tile needs, computed without I/O: the pixel-to-zone map (None outside the
    cube's coverage) and the one read plan of its zones."""

    resolved: ResolvedTile
    pixels: TileZones | None
    read: ReadPlan | None
    analysis: AnalysisPlan | None = None
    halo_chunks: tuple[str, ...] = ()

    @property
    def chunk_count(self) -> int:
        return 0 if self.read is None else len(self.read)


def _check(limit: str, requested: int, maximum: int) -> None:
    if requested > maximum:
        raise LimitExceeded(limit, requested, maximum)


def plan_analysed_zones(
    cube: CubeSnapshot,
    variables: tuple[str, ...],
    zones: np.ndarray,
    analysis: TileAnalysis,
    limits: Limits | None,
) -> tuple[AnalysisPlan, dict[str, ReadPlan], tuple[str, ...]]:
    """The analysis plan of ``zones``, the read plan of each variable (the zones plus the
    halo over the steps read) and the chunk keys read only for the halo; limits counting
    the halo and the steps read are checked first (:class:`LimitExceeded`)."""
    times = np.asarray(cube.times)
    sel = analysis.selection
    plan = plan_analysis(sel, zones, times, analysis.r0, analysis.r1)
    assert plan is not None
    if limits is not None:
        if sel.focal is not None:
            _check("focal_k", sel.focal.k, limits.max_focal_k)
        n = int(plan.read_zones.size)
        _check("zones read per request (with the halo)", n, limits.max_zones)
        _check("time steps × zones", (analysis.r1 - analysis.r0) * n, limits.max_cells)
    start, end = times[analysis.r0], times[analysis.r1 - 1]
    reads: dict[str, ReadPlan] = {}
    halo: list[str] = []
    for var in variables:
        reads[var] = cube.plan(var, plan.read_zones, start, end)
        if plan.windows is not None:
            own = set(cube.plan(var, plan.targets, start, end).keys)
            halo += [key for key in reads[var].keys if key not in own]
    return plan, reads, tuple(halo)


def plan_tile(
    resolved: ResolvedTile, pixels: PixelZoneCache, limits: Limits | None = None
) -> TilePlan:
    """The tile's zones (from the cache) and the chunks holding them, with the halo and
    the steps an analysis needs (no I/O; ``limits`` checked when given)."""
    r = resolved
    if not tile_intersects(r.z, r.y, r.x, r.cube.coverage):
        return TilePlan(r, None, None)
    tz = pixels.get(r.z, r.y, r.x, r.level)
    if tz.zones.size == 0:
        return TilePlan(r, tz, None)
    if r.analysis is not None:
        plan, reads, halo = plan_analysed_zones(r.cube, (r.variable,), tz.zones, r.analysis, limits)
        return TilePlan(r, tz, reads[r.variable], plan, halo)
    return TilePlan(r, tz, r.cube.plan(r.variable, tz.zones, r.time, r.time))


def _shown(
    analysis: TileAnalysis, out_values: dict[str, np.ndarray], axis: object
) -> dict[str, np.ndarray]:
    """The one row (period, step or climatology key) a tile shows of each output."""
    shown: dict[str, np.ndarray] = {}
    for name, rows in out_values.items():
        rows = np.asarray(rows, dtype=np.float64)
        row = 0
        if analysis.key is not None:
            keys = getattr(axis, "keys", None)
            hits: Any = [] if keys is None else np.nonzero(np.asarray(keys) == analysis.key)[0]
            row = int(hits[0]) if len(hits) else -1
        if row < 0 or rows.shape[0] <= row:
            shown[name] = np.full(rows.shape[1], np.nan)
        else:
            shown[name] = rows[row]
    return shown


def _variable_info(cube: CubeSnapshot, name: str) -> ResultVariable:
    m = cube.variables[name]
    return ResultVariable(name, m.units, m.long_name, m.dtype, m.scale_factor, m.add_offset)


async def read_analysed_values(
    cube: CubeSnapshot,
    analysis: TileAnalysis,
    plan: AnalysisPlan,
    reads: dict[str, ReadPlan],
    cache: ChunkCache | None,
    *,
    deadline: float | None = None,
) -> dict[str, np.ndarray]:
    """Read the planned zones and steps, apply the analysis and give each output
    (``temp``, or ``temp_gradient_magnitude`` and ``..._direction``) one value per
    target zone for the period, step or key shown."""
    steps, n = analysis.r1 - analysis.r0, int(plan.read_zones.size)

    async def one(var: str) -> np.ndarray:
        try:
            out = await cube.execute_async(reads[var], cache)
        except Exception as exc:
            raise as_domain_error(exc, f"chunks of {var!r}") from exc
        return np.asarray(out, dtype=np.float64).reshape(steps, n)

    try:
        async with asyncio.timeout(deadline):
            arrays = await asyncio.gather(*(one(v) for v in reads))
    except TimeoutError:
        raise DeadlineExceeded(f"the tile ran past its deadline of {deadline} s") from None
    values = dict(zip(reads, arrays, strict=True))
    times = np.asarray(cube.times)[analysis.r0 : analysis.r1]
    info = {v: _variable_info(cube, v) for v in reads}
    out = await asyncio.to_thread(apply_analysis, plan, values, times, info)
    return _shown(analysis, out.values, out.axis)


async def read_tile(
    plan: TilePlan, cache: ChunkCache | None, *, deadline: float | None = None
) -> np.ndarray:
    """Values (float, one per zone of the tile; NaN: no data) of a planned tile."""
    if plan.pixels is None:
        return np.zeros(0, dtype=np.float64)
    n = plan.pixels.zones.size
    if plan.read is None or n == 0:
        return np.full(n, np.nan)
    r = plan.resolved
    if plan.analysis is not None and r.analysis is not None:
        shown = await read_analysed_values(
            r.cube, r.analysis, plan.analysis, {r.variable: plan.read}, cache, deadline=deadline
        )
        name = r.variable
        if name not in shown:  # a gradient: the tile shows its magnitude
            name = f"{r.variable}_gradient_magnitude"
        return shown[name]
    try:
        async with asyncio.timeout(deadline):
            out = await plan.resolved.cube.execute_async(plan.read, cache)
    except TimeoutError:
        raise DeadlineExceeded(f"the tile ran past its deadline of {deadline} s") from None
    except Exception as exc:
        raise as_domain_error(exc, f"chunks of {plan.resolved.variable!r}") from exc
    return np.asarray(out, dtype=np.float64).reshape(-1)[:n]


async def value_range(
    cube: CubeSnapshot,
    variable: str,
    level: int,
    cache: ChunkCache | None,
    *,
    max_cells: int,
    deadline: float | None = None,
) -> tuple[float, float]:
    """The range a picture of ``variable`` at ``level`` spans by default.

    The range recorded when the cube was built; for versions built before ranges were
    recorded, the range of the coarsest level's values over every time step, read once
    (at most ``max_cells`` values, else :class:`InvalidInput` asks for ``range``). A
    variable with no value, or a single one, gives a range of width 1 around it.
    """
    found = cube.value_range(variable, level)
    if found is None:
        coarsest = int(min(cube.levels))
        zones = grid.all_zones(coarsest)
        cells = zones.size * len(cube.times)
        if cells > max_cells:
            raise InvalidInput(
                "range",
                None,
                "min,max: this cube records no value range and is too large to scan",
            )
        plan = cube.plan(variable, zones)
        try:
            async with asyncio.timeout(deadline):
                values = await cube.execute_async(plan, cache)
        except TimeoutError:
            raise DeadlineExceeded(f"the range scan ran past {deadline} s") from None
        except Exception as exc:
            raise as_domain_error(exc, f"chunks of {variable!r}") from exc
        finite = np.asarray(values, dtype=np.float64)
        finite = finite[np.isfinite(finite)]
        found = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    lo, hi = found
    if not hi > lo:
        lo, hi = lo - 0.5, hi + 0.5
    return lo, hi


async def read_zone_values(
    cube: CubeSnapshot,
    variables: tuple[str, ...],
    zones: np.ndarray,
    step: int,
    cache: ChunkCache | None,
    *,
    deadline: float | None = None,
) -> dict[str, np.ndarray]:
    """Values (one per zone; NaN: no data) of each variable at one time step."""
    ids = np.asarray(zones, dtype=np.uint64).reshape(-1)
    if ids.size == 0:
        return {v: np.zeros(0) for v in variables}
    when = np.datetime64(cube.times[step])

    async def one(variable: str) -> np.ndarray:
        plan = cube.plan(variable, ids, when, when)
        try:
            out = await cube.execute_async(plan, cache)
        except Exception as exc:
            raise as_domain_error(exc, f"chunks of {variable!r}") from exc
        return np.asarray(out, dtype=np.float64).reshape(-1)[: ids.size]

    try:
        async with asyncio.timeout(deadline):
            arrays = await asyncio.gather(*(one(v) for v in variables))
    except TimeoutError:
        raise DeadlineExceeded(f"the tile ran past its deadline of {deadline} s") from None
    return dict(zip(variables, arrays, strict=True))
