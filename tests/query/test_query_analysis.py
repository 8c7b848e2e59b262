"""Neighbourhood statistics and time aggregation through the query layer, on real cubes
on the in-memory store (resolve -> plan -> execute, the production path).

References: a brute-force loop over ``grid.zone_disk`` with numpy reductions written
here, over what was written into the cube for each zone id; closed-form fields in PROJ's
``+proj=isea`` plane (a linear field's disk mean is its centre value) and stereographic
plane (the gradient of a·x + b·y); pandas ``resample``/``groupby`` for calendar periods;
the calculus of a field linear in time (a month's mean is the value at the month's mean
instant).
"""

from __future__ import annotations

import asyncio
import itertools
import math

import numpy as np
import pandas as pd
import pyproj
import pytest

from alveary import InvalidInput, LimitExceeded, grid
from alveary.cube import create_cube
from alveary.query import (
    BboxQuery,
    Catalog,
    CubeSource,
    DiskQuery,
    FocalSpec,
    Limits,
    PointsQuery,
    PolygonQuery,
    RadiusQuery,
    Selection,
    StatsResult,
    execute,
    make_plan,
    parse_datetime,
    parse_polygon,
    parse_time_aggregation,
    resolve,
)
from support.memcube import memory_cube
from support.samples import icosahedron_vertices, layout_id, pentagons

R_Q = 6371007.18091875  # the authalic radius of WGS84 (PROJ's sphere here)
_COUNT = itertools.count()
ALL = parse_datetime("../..")


def run(plan):
    return asyncio.run(execute(plan, None, deadline=30))


def answer(cat, query, limits=Limits()):
    return run(make_plan(resolve(cat, "mem", query), limits))


def sel(**kw):
    kw.setdefault("time", ALL)
    return Selection(**kw)


# -- brute force over zone_disk ------------------------------------------------------------


def loop_statistic(written, targets, k, statistic, kernel=None):
    """(time, targets): each target's statistic over grid.zone_disk, zone by zone."""
    ntime = len(next(iter(written.values())))
    out = np.full((ntime, len(targets)), np.nan)
    level = int(grid.zone_level(np.uint64(targets[0])))
    for col, z in enumerate(targets):
        ids, steps = grid.zone_disk(np.uint64(z), k, return_steps=True)
        v = np.stack([written.get(int(i), np.full(ntime, np.nan)) for i in ids], axis=1)
        area = grid.zone_areas(ids) / grid.zone_area(level)  # 1, or 5/6 at a pentagon
        w = area if kernel is None else area * np.asarray(kernel)[np.asarray(steps)]
        has = ~np.isnan(v)
        x = np.where(has, v, 0.0)
        wsum = np.where(has, w, 0.0).sum(axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = (x * w).sum(axis=1) / wsum
            if statistic in ("mean", "kernel"):
                res = mean
            elif statistic == "std":
                res = np.sqrt((np.where(has, (v - mean[:, None]) ** 2, 0) * w).sum(axis=1) / wsum)
            elif statistic == "max":
                res = np.where(has, v, -np.inf).max(axis=1)
            elif statistic == "count":
                res = has.sum(axis=1).astype(float)
            else:
                raise AssertionError(statistic)
        if statistic != "count":
            res = np.where(has.any(axis=1), res, np.nan)
        out[:, col] = res
    return out


@pytest.fixture(scope="module")
def gappy():
    """Levels 3 and 5, four daily steps, no data south of 20 deg S."""
    return memory_cube(levels=(3, 5), ntimes=4, nodata_below_lat=-20.0)


@pytest.fixture(scope="module")
def gappy_cat(gappy):
    return gappy.catalog()


def _places():
    lv = 5
    n = 1 << lv
    pent = int(pentagons(lv)[7])
    return [
        # (label, query, focal)
        ("northern apex, cap seams", DiskQuery(k=4, zone=layout_id(lv, 5, 0, 0)), ("mean", 2)),
        ("southern apex, no data", DiskQuery(k=3, zone=layout_id(lv, 6, 0, 0)), ("count", 2)),
        ("pentagon", DiskQuery(k=3, zone=pent), ("std", 3)),
        ("band seam", DiskQuery(k=3, zone=layout_id(lv, 1, n + n // 2 - 1, 0)), ("max", 1)),
        (
            "southern cap seam",
            DiskQuery(k=2, zone=layout_id(lv, 3, 2 * n - 1, n // 3)),
            ("mean", 4),
        ),
        ("antimeridian box at the data edge", BboxQuery(170.0, -28.0, -170.0, -12.0), ("mean", 2)),
        (
            "radius about a pentagon",
            RadiusQuery(*map(float, grid.zone_to_point(pent)), 900e3),
            ("kernel", 2),
        ),
    ]


@pytest.mark.parametrize(("label", "query", "focal"), _places(), ids=[p[0] for p in _places()])
def test_focal_matches_a_zone_disk_loop(gappy, gappy_cat, label, query, focal):
    statistic, k = focal
    kernel = (1.0, 0.5, 0.25) if statistic == "kernel" else None
    spec = FocalSpec(statistic, k, kernel)
    q = type(query)(**{**query.__dict__, "selection": sel(level=5, focal=spec)})
    result = answer(gappy_cat, q)
    plain = answer(gappy_cat, type(query)(**{**query.__dict__, "selection": sel(level=5)}))
    assert result.zones.tolist() == plain.zones.tolist()  # same rows, same order
    expected = loop_statistic(gappy.written[("f", 5)], result.zones, k, statistic, kernel)
    got = result.values["f"]
    assert got.shape == expected.shape
    np.testing.assert_array_equal(np.isnan(got), np.isnan(expected))
    np.testing.assert_allclose(got, expected, rtol=1e-12, atol=1e-9, equal_nan=True)
    np.testing.assert_allclose(
        result.values["g"],
        2 * expected if statistic != "count" else expected,
        rtol=1e-12,
        atol=1e-9,
        equal_nan=True,
    )
    assert result.analysis["focal"]["k"] == k


def test_focal_points_and_statistics_of_the_smoothed_field(gappy, gappy_cat):
    spec = FocalSpec("mean", 2)
    lat, lon = np.array([10.0, 10.0, -60.0, 58.3]), np.array([20.0, 20.0, 5.0, 11.25])
    res = answer(gappy_cat, PointsQuery(lat, lon, sel(level=5, focal=spec)))
    zones = grid.point_to_zone(lat, lon, 5)
    assert res.zones.tolist() == zones.tolist()
    expected = loop_statistic(gappy.written[("f", 5)], zones, 2, "mean")
    np.testing.assert_allclose(res.values["f"], expected, rtol=1e-12, equal_nan=True)
    # stats over the smoothed zones: area-weighted mean of the loop's values
    poly = {"type": "Polygon", "coordinates": [[[0, 0], [30, 0], [30, 25], [0, 25], [0, 0]]]}
    q = PolygonQuery(parse_polygon(poly, 1000), ("mean", "max", "count"), sel(level=5, focal=spec))
    st = answer(gappy_cat, q)
    assert isinstance(st, StatsResult)
    targets = grid.zones_in_polygon(poly, 5)
    smooth = loop_statistic(gappy.written[("f", 5)], targets, 2, "mean")
    w = grid.zone_areas(targets)
    np.testing.assert_allclose(st.stats["f"]["mean"], (smooth * w).sum(1) / w.sum(), rtol=1e-12)
    np.testing.assert_allclose(st.stats["f"]["max"], smooth.max(axis=1), rtol=1e-12)
    assert st.zone_count == targets.size


# -- the plan: halo, limits ---------------------------------------------------------------


def test_plan_prices_the_halo_and_reads_exactly_it(gappy, gappy_cat):
    box = (100.0, 10.0, 140.0, 40.0)
    plain = make_plan(resolve(gappy_cat, "mem", BboxQuery(*box, selection=sel(level=5))), Limits())
    spec = FocalSpec("mean", 3)
    plan = make_plan(
        resolve(gappy_cat, "mem", BboxQuery(*box, selection=sel(level=5, focal=spec))), Limits()
    )
    halo = np.setdiff1d(grid.disk_union(plain.zones, 3), plain.zones)
    assert np.array_equal(plan.read_zones, np.union1d(plain.zones, halo))
    planned = {k for r in plan.reads.values() for k in r.keys}
    own = {k for r in plain.reads.values() for k in r.keys}
    assert own < planned and set(plan.halo_chunks) == planned - own
    # the reads issue one GET per planned chunk (the cube's own request counters)
    stats = gappy_cat.get("mem").stats
    before = stats.chunk_gets
    run(plan)
    assert stats.chunk_gets - before == plan.chunk_count == len(planned)


def test_limits_count_the_halo_and_the_steps_read(gappy_cat):
    box = BboxQuery(0.0, 0.0, 40.0, 40.0, selection=sel(level=5))
    n = make_plan(resolve(gappy_cat, "mem", box), Limits()).zones.size
    focal = BboxQuery(0.0, 0.0, 40.0, 40.0, selection=sel(level=5, focal=FocalSpec("mean", 2)))
    make_plan(resolve(gappy_cat, "mem", box), Limits(max_zones=n))  # the plain box fits
    with pytest.raises(LimitExceeded) as err:
        make_plan(resolve(gappy_cat, "mem", focal), Limits(max_zones=n))
    assert "halo" in str(err.value)
    with pytest.raises(LimitExceeded, match="focal_k"):
        make_plan(resolve(gappy_cat, "mem", focal), Limits(max_focal_k=1))
    # an anomaly of the latest step reads the whole axis (4 steps) for its climatology
    latest = Selection(level=5, timeagg=parse_time_aggregation(anomaly="month"))
    r = resolve(gappy_cat, "mem", BboxQuery(0.0, 0.0, 40.0, 40.0, selection=latest))
    assert (r.t0, r.t1) == (0, 4)
    with pytest.raises(LimitExceeded, match="time steps"):
        make_plan(r, Limits(max_cells=3 * n))


def test_gradient_with_time_aggregation_is_refused():
    with pytest.raises(InvalidInput) as err:
        Selection(focal=FocalSpec("gradient", 1), timeagg=parse_time_aggregation("P1M"))
    assert err.value.parameter == "every"


# -- closed-form fields ------------------------------------------------------------------


def authalic_lat(lat):
    """Authalic latitude from PROJ's +proj=cea on WGS84 (y = a q / 2)."""
    cea = pyproj.Transformer.from_pipeline("+proj=cea +ellps=WGS84")
    _, y = cea.transform(np.zeros_like(lat), lat)
    _, y_pole = cea.transform(0.0, 90.0)
    return np.degrees(np.arcsin(np.clip(np.asarray(y) / y_pole, -1, 1)))


def plane_xy(zones, proj):
    lat, lon = grid.zone_to_point(zones)
    sphere = pyproj.CRS.from_proj4(f"+proj=longlat +R={R_Q} +no_defs")
    plane = pyproj.CRS.from_proj4(proj)
    x, y = pyproj.Transformer.from_crs(sphere, plane, always_xy=True).transform(
        lon, authalic_lat(lat)
    )
    return np.asarray(x), np.asarray(y)


def field_cube(level, zones, values):
    """A one-step cube holding ``values`` at ``zones`` (nothing elsewhere)."""
    url = f"memory://alveary-tests/analysis-{next(_COUNT)}"
    writer = create_cube(
        url,
        cube_id="mem",
        title="closed-form field",
        times=np.array(["2024-01-01"], dtype="datetime64[s]"),
        levels=[level],
        variables={"v": {"units": "K", "long_name": "field", "dtype": "float64"}},
    )
    writer.write("v", level, zones, np.asarray(values, dtype=np.float64)[None, :])
    writer.publish()
    cat = Catalog([CubeSource("mem", url)])
    cat.open_all()
    return cat


def test_linear_field_disk_mean_is_the_centre_value():
    # A face interior (the face P, N_0, N_1), where zone centres form an exact triangular
    # lattice in PROJ's isea plane: a linear field's disk mean is its centre value.
    v = icosahedron_vertices()
    c = (v[0] + v[1] + v[2]) / np.linalg.norm(v[0] + v[1] + v[2])
    lat, lon = float(np.degrees(np.arcsin(c[2]))), float(np.degrees(np.arctan2(c[1], c[0])))
    level, k = 7, 3
    universe = grid.zone_disk(grid.point_to_zone(lat, lon, level), 14)
    x, y = plane_xy(universe, f"+proj=isea +R={R_Q} +no_defs")
    linear = 3.0 + 2e-6 * (x - x.mean()) - 5e-6 * (y - y.mean())
    cat = field_cube(level, universe, linear)
    q = DiskQuery(k=10, lat=lat, lon=lon, selection=Selection(focal=FocalSpec("mean", k)))
    res = answer(cat, q)
    expected = linear[np.searchsorted(universe, res.zones)]
    assert np.ptp(expected) > 1.0  # the field varies well above the tolerance
    np.testing.assert_allclose(res.values["v"][0], expected, rtol=0, atol=1e-7)


@pytest.mark.parametrize(
    ("lat", "lon", "level"), [(-37.5, 144.9, 9), (58.2825, 11.25, 9), (10.0, -170.0, 12)]
)
def test_gradient_of_a_plane_to_one_percent(lat, lon, level):
    centre = grid.point_to_zone(lat, lon, level)
    universe = grid.zone_disk(centre, 4)
    c_lat, c_lon = (float(a) for a in grid.zone_to_point(centre))
    beta = float(authalic_lat(np.array([c_lat]))[0])
    x, y = plane_xy(universe, f"+proj=stere +lat_0={beta} +lon_0={c_lon} +R={R_Q} +no_defs")
    a, b = 2e-3, -1e-3  # units per metre, east and north
    cat = field_cube(level, universe, 10.0 + a * x + b * y)
    q = DiskQuery(k=1, zone=int(centre), selection=Selection(focal=FocalSpec("gradient", 1)))
    res = answer(cat, q)
    assert set(res.values) == {"v_gradient_magnitude", "v_gradient_direction"}
    assert res.variables["v_gradient_magnitude"].units == "K m-1"
    col = int(np.flatnonzero(res.zones == centre)[0])
    mag = res.values["v_gradient_magnitude"][0, col]
    direction = math.radians(res.values["v_gradient_direction"][0, col])
    assert mag * math.sin(direction) == pytest.approx(a, rel=0.01)
    assert mag * math.cos(direction) == pytest.approx(b, rel=0.01)


# -- time aggregation --------------------------------------------------------------------


@pytest.fixture(scope="module")
def daily():
    """Level 3, daily steps from 2024-01-01 over 400 days (a leap year and more)."""
    return memory_cube(levels=(3,), ntimes=400, nodata_below_lat=-70.0)


@pytest.fixture(scope="module")
def daily_cat(daily):
    return daily.catalog()


BOX = (-20.0, -80.0, 10.0, -50.0)  # straddles the no-data edge at 70 deg S


@pytest.mark.parametrize(
    ("every", "rule"), [("P1M", "MS"), ("P7D", "W-MON"), ("P3M", "QS-JAN"), ("P1Y", "YS")]
)
@pytest.mark.parametrize("agg", ["mean", "max", "count", "first", "last", "sum"])
def test_periods_match_pandas_resample(daily_cat, every, rule, agg):
    plain = answer(daily_cat, BboxQuery(*BOX, selection=sel()))
    q = BboxQuery(*BOX, selection=sel(timeagg=parse_time_aggregation(every, agg)))
    res = answer(daily_cat, q)
    frame = pd.DataFrame(plain.values["f"], index=pd.DatetimeIndex(plain.times))
    grouped = frame.resample(rule, closed="left", label="left")
    if agg == "count":
        ref = grouped.count()
    elif agg in ("first", "last"):
        ref = getattr(grouped, agg)()  # first/last non-missing value, as pandas defines it
    elif agg == "sum":
        ref = grouped.sum(min_count=1)
    else:
        ref = getattr(grouped, agg)()
    ref = ref[grouped.size() > 0]
    assert (
        res.times.astype("datetime64[s]").tolist()
        == ref.index.values.astype("datetime64[s]").tolist()
    )
    np.testing.assert_allclose(res.values["f"], ref.to_numpy(), rtol=1e-12, equal_nan=True)
    ends = res.axis.bounds[:, 1].astype("datetime64[s]")
    assert ends[:-1].tolist() == res.times[1:].astype("datetime64[s]").tolist()
    assert res.axis.steps.tolist() == grouped.size()[grouped.size() > 0].tolist()


def test_monthly_means_of_a_field_linear_in_time(daily, daily_cat):
    # f = base(zone) + 0.1 t (t in days since 2024-01-01, daily steps): a month's mean is
    # base + 0.1 * the mean of its day numbers, first and last day from the calendar.
    q = DiskQuery(k=1, lat=45.0, lon=7.0, selection=sel(timeagg=parse_time_aggregation("P1M")))
    res = answer(daily_cat, q)
    base = np.stack([daily.written[("f", 3)][int(z)][0] for z in res.zones])
    start = np.datetime64("2024-01-01", "D")
    last = start + np.timedelta64(399, "D")  # the 400th daily step: 2025-02-03
    months = np.arange("2024-01", "2025-03", dtype="datetime64[M]")
    assert res.times.astype("datetime64[M]").tolist() == months.tolist()
    for row, month in enumerate(months):
        first = (month.astype("datetime64[D]") - start).astype(int)
        end = min((month + 1).astype("datetime64[D]") - np.timedelta64(1, "D"), last)
        final = (end - start).astype(int)
        np.testing.assert_allclose(
            res.values["f"][row], base + 0.1 * (first + final) / 2, rtol=1e-12
        )
    assert res.axis.steps.tolist()[:3] == [31, 29, 31] and res.axis.steps[-1] == 3


def test_every_reads_whole_periods_and_stats_per_month(daily_cat):
    # 2024-02-10..2024-03-05 selects parts of February and March: both are read whole.
    tsel = Selection(
        time=parse_datetime("2024-02-10/2024-03-05"), timeagg=parse_time_aggregation("P1M")
    )
    r = resolve(daily_cat, "mem", BboxQuery(*BOX, selection=tsel))
    assert (r.t0, r.t1) == (31, 31 + 29 + 31)
    q = BboxQuery(*BOX, stats=("mean", "count"), selection=tsel)
    st = answer(daily_cat, q)
    plain = answer(
        daily_cat,
        BboxQuery(*BOX, selection=Selection(time=parse_datetime("2024-02-01/2024-03-31"))),
    )
    frame = pd.DataFrame(plain.values["f"], index=pd.DatetimeIndex(plain.times))
    monthly = frame.resample("MS").mean()  # per zone, then over zones (equal areas)
    np.testing.assert_allclose(st.stats["f"]["mean"], monthly.mean(axis=1).to_numpy(), rtol=1e-12)
    assert st.stats["f"]["count"].tolist() == monthly.count(axis=1).tolist()
    assert st.axis.steps.tolist() == [29, 31]


def test_climatology_and_anomaly_with_their_warning(daily_cat):
    clim = answer(
        daily_cat,
        DiskQuery(
            k=1,
            lat=45.0,
            lon=7.0,
            selection=Selection(timeagg=parse_time_aggregation(climatology="month")),
        ),
    )
    assert clim.axis.key == "month" and clim.axis.keys.tolist() == list(range(1, 13))
    assert clim.times.size == 0
    meta = clim.analysis["climatology"]
    assert meta["years"] == 1 and meta["warning"] and clim.analysis["warnings"]
    # the anomaly of the latest step (2025-02-03) against February's two-year climatology
    an = answer(
        daily_cat,
        DiskQuery(
            k=1,
            lat=45.0,
            lon=7.0,
            selection=Selection(timeagg=parse_time_aggregation(anomaly="month")),
        ),
    )
    plain = answer(daily_cat, DiskQuery(k=1, lat=45.0, lon=7.0, selection=sel()))
    frame = pd.DataFrame(plain.values["f"], index=pd.DatetimeIndex(plain.times))
    per_year = frame.groupby([frame.index.year, frame.index.month]).mean()
    feb = per_year.xs(2, level=1).mean()  # mean over the years of each year's February
    np.testing.assert_allclose(an.values["f"][0], frame.iloc[-1] - feb, rtol=1e-12)
    assert an.times.tolist() == plain.times[-1:].tolist()
