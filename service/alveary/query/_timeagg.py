"""Time aggregation of per-zone series: calendar periods, climatologies and anomalies.

Values are ``(time, zone)`` float64 arrays over a ``datetime64`` axis read as UTC; NaN is
"no data" and is left out everywhere.

Periods (``every``), each the half-open interval ``[start, end)`` in UTC:

- ``P1D`` calendar days from 00:00;
- ``P7D`` ISO 8601 weeks, from Monday 00:00 to the next Monday;
- ``P1M`` calendar months; ``P3M`` calendar quarters (from 1 January, April, July and
  October); ``P1Y`` calendar years.

Only periods that hold at least one time step appear, each with the number of steps it
holds, so a partial period (at either end of the series, or around a gap) can be told.

Aggregates (``agg``): ``mean``, ``min``, ``max``, ``sum``, ``count`` (steps with data),
``first`` and ``last`` (the first and last step with data). Without any data in a period
all are NaN except ``count`` (0).

Climatology (``climatology=month|dayofyear``): per calendar month, or per day of the year,
the mean over the years of each year's mean for that month or day, so that every year
counts once whatever its number of steps. Days of the year run 1..365 on a calendar
without 29 February (1 March is day 60 in every year): 29 February counts as 28 February,
whose mean in a leap year is taken over both days. The answer says, per month or day, how
many years fed it, and warns when the fewest is below :data:`MIN_YEARS`: a climatology of
one or two years is mostly the weather of those years.

Anomaly (``anomaly=month|dayofyear``): every value minus the climatology of its month or
day, the climatology taken from the same series. With ``every`` the anomalies are
aggregated into periods afterwards (a monthly mean of daily anomalies).

Neighbourhood operations come first, time aggregation after (:func:`analyse`).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from alveary._errors import InvalidInput
from alveary.query._focal import DiskWindows, FocalSpec, apply_focal

__all__ = [
    "AGGREGATES",
    "CLIMATOLOGY_KEYS",
    "EVERY",
    "MIN_YEARS",
    "Climatology",
    "Periods",
    "TimeAggregation",
    "TimeResult",
    "aggregate_periods",
    "analyse",
    "anomaly",
    "apply_time_aggregation",
    "climatology",
    "parse_time_aggregation",
    "period_starts",
]

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]
TimeArray = npt.NDArray[np.datetime64]

#: The ``every`` periods (ISO 8601 durations).
EVERY = ("P1D", "P7D", "P1M", "P3M", "P1Y")
#: The ``agg`` aggregates.
AGGREGATES = ("mean", "min", "max", "sum", "count", "first", "last")
#: What a climatology or anomaly is taken per.
CLIMATOLOGY_KEYS = ("month", "dayofyear")
#: Fewer years than this behind a climatology earn a warning.
MIN_YEARS = 3

# Days before each month on a calendar without 29 February.
_DAYS_BEFORE = np.array([0, 31, 59, 90, 120, 151, 181, 212, 243, 273, 304, 334], dtype=np.int64)


# -- parameters -----------------------------------------------------------------------------


@dataclass(frozen=True)
class TimeAggregation:
    """Parsed time parameters: periods with an aggregate, a climatology, or an anomaly
    (optionally aggregated into periods)."""

    every: str | None = None
    agg: str = "mean"
    climatology: str | None = None
    anomaly: str | None = None


def _one_of(parameter: str, value: Any, allowed: tuple[str, ...]) -> str:
    if value not in allowed:
        raise InvalidInput(parameter, value, "one of " + ", ".join(allowed))
    return str(value)


def parse_time_aggregation(
    every: str | None = None,
    agg: str | None = None,
    climatology: str | None = None,
    anomaly: str | None = None,
) -> TimeAggregation | None:
    """Validate the ``every``, ``agg``, ``climatology`` and ``anomaly`` parameters.

    ``agg`` (default ``mean``) needs ``every``; ``climatology`` stands alone; ``anomaly``
    may come with ``every`` (anomalies first, then periods).

    Examples
    --------
    >>> parse_time_aggregation("P1M", "max")
    TimeAggregation(every='P1M', agg='max', climatology=None, anomaly=None)
    >>> parse_time_aggregation() is None
    True
    >>> parse_time_aggregation("P2W")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: every is 'P2W'; allowed: one of P1D, P7D, P1M, P3M, P1Y
    >>> parse_time_aggregation(climatology="week")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: climatology is 'week'; allowed: one of month, dayofyear
    """
    if every is None and agg is None and climatology is None and anomaly is None:
        return None
    if every is not None:
        every = _one_of("every", every, EVERY)
    if agg is not None:
        agg = _one_of("agg", agg, AGGREGATES)
        if every is None:
            raise InvalidInput("agg", agg, "only together with every")
    if climatology is not None:
        climatology = _one_of("climatology", climatology, CLIMATOLOGY_KEYS)
        if every is not None or anomaly is not None:
            raise InvalidInput("climatology", climatology, "alone (not with every or anomaly)")
    if anomaly is not None:
        anomaly = _one_of("anomaly", anomaly, CLIMATOLOGY_KEYS)
    return TimeAggregation(every, agg or "mean", climatology, anomaly)


# -- shared plumbing --------------------------------------------------------------------------


def _series(values: Any, times: Any) -> tuple[FloatArray, TimeArray]:
    """Validated (values, times in seconds), ordered by time (stable)."""
    t = np.asarray(times)
    if t.ndim != 1 or t.dtype.kind != "M":
        raise InvalidInput("times", getattr(t, "dtype", None), "a 1-D numpy datetime64 array")
    t = t.astype("datetime64[s]")
    if np.isnat(t).any():
        raise InvalidInput("times", "NaT", "valid instants", index=int(np.isnat(t).argmax()))
    v = np.asarray(values, dtype=np.float64)
    if v.ndim != 2 or v.shape[0] != t.size:
        raise InvalidInput("values", v.shape, f"an array of shape ({t.size}, zones)")
    if t.size > 1 and (np.diff(t) < np.timedelta64(0, "s")).any():
        order = np.argsort(t, kind="stable")
        t, v = t[order], v[order]
    return v, t


def _segments(codes: IntArray) -> IntArray:
    """Start of every run of equal codes (codes non-decreasing)."""
    if codes.size == 0:
        return np.zeros(0, dtype=np.int64)
    return np.flatnonzero(np.concatenate([[True], codes[1:] != codes[:-1]])).astype(np.int64)


def _per_run(op: np.ufunc, x: npt.NDArray[Any], starts: IntArray) -> npt.NDArray[Any]:
    """``op`` over each run of rows beginning at ``starts``. A loop over runs: numpy's
    ``reduceat`` along the first axis of a wide array is several times slower, and
    ``add.reduce`` sums pairwise."""
    ends = np.append(starts[1:], x.shape[0])
    out = np.empty((starts.size, *x.shape[1:]), dtype=x.dtype)
    for row, (a, b) in enumerate(zip(starts.tolist(), ends.tolist(), strict=True)):
        op.reduce(x[a:b], axis=0, out=out[row])
    return out


def _reduce(values: FloatArray, starts: IntArray, agg: str) -> FloatArray:
    """An aggregate of each run of rows beginning at ``starts``, NaN left out."""
    if starts.size == 0:
        return np.zeros((0, values.shape[1]))
    if agg in ("min", "max"):
        return _per_run(np.fmin if agg == "min" else np.fmax, values, starts)
    missing = np.isnan(values)
    if not missing.any():  # dense: every step has data
        if agg == "first":
            return values[starts]
        if agg == "last":
            ends: IntArray = np.append(starts[1:], values.shape[0]) - 1
            return values[ends]
        steps = np.diff(np.append(starts, values.shape[0])).astype(np.float64)[:, None]
        if agg == "count":
            return np.broadcast_to(steps, (starts.size, values.shape[1])).copy()
        total = _per_run(np.add, values, starts)
        return total if agg == "sum" else total / steps
    if agg in ("first", "last"):
        rows = np.arange(values.shape[0], dtype=np.int64)[:, None]
        if agg == "first":
            pick = _per_run(np.minimum, np.where(missing, values.shape[0], rows), starts)
        else:
            pick = _per_run(np.maximum, np.where(missing, -1, rows), starts)
        found = (pick >= 0) & (pick < values.shape[0])
        got = np.take_along_axis(values, np.clip(pick, 0, values.shape[0] - 1), axis=0)
        return np.where(found, got, np.nan)
    count = _per_run(np.add, (~missing).astype(np.float64), starts)
    if agg == "count":
        return count
    total = _per_run(np.add, np.where(missing, 0.0, values), starts)
    with np.errstate(invalid="ignore", divide="ignore"):
        if agg == "sum":
            return np.where(count > 0, total, np.nan)
        return np.asarray(total / count)  # mean


# -- periods ----------------------------------------------------------------------------------


def period_starts(times: Any, every: str) -> tuple[TimeArray, TimeArray]:
    """The start and end (UTC, ``datetime64[s]``) of the period holding each instant.

    Examples
    --------
    >>> t = np.array(["2024-02-29T18:00", "2024-03-03T00:00"], dtype="datetime64[s]")
    >>> start, end = period_starts(t, "P7D")  # ISO weeks from Monday
    >>> start.astype("datetime64[D]").tolist(), end.astype("datetime64[D]").tolist()
    ([datetime.date(2024, 2, 26), datetime.date(2024, 2, 26)], [datetime.date(2024, 3, 4), datetime.date(2024, 3, 4)])
    >>> period_starts(t, "P3M")[0].astype("datetime64[D]").tolist()
    [datetime.date(2024, 1, 1), datetime.date(2024, 1, 1)]
    """  # noqa: E501
    every = _one_of("every", every, EVERY)
    t = np.asarray(times).astype("datetime64[s]")
    if every in ("P1D", "P7D"):
        day = t.astype("datetime64[D]")
        if every == "P7D":  # 1970-01-01 was a Thursday: (days + 3) % 7 is 0 on Mondays
            day = day - (day.astype(np.int64) + 3) % 7
        days = np.timedelta64(1 if every == "P1D" else 7, "D")
        return day.astype("datetime64[s]"), (day + days).astype("datetime64[s]")
    if every == "P1Y":
        year = t.astype("datetime64[Y]")
        return year.astype("datetime64[s]"), (year + np.timedelta64(1, "Y")).astype("datetime64[s]")
    month = t.astype("datetime64[M]")
    if every == "P3M":  # months since 1970-01: multiples of 3 are January, April, ...
        month = month - month.astype(np.int64) % 3
    months = np.timedelta64(1 if every == "P1M" else 3, "M")
    return month.astype("datetime64[s]"), (month + months).astype("datetime64[s]")


@dataclass(frozen=True, eq=False)
class Periods:
    """Values aggregated into calendar periods.

    ``values`` is ``(periods, zones)``; ``start`` and ``end`` bound each period
    (``[start, end)``, UTC); ``steps`` counts the input time steps each period holds.
    """

    values: FloatArray
    start: TimeArray
    end: TimeArray
    steps: IntArray

    @property
    def bounds(self) -> TimeArray:
        """``(periods, 2)``: start and end of each period."""
        return np.stack([self.start, self.end], axis=1)


def aggregate_periods(values: Any, times: Any, every: str, agg: str = "mean") -> Periods:
    """Aggregate each zone's series over UTC calendar periods.

    Parameters
    ----------
    values:
        ``(time, zones)`` values; NaN = no data.
    times:
        The ``datetime64`` instants of the rows (UTC).
    every:
        One of :data:`EVERY`.
    agg:
        One of :data:`AGGREGATES`.

    Examples
    --------
    >>> t = np.array(["2024-01-30", "2024-01-31", "2024-02-01"], dtype="datetime64[s]")
    >>> p = aggregate_periods(np.array([[1.0], [np.nan], [5.0]]), t, "P1M", "mean")
    >>> p.values.tolist(), p.start.astype("datetime64[D]").astype(str).tolist(), p.steps.tolist()
    ([[1.0], [5.0]], ['2024-01-01', '2024-02-01'], [2, 1])
    """
    agg = _one_of("agg", agg, AGGREGATES)
    v, t = _series(values, times)
    start, end = period_starts(t, every)
    first = _segments(start.astype(np.int64))
    steps = np.diff(np.append(first, t.size)).astype(np.int64)
    return Periods(_reduce(v, first, agg), start[first], end[first], steps)


# -- climatology and anomaly --------------------------------------------------------------------


def _keys(t: TimeArray, by: str) -> tuple[IntArray, IntArray]:
    """(year, key) of each instant: the month 1..12 or the day 1..365 (29 February = 59)."""
    month_start = t.astype("datetime64[M]")
    months = month_start.astype(np.int64)
    year = months // 12 + 1970
    month = months % 12 + 1
    if by == "month":
        return year, month
    day = (t.astype("datetime64[D]") - month_start.astype("datetime64[D]")).astype(np.int64) + 1
    day = np.where((month == 2) & (day == 29), 28, day)
    return year, _DAYS_BEFORE[month - 1] + day


@dataclass(frozen=True, eq=False)
class Climatology:
    """The mean over the years, per month or per day of the year.

    ``values`` is ``(keys, zones)`` for the ``keys`` present (months 1..12 or days
    1..365); ``years_per_key`` counts the calendar years that fed each key; ``years`` is
    the fewest of them, and ``warning`` says so when it is below :data:`MIN_YEARS`.
    """

    by: str
    keys: IntArray
    values: FloatArray
    years_per_key: IntArray

    @property
    def years(self) -> int:
        return int(self.years_per_key.min()) if self.years_per_key.size else 0

    @property
    def warning(self) -> str | None:
        if self.years >= MIN_YEARS:
            return None
        return (
            f"climatology from {self.years} year(s) only: fewer than {MIN_YEARS} years say "
            "little about a typical year"
        )


def _climatology(v: FloatArray, t: TimeArray, by: str) -> tuple[Climatology, IntArray]:
    """The climatology, and each step's row in it."""
    year, key = _keys(t, by)
    first = _segments(year * 400 + key)  # one run per (year, key): the time axis is sorted
    per_year = _reduce(v, first, "mean")
    run_key = key[first]
    order = np.argsort(run_key, kind="stable")
    group = _segments(run_key[order])
    values = _reduce(per_year[order], group, "mean")
    keys = run_key[order][group]
    years = np.diff(np.append(group, order.size)).astype(np.int64)
    return Climatology(by, keys, values, years), np.searchsorted(keys, key).astype(np.int64)


def climatology(values: Any, times: Any, by: str) -> Climatology:
    """The mean over the years of each year's mean, per month or per day of the year.

    Examples
    --------
    >>> t = np.array(["2021-01-05", "2021-01-20", "2022-01-10", "2022-02-01"], "datetime64[s]")
    >>> c = climatology(np.array([[1.0], [3.0], [6.0], [4.0]]), t, "month")
    >>> c.keys.tolist(), c.values.ravel().tolist(), c.years_per_key.tolist(), c.years
    ([1, 2], [4.0, 4.0], [2, 1], 1)
    """
    by = _one_of("climatology", by, CLIMATOLOGY_KEYS)
    v, t = _series(values, times)
    return _climatology(v, t, by)[0]


def anomaly(values: Any, times: Any, by: str) -> tuple[FloatArray, TimeArray, Climatology]:
    """Each value minus the climatology of its month or day of the year.

    Returns the anomalies and their times (sorted), and the climatology used.

    Examples
    --------
    >>> t = np.array(["2021-01-05", "2022-01-10", "2023-01-07"], "datetime64[s]")
    >>> a, at, c = anomaly(np.array([[1.0], [2.0], [6.0]]), t, "month")
    >>> a.ravel().tolist(), c.warning is None
    ([-2.0, -1.0, 3.0], True)
    """
    by = _one_of("anomaly", by, CLIMATOLOGY_KEYS)
    v, t = _series(values, times)
    clim, row = _climatology(v, t, by)
    return v - clim.values[row], t, clim


# -- everything together ------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class TimeResult:
    """One output series after time aggregation.

    ``values`` is ``(rows, zones)``. For periods, ``time`` holds their starts, ``bounds``
    ``(rows, 2)`` their ``[start, end)`` and ``steps`` the input steps of each; for a
    climatology ``keys`` holds the months or days and ``time`` is None; otherwise ``time``
    is the input axis. ``climatology`` carries the year counts of a climatology or anomaly.
    """

    values: FloatArray
    time: TimeArray | None
    bounds: TimeArray | None = None
    steps: IntArray | None = None
    keys: IntArray | None = None
    climatology: Climatology | None = None

    @property
    def warning(self) -> str | None:
        return None if self.climatology is None else self.climatology.warning


def apply_time_aggregation(values: Any, times: Any, spec: TimeAggregation | None) -> TimeResult:
    """Apply parsed time parameters to a ``(time, zones)`` series.

    Examples
    --------
    >>> t = np.arange("2023-01-01", "2023-03-01", dtype="datetime64[D]")
    >>> r = apply_time_aggregation(np.ones((t.size, 2)), t, parse_time_aggregation("P1M", "sum"))
    >>> r.values.tolist(), r.bounds[:, 1].astype("datetime64[D]").astype(str).tolist()
    ([[31.0, 31.0], [28.0, 28.0]], ['2023-02-01', '2023-03-01'])
    """
    v, t = _series(values, times)
    if spec is None:
        return TimeResult(v, t)
    if spec.climatology is not None:
        means = _climatology(v, t, spec.climatology)[0]
        return TimeResult(means.values, None, keys=means.keys, climatology=means)
    clim: Climatology | None = None
    if spec.anomaly is not None:
        v, t, clim = anomaly(v, t, spec.anomaly)
    if spec.every is None:
        return TimeResult(v, t, climatology=clim)
    p = aggregate_periods(v, t, spec.every, spec.agg)
    return TimeResult(p.values, p.start, p.bounds, p.steps, climatology=clim)


def analyse(
    values: Any,
    times: Any,
    *,
    windows: DiskWindows | None = None,
    focal: FocalSpec | None = None,
    aggregation: TimeAggregation | None = None,
) -> Mapping[str, TimeResult]:
    """Neighbourhood operation first, then time aggregation; the outputs by name.

    ``values`` is ``(time, len(windows.needed))`` with a focal operation, else
    ``(time, zones)``. A gradient's direction does not average, so a gradient cannot be
    combined with time aggregation.

    Examples
    --------
    >>> from alveary.grid import disk_windows, point_to_zone
    >>> w = disk_windows(point_to_zone(40.0, -3.0, 8), 1)
    >>> t = np.arange("2024-01-01", "2024-01-15", dtype="datetime64[D]")
    >>> v = np.arange(t.size, dtype=float)[:, None] + np.zeros(w.needed.size)
    >>> out = analyse(v, t, windows=w, focal=FocalSpec("mean", 1),
    ...               aggregation=parse_time_aggregation("P7D", "max"))
    >>> out["mean"].values.ravel().tolist(), out["mean"].steps.tolist()
    ([6.0, 13.0], [7, 7])
    """
    if focal is not None and focal.statistic == "gradient" and aggregation is not None:
        name = next(
            n for n in ("every", "climatology", "anomaly") if getattr(aggregation, n) is not None
        )
        raise InvalidInput(name, getattr(aggregation, name), "not with focal=gradient")
    if focal is None:
        series: Mapping[str, Any] = {"value": values}
    else:
        if windows is None:
            raise InvalidInput("windows", None, "the disk windows of the focal operation")
        series = apply_focal(values, windows, focal)
    return {name: apply_time_aggregation(v, times, aggregation) for name, v in series.items()}
