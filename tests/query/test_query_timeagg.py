"""Time aggregation, judged by pandas (``groupby`` over ``to_period`` and ``resample`` on
the same values: NaN gaps, missing steps, leap years, partial periods) and by calculus
(the monthly, quarterly and yearly means of a sinusoid sampled daily, integrated here)."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from alveary import InvalidInput, grid
from alveary.query._focal import FocalSpec, apply_focal
from alveary.query._timeagg import (
    AGGREGATES,
    EVERY,
    MIN_YEARS,
    TimeAggregation,
    aggregate_periods,
    analyse,
    anomaly,
    apply_time_aggregation,
    climatology,
    parse_time_aggregation,
    period_starts,
)

# pandas period aliases of the same calendar periods: ISO weeks run Monday..Sunday
# ("W-SUN" ends on Sunday), quarters are calendar quarters ("Q-DEC" ends in December).
PANDAS_PERIOD = {"P1D": "D", "P7D": "W-SUN", "P1M": "M", "P3M": "Q-DEC", "P1Y": "Y"}


def six_hourly_series(seed: int = 3, gaps: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """Steps every 6 h from 2019-12-20 to 2021-03-10 (leap 2020, partial periods at both
    ends), with the steps of 2020-05-13..2020-06-21 missing, and (if ``gaps``) scattered
    NaN and one zone without any data in July 2020."""
    times = np.arange("2019-12-20T00", "2021-03-10T00", 6, dtype="datetime64[h]")
    gap = (times >= np.datetime64("2020-05-13")) & (times < np.datetime64("2020-06-22"))
    times = times[~gap].astype("datetime64[s]")
    rng = np.random.default_rng(seed)
    values = rng.normal(15.0, 6.0, size=(times.size, 4))
    if not gaps:
        return values, times
    values[rng.random(values.shape) < 0.2] = np.nan
    july = (times >= np.datetime64("2020-07-01")) & (times < np.datetime64("2020-08-01"))
    values[july, 2] = np.nan
    return values, times


def frame(values: np.ndarray, times: np.ndarray) -> pd.DataFrame:
    return pd.DataFrame(values, index=pd.DatetimeIndex(times))


def pandas_aggregate(grouped, agg: str) -> pd.DataFrame:
    if agg == "sum":
        return grouped.sum(min_count=1)  # no data -> NaN, as ours
    return getattr(grouped, agg)()


@pytest.mark.parametrize("gaps", [True, False], ids=["gaps", "dense"])
@pytest.mark.parametrize("every", EVERY)
@pytest.mark.parametrize("agg", AGGREGATES)
def test_periods_match_pandas_groupby(every, agg, gaps):
    values, times = six_hourly_series(gaps=gaps)
    df = frame(values, times)
    periods = df.index.to_period(PANDAS_PERIOD[every])
    grouped = df.groupby(periods)
    expected = pandas_aggregate(grouped, agg)
    got = aggregate_periods(values, times, every, agg)
    np.testing.assert_allclose(got.values, expected.to_numpy(dtype=float), rtol=1e-12)
    starts = expected.index.start_time.to_numpy().astype("datetime64[s]")
    ends = (expected.index + 1).start_time.to_numpy().astype("datetime64[s]")
    np.testing.assert_array_equal(got.start, starts)
    np.testing.assert_array_equal(got.end, ends)
    np.testing.assert_array_equal(got.bounds, np.stack([starts, ends], axis=1))
    np.testing.assert_array_equal(got.steps, grouped.size().to_numpy())


@pytest.mark.parametrize(
    ("every", "rule"),
    [("P1D", "D"), ("P7D", "W-MON"), ("P1M", "MS"), ("P3M", "QS-JAN"), ("P1Y", "YS")],
)
def test_periods_match_pandas_resample(every, rule):
    values, times = six_hourly_series(seed=8)
    df = frame(values, times)
    # bins [start, next start) labelled by their start; empty bins dropped (ours skips them)
    resampled = df.resample(rule, closed="left", label="left")
    size = resampled.size()
    expected = resampled.mean()[size > 0]
    got = aggregate_periods(values, times, every, "mean")
    np.testing.assert_allclose(got.values, expected.to_numpy(dtype=float), rtol=1e-12)
    np.testing.assert_array_equal(got.start, expected.index.to_numpy().astype("datetime64[s]"))


def test_weeks_start_on_monday_and_quarters_in_january_april_july_october():
    # 2024-01-01 was a Monday (ISO 8601 week 1 of 2024); 1999-12-31 a Friday
    t = np.array(["2024-01-07T23:59:59", "2024-01-08", "1999-12-31T12:00"], "datetime64[s]")
    start, end = period_starts(t, "P7D")
    assert start.astype("datetime64[D]").astype(str).tolist() == [
        "2024-01-01",
        "2024-01-08",
        "1999-12-27",
    ]
    assert (end - start == np.timedelta64(7, "D")).all()
    for month, quarter in ((1, 1), (3, 1), (4, 4), (6, 4), (8, 7), (12, 10)):
        s, e = period_starts(np.array([f"2023-{month:02d}-15"], "datetime64[s]"), "P3M")
        assert str(s[0].astype("datetime64[M]")) == f"2023-{quarter:02d}"
        assert str(e[0].astype("datetime64[M]")) == (
            f"2023-{quarter + 3:02d}" if quarter < 10 else "2024-01"
        )


# -- calculus ---------------------------------------------------------------------------------


OMEGA = 2 * math.pi / 365.2425  # one cycle per mean Gregorian year, per day
PHASE, AMPLITUDE, OFFSET = 0.7, 10.0, 4.0


def sinusoid_daily(start: str, stop: str) -> tuple[np.ndarray, np.ndarray]:
    """f(t) = A sin(w t + phi) + B sampled at 12:00 UTC of every day (t in days since
    1970-01-01)."""
    days = np.arange(start, stop, dtype="datetime64[D]")
    t = days.astype(np.int64) + 0.5
    values = AMPLITUDE * np.sin(OMEGA * t + PHASE) + OFFSET
    return values[:, None], (days.astype("datetime64[s]") + np.timedelta64(12, "h"))


def exact_mean(t0: float, t1: float) -> float:
    """(1 / (t1 - t0)) times the integral of f from t0 to t1, in closed form."""
    integral = AMPLITUDE / OMEGA * (math.cos(OMEGA * t0 + PHASE) - math.cos(OMEGA * t1 + PHASE))
    return integral / (t1 - t0) + OFFSET


@pytest.mark.parametrize("every", ["P1M", "P3M", "P1Y", "P7D"])
def test_period_means_of_a_sinusoid(every):
    values, times = sinusoid_daily("2023-01-01", "2025-01-01")  # 2024 is a leap year
    got = aggregate_periods(values, times, every, "mean")
    # daily samples at noon are the midpoint rule: the error of a mean is at most
    # h^2 max|f''| / 24 = A w^2 / 24 with h = 1 day
    bound = AMPLITUDE * OMEGA**2 / 24
    full = 0
    for row, (s, e) in enumerate(zip(got.start, got.end, strict=True)):
        t0 = s.astype("datetime64[D]").astype(np.int64)
        t1 = e.astype("datetime64[D]").astype(np.int64)
        if got.steps[row] < t1 - t0:
            continue  # a partial week at either end: the integral is over the whole period
        full += 1
        assert got.values[row, 0] == pytest.approx(exact_mean(t0, t1), abs=bound)
    assert full >= got.steps.size - 2
    # the check has teeth: the means stand well apart from the plain offset
    assert bound < 2e-4 and np.abs(got.values - OFFSET).max() > 50 * bound


def test_monthly_climatology_and_anomaly_of_a_sinusoid():
    values, times = sinusoid_daily("2015-01-01", "2023-01-01")
    clim = climatology(values, times, "month")
    assert clim.keys.tolist() == list(range(1, 13))
    assert clim.years_per_key.tolist() == [8] * 12 and clim.warning is None
    # calculus: the mean over the years of each year's month means
    bound = AMPLITUDE * OMEGA**2 / 24
    for row, month in enumerate(clim.keys):
        means = []
        for year in range(2015, 2023):
            t0 = np.datetime64(f"{year}-{month:02d}", "D").astype(np.int64)
            t1 = (np.datetime64(f"{year}-{month:02d}") + 1).astype("datetime64[D]")
            means.append(exact_mean(t0, t1.astype(np.int64)))
        assert clim.values[row, 0] == pytest.approx(np.mean(means), abs=bound)


# -- climatology and anomaly against pandas ------------------------------------------------------


def multi_year_daily(seed: int = 11) -> tuple[np.ndarray, np.ndarray]:
    """Daily at 06:00 UTC from 2015-03-01 to 2021-07-15 (two leap days, partial years),
    with scattered NaN and a zone without data for the whole of 2018."""
    days = np.arange("2015-03-01", "2021-07-15", dtype="datetime64[D]")
    times = days.astype("datetime64[s]") + np.timedelta64(6, "h")
    rng = np.random.default_rng(seed)
    doy = (days - days.astype("datetime64[Y]")).astype(np.int64)
    values = 10 * np.sin(2 * np.pi * doy / 365)[:, None] + rng.normal(0, 2, (days.size, 3))
    values[rng.random(values.shape) < 0.1] = np.nan
    values[(days >= np.datetime64("2018-01-01")) & (days < np.datetime64("2019-01-01")), 1] = np.nan
    return values, times


def pandas_climatology(df: pd.DataFrame, by: str) -> tuple[pd.DataFrame, pd.Series]:
    """Per key: the mean over the years of each year's mean (NaN skipped), and how many
    years fed it. Day keys: the day number of the date in 2001 (not a leap year), with
    29 February read as 28 February."""
    idx = df.index
    if by == "month":
        key = pd.Index(idx.month)
    else:
        md = pd.Index(idx.strftime("%m-%d")).str.replace("02-29", "02-28")
        key = pd.Index(pd.to_datetime("2001-" + md).day_of_year)
    per_year = df.groupby([idx.year, key]).mean()
    years = per_year.groupby(level=1).size()
    return per_year.groupby(level=1).mean(), years


@pytest.mark.parametrize("by", ["month", "dayofyear"])
def test_climatology_matches_pandas(by):
    values, times = multi_year_daily()
    expected, years = pandas_climatology(frame(values, times), by)
    got = climatology(values, times, by)
    np.testing.assert_array_equal(got.keys, expected.index.to_numpy())
    np.testing.assert_allclose(got.values, expected.to_numpy(dtype=float), rtol=1e-12)
    np.testing.assert_array_equal(got.years_per_key, years.to_numpy())
    assert got.years == years.min() >= MIN_YEARS and got.warning is None
    if by == "dayofyear":
        assert got.keys.max() == 365 and 59 in got.keys  # 28 (and 29) February
        assert got.years_per_key[got.keys == 59][0] == 6  # 2016 and 2020 fold in


@pytest.mark.parametrize("by", ["month", "dayofyear"])
def test_anomaly_matches_pandas(by):
    values, times = multi_year_daily(seed=5)
    df = frame(values, times)
    clim, _ = pandas_climatology(df, by)
    if by == "month":
        key = df.index.month
    else:
        md = pd.Index(df.index.strftime("%m-%d")).str.replace("02-29", "02-28")
        key = pd.to_datetime("2001-" + md).day_of_year
    expected = df.to_numpy() - clim.loc[key].to_numpy()
    got, at, meta = anomaly(values, times, by)
    np.testing.assert_allclose(got, expected, rtol=1e-12, atol=1e-12)
    np.testing.assert_array_equal(at, times)
    assert meta.by == by
    # with every: anomalies first, then periods (a monthly mean of daily anomalies)
    spec = parse_time_aggregation("P1M", "mean", anomaly=by)
    monthly = apply_time_aggregation(values, times, spec)
    ref = pd.DataFrame(expected, index=df.index).groupby(df.index.to_period("M")).mean()
    np.testing.assert_allclose(monthly.values, ref.to_numpy(), rtol=1e-12, atol=1e-12)
    assert monthly.climatology is not None and monthly.warning is None


def test_few_years_earn_a_warning():
    values, times = sinusoid_daily("2021-06-01", "2023-03-01")
    clim = climatology(values, times, "month")
    # June..December: 2021 and 2022; January, February: 2022 and 2023; March..May: 2022
    assert clim.years == 1
    assert clim.years_per_key.tolist() == [2, 2, 1, 1, 1, 2, 2, 2, 2, 2, 2, 2]
    assert clim.warning is not None and str(MIN_YEARS) in clim.warning
    result = apply_time_aggregation(values, times, parse_time_aggregation(climatology="month"))
    assert result.warning == clim.warning and result.time is None
    np.testing.assert_array_equal(result.keys, clim.keys)


def test_unsorted_times_are_ordered_first():
    values, times = six_hourly_series()
    order = np.random.default_rng(1).permutation(times.size)
    for agg in ("mean", "first", "last"):
        a = aggregate_periods(values[order], times[order], "P1M", agg)
        b = aggregate_periods(values, times, "P1M", agg)
        np.testing.assert_array_equal(a.values, b.values)


# -- the order of operations ----------------------------------------------------------------------


def test_focal_first_then_time():
    w = grid.disk_windows(grid.zones_in_bbox(4.0, 44.0, 6.0, 46.0, 7), 2)
    times = np.arange("2024-02-20", "2024-04-10", dtype="datetime64[D]")
    rng = np.random.default_rng(2)
    values = rng.normal(size=(times.size, w.needed.size))
    spec = parse_time_aggregation("P1M", "max")
    out = analyse(values, times, windows=w, focal=FocalSpec("mean", 2), aggregation=spec)
    smoothed = apply_focal(values, w, FocalSpec("mean", 2))["mean"]
    expected = frame(smoothed, times).groupby(times.astype("datetime64[M]")).max()
    np.testing.assert_allclose(out["mean"].values, expected.to_numpy(), rtol=1e-12)
    plain = analyse(values, times, aggregation=spec)["value"]
    assert plain.values.shape == (3, w.needed.size)
    with pytest.raises(InvalidInput) as err:
        analyse(values, times, windows=w, focal=FocalSpec("gradient", 2), aggregation=spec)
    assert err.value.parameter == "every"


# -- parameters -----------------------------------------------------------------------------------


def test_parse_time_aggregation():
    assert parse_time_aggregation() is None
    assert parse_time_aggregation("P1D") == TimeAggregation("P1D", "mean")
    assert parse_time_aggregation(anomaly="dayofyear") == TimeAggregation(anomaly="dayofyear")


@pytest.mark.parametrize(
    ("kwargs", "parameter"),
    [
        ({"every": "P1W"}, "every"),
        ({"every": "p1m"}, "every"),
        ({"every": "P1M", "agg": "median"}, "agg"),
        ({"agg": "mean"}, "agg"),
        ({"climatology": "season"}, "climatology"),
        ({"climatology": "month", "every": "P1Y"}, "climatology"),
        ({"climatology": "month", "anomaly": "month"}, "climatology"),
        ({"anomaly": "hour"}, "anomaly"),
    ],
)
def test_parse_errors_name_the_parameter(kwargs, parameter):
    with pytest.raises(InvalidInput) as err:
        parse_time_aggregation(**kwargs)
    assert err.value.parameter == parameter and err.value.allowed


def test_bad_series_are_refused():
    times = np.arange("2024-01-01", "2024-01-05", dtype="datetime64[D]")
    with pytest.raises(InvalidInput) as err:
        aggregate_periods(np.ones((3, 2)), times, "P1D")
    assert err.value.parameter == "values"
    with pytest.raises(InvalidInput) as err:
        aggregate_periods(np.ones((4, 2)), np.arange(4), "P1D")
    assert err.value.parameter == "times"
    bad = times.copy()
    bad[2] = np.datetime64("NaT")
    with pytest.raises(InvalidInput) as err:
        aggregate_periods(np.ones((4, 2)), bad, "P1D")
    assert err.value.parameter == "times" and err.value.index == 2
    with pytest.raises(InvalidInput) as err:
        aggregate_periods(np.ones((4, 2)), times, "P1D", "median")
    assert err.value.parameter == "agg"


def test_empty_series():
    times = np.zeros(0, dtype="datetime64[s]")
    p = aggregate_periods(np.zeros((0, 3)), times, "P1M", "mean")
    assert p.values.shape == (0, 3) and p.start.size == 0
