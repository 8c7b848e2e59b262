"""The analysis hook of every per-zone query: what to read, and what to make of it.

A query's :class:`~alveary.query.Selection` may carry a neighbourhood statistic
(``focal``) and a time aggregation (``timeagg``). Three pure steps put them into the
query path, and any code that turns zones into values (the area queries here, map tiles
elsewhere) can take the same three:

1. :func:`analysis_steps` (in ``resolve``): the time steps to read. Calendar periods
   are read whole (the period holding the first selected step through the one holding
   the last); an anomaly reads the whole time axis (its climatology is taken over all of
   the cube's years) and answers for the selected steps; a climatology reads the steps
   ``datetime`` selects, or the whole axis when ``datetime`` is not given.
2. :func:`plan_analysis` (in ``make_plan``): the zones to read, the targets plus a halo
   k zones wide (:func:`alveary.grid.disk_windows`), and which rows of the read form the
   answer.
3. :func:`apply_analysis` (after the read): the neighbourhood statistic on every step,
   then the time aggregation; output variables with their units, the result's time axis
   (periods with bounds, or climatology keys) and JSON-ready metadata.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from alveary import grid
from alveary.query._focal import FocalSpec, apply_focal
from alveary.query._models import Selection
from alveary.query._result import ResultVariable, TimeAxis
from alveary.query._time import format_time, select_times
from alveary.query._timeagg import (
    Climatology,
    TimeAggregation,
    aggregate_periods,
    anomaly,
    climatology,
    period_starts,
)

__all__ = [
    "AnalysedValues",
    "AnalysisPlan",
    "analysis_steps",
    "apply_analysis",
    "plan_analysis",
    "time_axis_json",
]

FloatArray = npt.NDArray[np.float64]


def _whole_periods(times: np.ndarray, t0: int, t1: int, every: str) -> tuple[int, int]:
    """Widen ``[t0, t1)`` to whole calendar periods of the (ascending) time axis."""
    if t1 <= t0:
        return t0, t1
    start = period_starts(np.asarray(times), every)[0].astype(np.int64)
    r0 = int(np.searchsorted(start, start[t0], side="left"))
    r1 = int(np.searchsorted(start, start[t1 - 1], side="right"))
    return r0, r1


def _output_steps(selection: Selection, times: np.ndarray, t0: int, t1: int) -> tuple[int, int]:
    """The steps whose values (or periods) the answer gives, in the cube's time axis."""
    agg = selection.timeagg
    if agg is not None and agg.every is not None:
        return _whole_periods(times, t0, t1, agg.every)
    return t0, t1


def analysis_steps(selection: Selection, times: np.ndarray, t0: int, t1: int) -> tuple[int, int]:
    """The time steps ``[r0, r1)`` a query must read, given the steps ``[t0, t1)`` its
    ``datetime`` selects (see the module docstring).

    Examples
    --------
    >>> from alveary.query._timeagg import parse_time_aggregation
    >>> axis = np.arange("2024-01-25", "2024-02-05", dtype="datetime64[D]")
    >>> analysis_steps(Selection(timeagg=parse_time_aggregation("P1M")), axis, 10, 11)
    (7, 11)
    >>> analysis_steps(Selection(timeagg=parse_time_aggregation(anomaly="month")), axis, 10, 11)
    (0, 11)
    """
    agg = selection.timeagg
    n = len(times)
    if agg is None or n == 0:
        return t0, t1
    if agg.anomaly is not None:
        return 0, n
    if agg.climatology is not None:
        return (0, n) if selection.time.kind == "latest" else (t0, t1)
    return _output_steps(selection, times, t0, t1)


@dataclass(frozen=True, eq=False)
class AnalysisPlan:
    """What a read must fetch for the analysis, and which of it the answer is about.

    ``targets`` are the distinct zones answered for; ``read_zones`` what is read (the
    targets plus the focal halo, ids ascending, or the targets themselves); ``windows``
    the disk windows (None without a neighbourhood statistic); ``output`` the rows of the
    read time range the answer covers (the rest feeds a climatology only).
    """

    focal: FocalSpec | None
    timeagg: TimeAggregation | None
    targets: np.ndarray
    read_zones: np.ndarray
    windows: Any
    output: slice

    @property
    def halo(self) -> np.ndarray:
        """The zones read only for the neighbourhood statistic."""
        if self.windows is None:
            return np.zeros(0, dtype=np.uint64)
        return np.asarray(self.windows.halo)

    @property
    def nbytes(self) -> int:
        """Memory held beyond the plan's own zone arrays (``targets`` and ``read_zones``
        are those arrays): the windows' index arrays."""
        if self.windows is None:
            return 0
        total = sum(
            t.source.nbytes + t.rows.nbytes + t.cols.nbytes + t.out.nbytes
            for t in self.windows.tiles
        )
        ex = self.windows.exact
        total += ex.members.nbytes + ex.steps.nbytes + ex.area.nbytes + 3 * ex.out.nbytes
        return int(total)


def plan_analysis(
    selection: Selection, targets: np.ndarray, times: np.ndarray, t0: int, t1: int
) -> AnalysisPlan | None:
    """The read of a query's ``targets`` over the steps ``[t0, t1)`` it reads (from
    :func:`analysis_steps`); None when the selection asks for no analysis. Pure.

    Examples
    --------
    >>> z = grid.point_to_zone(45.0, 7.0, 9)
    >>> p = plan_analysis(Selection(focal=FocalSpec("mean", 1)), np.atleast_1d(z), None, 0, 1)
    >>> p.read_zones.size, p.halo.size, p.output
    (7, 6, slice(0, 1, None))
    """
    if selection.focal is None and selection.timeagg is None:
        return None
    targets = np.asarray(targets, dtype=np.uint64)
    windows = None
    read_zones = targets
    if selection.focal is not None:
        windows = grid.disk_windows(targets, selection.focal.k)
        read_zones = np.asarray(windows.needed)
    output = slice(0, t1 - t0)
    agg = selection.timeagg
    if agg is not None and agg.climatology is None and agg.anomaly is not None and t1 > t0:
        axis = np.asarray(times)
        o0, o1 = select_times(selection.time, axis)
        o0, o1 = _output_steps(selection, axis, o0, o1)
        output = slice(max(o0, t0) - t0, max(min(o1, t1), o0) - t0)
    return AnalysisPlan(selection.focal, agg, targets, read_zones, windows, output)


@dataclass
class AnalysedValues:
    """The outcome of :func:`apply_analysis`.

    ``values`` maps output name -> ``(rows, targets)``; ``variables`` the outputs' CF
    attributes; ``times`` the rows' instants (period starts; empty for a climatology);
    ``axis`` periods or climatology keys (None for plain steps); ``meta`` JSON-ready
    metadata of what was computed.
    """

    values: dict[str, FloatArray]
    variables: dict[str, ResultVariable]
    times: np.ndarray
    axis: TimeAxis | None
    meta: dict[str, Any]


_DIRECTION = "gradient_direction"
# Statistics that pick one of the values (so they keep the stored type for printing).
_PICKS = ("min", "max", "first", "last")


def _focal_variable(
    info: ResultVariable, name: str, output: str, spec: FocalSpec
) -> ResultVariable:
    disk = f"within {spec.k} step{'s' if spec.k != 1 else ''}"
    if output == "count":
        return ResultVariable(name, "1", f"zones with data of {info.name} {disk}")
    if output == _DIRECTION:
        return ResultVariable(name, "degree", f"direction of steepest rise of {info.name}")
    if output == "gradient_magnitude":
        units = f"{info.units} m-1" if info.units and info.units != "1" else "m-1"
        return ResultVariable(name, units, f"gradient of {info.name} (plane fit {disk})")
    label = "ring-weighted mean" if output == "kernel" else output
    long_name = f"{info.long_name or info.name}, {label} {disk}"
    if output in _PICKS:  # one of the stored values: printed as stored
        return replace(info, name=name, long_name=long_name)
    return ResultVariable(name, info.units, long_name)


def _time_variable(info: ResultVariable, agg: TimeAggregation) -> ResultVariable:
    if agg.climatology is not None:
        return ResultVariable(info.name, info.units, f"{info.long_name}, mean by {agg.climatology}")
    long_name = info.long_name
    if agg.anomaly is not None:
        long_name = f"{long_name}, anomaly from the mean by {agg.anomaly}"
    if agg.every is not None:
        if agg.agg == "count":
            return ResultVariable(info.name, "1", f"steps with data of {info.name} per {agg.every}")
        long_name = f"{long_name}, {agg.agg} per {agg.every}"
        if agg.anomaly is None and agg.agg in _PICKS:  # stored values: printed as stored
            return replace(info, long_name=long_name)
    return ResultVariable(info.name, info.units, long_name)


def _climatology_meta(clim: Climatology) -> dict[str, Any]:
    return {
        "by": clim.by,
        "years": clim.years,
        "keys": clim.keys.tolist(),
        "years_per_key": clim.years_per_key.tolist(),
        "warning": clim.warning,
    }


def apply_analysis(
    plan: AnalysisPlan,
    values: Mapping[str, Any],
    times: np.ndarray,
    variables: Mapping[str, ResultVariable],
) -> AnalysedValues:
    """The neighbourhood statistic on every step, then the time aggregation.

    Parameters
    ----------
    plan:
        From :func:`plan_analysis`.
    values:
        variable -> ``(len(times), len(plan.read_zones))`` values read; NaN = no data.
    times:
        The instants of the rows read (datetime64).
    variables:
        The variables' CF attributes.

    Examples
    --------
    >>> from alveary.query._timeagg import parse_time_aggregation
    >>> t = np.arange("2024-01-30", "2024-02-03", dtype="datetime64[D]")
    >>> sel = Selection(timeagg=parse_time_aggregation("P1M", "sum"))
    >>> p = plan_analysis(sel, np.atleast_1d(grid.point_to_zone(0.0, 0.0, 4)), t, 0, 4)
    >>> out = apply_analysis(p, {"x": np.ones((4, 1))}, t, {"x": ResultVariable("x", "mm")})
    >>> out.values["x"].ravel().tolist(), out.axis.steps.tolist()
    ([2.0, 2.0], [2, 2])
    """
    times = np.asarray(times).astype("datetime64[s]")
    focal, agg = plan.focal, plan.timeagg
    out: dict[str, FloatArray] = {}
    info_out: dict[str, ResultVariable] = {}
    meta: dict[str, Any] = {}
    if focal is not None:
        meta["focal"] = {"statistic": focal.statistic, "k": focal.k}
        if focal.kernel is not None:
            meta["focal"]["kernel"] = list(focal.kernel)
    if agg is not None:
        meta["time"] = {
            k: v
            for k, v in (
                ("every", agg.every),
                ("agg", agg.agg if agg.every else None),
                ("climatology", agg.climatology),
                ("anomaly", agg.anomaly),
            )
            if v is not None
        }
    axis: TimeAxis | None = None
    out_times = times[plan.output]
    clim_meta: dict[str, Any] | None = None
    for var, raw in values.items():
        info = variables[var]
        arr = np.asarray(raw, dtype=np.float64)
        if focal is not None:
            series = apply_focal(arr, plan.windows, focal)
        else:
            series = {"value": arr}
        for output, v in series.items():
            name = var if len(series) == 1 else f"{var}_{output}"
            vinfo = info if focal is None else _focal_variable(info, name, output, focal)
            if agg is None:
                out[name], info_out[name] = v, vinfo
                continue
            if agg.climatology is not None:
                clim = climatology(v, times, agg.climatology)
                out[name] = clim.values
                axis = TimeAxis(key=clim.by, keys=clim.keys)
                out_times = times[:0]
                clim_meta = _climatology_meta(clim)
            else:
                if agg.anomaly is not None:
                    v, _t, clim = anomaly(v, times, agg.anomaly)
                    clim_meta = _climatology_meta(clim)
                v = v[plan.output]
                if agg.every is not None:
                    periods = aggregate_periods(v, times[plan.output], agg.every, agg.agg)
                    v = periods.values
                    out_times = periods.start
                    axis = TimeAxis(bounds=periods.bounds, steps=periods.steps)
                out[name] = v
            info_out[name] = _time_variable(vinfo, agg)
    if clim_meta is not None:
        meta["climatology"] = clim_meta
        if clim_meta["warning"]:
            meta["warnings"] = [clim_meta["warning"]]
    return AnalysedValues(out, info_out, out_times, axis, meta)


def time_axis_json(times: np.ndarray, axis: TimeAxis | None) -> dict[str, Any]:
    """The answer header's time axis: ``times``, and ``time_bounds``/``time_steps`` for
    periods, or the climatology's keys under their name instead of ``times``.

    >>> t = np.array(["2024-01-01"], dtype="datetime64[s]")
    >>> b = np.array([["2024-01-01", "2024-02-01"]], dtype="datetime64[s]")
    >>> time_axis_json(t, TimeAxis(bounds=b, steps=np.array([31])))
    {'times': ['2024-01-01T00:00:00Z'], 'time_bounds': [['2024-01-01T00:00:00Z', '2024-02-01T00:00:00Z']], 'time_steps': [31]}
    """  # noqa: E501
    if axis is not None and axis.keys is not None and axis.key is not None:
        return {axis.key: axis.keys.tolist()}
    body: dict[str, Any] = {"times": format_time(times)}
    if axis is not None and axis.bounds is not None:
        start = format_time(axis.bounds[:, 0]) if len(axis.bounds) else []
        end = format_time(axis.bounds[:, 1]) if len(axis.bounds) else []
        body["time_bounds"] = [list(p) for p in zip(start, end, strict=True)]
    if axis is not None and axis.steps is not None:
        body["time_steps"] = axis.steps.tolist()
    return body
