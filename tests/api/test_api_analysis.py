"""Neighbourhood statistics and time aggregation over HTTP, end to end (a real
``alveary serve`` process over the analytic cube on the S3-protocol test server).

References: the analytic field evaluated in the test at the centres of the zones of a
brute-force loop over ``grid.zone_disk`` (area shares from ``grid.zone_areas``); pandas
``resample`` over the plain series read through the same API; pyarrow and the csv module
as readers of the Arrow and CSV answers; the S3 server's own request log for "no read
before a 413".
"""

from __future__ import annotations

import csv
import io

import httpx
import numpy as np
import pandas as pd
import pyarrow as pa
import pytest

from alveary import InvalidInput, grid
from alveary.client import Client
from support.analytic import START, field, rain
from support.server import ServiceProcess

pytestmark = pytest.mark.server

MAX_ZONES = 3000
MAX_FOCAL_K = 6


@pytest.fixture(scope="module")
def svc(analytic_store):
    """A service of this module's own, with small limits and no answer cache."""
    url, options = analytic_store
    cubes = [{"id": "analytic", "url": url, "storage_options": options}]
    opts = {"max_zones": MAX_ZONES, "max_focal_k": MAX_FOCAL_K, "answer_cache_bytes": 0}
    proc = ServiceProcess(cubes, options=opts).start()
    try:
        yield proc
    finally:
        proc.stop()


@pytest.fixture(scope="module")
def http(svc):
    with httpx.Client(base_url=svc.url, timeout=60) as client:
        yield client


def get(http, path, **params):
    r = http.get(f"/cubes/analytic/{path}", params=params)
    assert r.status_code == 200, r.text
    return r


def days_of(times):
    t = np.array([s.rstrip("Z") for s in times], dtype="datetime64[s]")
    return (t - START) / np.timedelta64(1, "D")


def loop_mean(zones, k, days, fn, statistic="mean"):
    """(time, zones): the statistic of fn at the centres of each zone's k-disk."""
    out = np.full((days.size, len(zones)), np.nan)
    level = int(grid.zone_level(np.uint64(zones[0])))
    for col, z in enumerate(zones):
        ids = grid.zone_disk(np.uint64(z), k)
        lat, lon = grid.zone_to_point(ids)
        v = fn(lat[None, :], lon[None, :], days[:, None])
        v = np.broadcast_to(v, (days.size, ids.size))
        area = grid.zone_areas(ids) / grid.zone_area(level)
        has = ~np.isnan(v)
        if statistic == "mean":
            w = np.where(has, area, 0.0)
            with np.errstate(invalid="ignore"):
                out[:, col] = (np.where(has, v, 0.0) * w).sum(1) / w.sum(1)
        else:  # max
            out[:, col] = np.where(has.any(1), np.where(has, v, -np.inf).max(1), np.nan)
    return out


def json_values(body, var):
    return np.array(
        [[np.nan if x is None else x for x in row["values"][var]] for row in body["zones"]]
    ).T


def test_focal_mean_across_a_pentagon_and_seams_matches_the_loop(http):
    # level 3 around the pentagon P (58.3 N, 11.25 E) and the cap seams running from it
    body = get(
        http,
        "bbox",
        bbox="-30,35,50,80",
        level=3,
        focal="mean",
        focal_k=2,
        datetime="../..",
        vars="temp",
    ).json()
    zones = np.array([row["zone"] for row in body["zones"]], dtype=np.uint64)
    assert any(grid.zone_areas(zones) < 0.9 * grid.zone_area(3))  # a pentagon is a target
    expected = loop_mean(zones, 2, days_of(body["times"]), field)
    np.testing.assert_allclose(json_values(body, "temp"), expected, rtol=1e-12)
    assert body["analysis"]["focal"] == {"statistic": "mean", "k": 2}


def test_focal_max_leaves_missing_values_out(http):
    # rain has no data south of 44.8 N: the box straddles that edge
    body = get(
        http,
        "bbox",
        bbox="5,42,11,47",
        level=7,
        focal="max",
        focal_k=2,
        vars="rain",
        datetime="../..",
    ).json()
    zones = np.array([row["zone"] for row in body["zones"]], dtype=np.uint64)
    expected = loop_mean(zones, 2, days_of(body["times"]), rain, "max")
    assert np.isnan(expected).any() and not np.isnan(expected).all()
    np.testing.assert_allclose(json_values(body, "rain"), expected, rtol=1e-12, equal_nan=True)


def plain_frame(http, path, var, **params):
    body = get(http, path, datetime="../..", vars=var, **params).json()
    index = pd.DatetimeIndex([t.rstrip("Z") for t in body["times"]])
    return pd.DataFrame(json_values(body, var), index=index), body


BOX = {"bbox": "5,42,11,47", "level": 7}


@pytest.mark.parametrize("agg", ["mean", "max", "count", "first", "last", "sum"])
def test_weekly_aggregation_matches_pandas_resample(http, agg):
    frame, _ = plain_frame(http, "bbox", "rain", **BOX)
    body = get(http, "bbox", datetime="../..", vars="rain", every="P7D", agg=agg, **BOX).json()
    grouped = frame.resample("W-MON", closed="left", label="left")  # ISO weeks from Monday
    ref = {"count": grouped.count, "sum": lambda: grouped.sum(min_count=1)}.get(
        agg, getattr(grouped, agg)
    )()
    ref = ref[grouped.size() > 0]
    assert body["times"] == [t.strftime("%Y-%m-%dT%H:%M:%SZ") for t in ref.index]
    np.testing.assert_allclose(
        json_values(body, "rain"), ref.to_numpy(), rtol=1e-12, equal_nan=True
    )
    assert body["time_bounds"] == [
        ["2024-04-29T00:00:00Z", "2024-05-06T00:00:00Z"],
        ["2024-05-06T00:00:00Z", "2024-05-13T00:00:00Z"],
    ]
    assert body["time_steps"] == grouped.size()[grouped.size() > 0].tolist() == [5, 1]


def test_monthly_stats_of_a_smoothed_field_in_every_format(http):
    params = dict(
        BOX, vars="temp", datetime="../..", every="P1M", stats="mean,count", focal="mean", focal_k=1
    )
    js = get(http, "bbox", **params).json()
    frame, plain = plain_frame(http, "bbox", "temp", **BOX)
    zones = np.array([row["zone"] for row in plain["zones"]], dtype=np.uint64)
    smooth = loop_mean(zones, 1, days_of(plain["times"]), field)  # focal first ...
    monthly = pd.DataFrame(smooth, index=frame.index).resample("MS").mean()  # ... then time
    np.testing.assert_allclose(js["stats"]["temp"]["mean"], monthly.mean(axis=1), rtol=1e-12)
    assert js["times"] == ["2024-05-01T00:00:00Z"] and js["time_steps"] == [6]
    assert js["time_bounds"] == [["2024-05-01T00:00:00Z", "2024-06-01T00:00:00Z"]]
    # Arrow: time, time_end, time_steps columns, the same numbers
    r = http.get("/cubes/analytic/bbox", params=dict(params, f="arrow"))
    table = pa.ipc.open_stream(r.content).read_all()
    assert table.column_names[:3] == ["time", "time_end", "time_steps"]
    assert table.column("time_steps").to_pylist() == [6]
    assert table.column("mean").to_pylist() == js["stats"]["temp"]["mean"]
    # CSV: the same columns as text
    r = http.get("/cubes/analytic/bbox", params=dict(params, f="csv"))
    rows = list(csv.DictReader(io.StringIO(r.text)))
    assert rows[0]["time_end"] == "2024-06-01T00:00:00Z" and rows[0]["time_steps"] == "6"
    assert float(rows[0]["mean"]) == js["stats"]["temp"]["mean"][0]
    # GeoJSON: the header carries the axis; the feature is the box
    gj = http.get("/cubes/analytic/bbox", params=dict(params, f="geojson")).json()
    assert gj["properties"]["time_bounds"] == js["time_bounds"]


def test_zone_values_with_periods_in_every_format(http):
    params = dict(vars="temp", datetime="../..", every="P7D", agg="max", k=1, lat=45.0, lon=7.5)
    js = get(http, "disk", **params).json()
    table = pa.ipc.open_stream(get(http, "disk", f="arrow", **params).content).read_all()
    assert table.column_names[:4] == ["zone", "time", "time_end", "time_steps"]
    got = dict(
        zip(
            zip(
                table.column("zone").to_pylist(),
                table.column("time_steps").to_pylist(),
                strict=True,
            ),
            table.column("temp").to_pylist(),
            strict=True,
        )
    )
    for row in js["zones"]:
        for steps, value in zip(js["time_steps"], row["values"]["temp"], strict=True):
            assert got[(row["zone"], steps)] == value
    rows = list(csv.DictReader(io.StringIO(get(http, "disk", f="csv", **params).text)))
    assert {r["time_end"] for r in rows} == {"2024-05-06T00:00:00Z", "2024-05-13T00:00:00Z"}
    gj = get(http, "disk", f="geojson", **params).json()
    assert gj["features"][0]["properties"]["temp"] == js["zones"][0]["values"]["temp"]
    assert gj["time_steps"] == [5, 1]


def test_climatology_warns_with_fewer_than_three_years(http):
    body = get(http, "point", lat=45.0, lon=7.5, climatology="month", vars="temp").json()
    assert "times" not in body and body["month"] == [5]
    assert body["analysis"]["climatology"]["years"] == 1
    assert (
        "3 years" in body["analysis"]["warnings"][0] or "three" in body["analysis"]["warnings"][0]
    )
    plain = get(http, "point", lat=45.0, lon=7.5, vars="temp", datetime="../..").json()
    mean = np.mean(plain["zones"][0]["values"]["temp"])
    assert body["zones"][0]["values"]["temp"][0] == pytest.approx(mean, rel=1e-12)
    table = pa.ipc.open_stream(
        get(http, "point", lat=45.0, lon=7.5, climatology="month", f="arrow").content
    ).read_all()
    assert "month" in table.column_names and "time" not in table.column_names
    assert b"warning" in table.schema.metadata[b"analysis"]


@pytest.mark.parametrize(
    ("params", "parameter", "allowed"),
    [
        ({"focal": "median"}, "focal", "mean"),
        ({"focal": "mean", "focal_k": "7"}, "focal_k", f"[1, {MAX_FOCAL_K}]"),
        ({"focal": "mean", "focal_k": "0"}, "focal_k", f"[1, {MAX_FOCAL_K}]"),
        ({"kernel": "1,-1"}, "kernel", "weights"),
        ({"every": "P2W"}, "every", "P1M"),
        ({"agg": "max"}, "agg", "every"),
        ({"every": "P1M", "agg": "median"}, "agg", "mean"),
        ({"climatology": "week"}, "climatology", "dayofyear"),
        ({"anomaly": "year"}, "anomaly", "month"),
        ({"focal": "gradient", "every": "P1M"}, "every", "gradient"),
    ],
)
def test_bad_parameters_are_named_with_their_range(http, params, parameter, allowed):
    r = http.get("/cubes/analytic/bbox", params={"bbox": "7,45,7.2,45.2", **params})
    assert r.status_code == 422, r.text
    problem = r.json()
    assert r.headers["content-type"].startswith("application/problem+json")
    assert problem["parameter"] == parameter and allowed in problem["allowed"]


def test_limits_count_the_halo_before_any_read(http, s3_server, analytic_store):
    url, _ = analytic_store
    box = {"bbox": "0,0,26,26", "level": 7}
    targets = grid.zones_in_bbox(0, 0, 26, 26, 7).size
    assert targets <= MAX_ZONES < grid.disk_union(grid.zones_in_bbox(0, 0, 26, 26, 7), 2).size
    mark = s3_server.mark()
    r = http.get("/cubes/analytic/bbox", params=dict(box, focal="mean", focal_k=2))
    assert r.status_code == 413, r.text
    assert "halo" in r.json()["limit"]
    chunk_gets = [q for q in s3_server.requests(since=mark, bucket=url) if "/c/" in q.path]
    assert chunk_gets == []
    assert http.get("/cubes/analytic/bbox", params=box).status_code == 200  # plain box fits


def test_client_passes_the_analysis_parameters(svc, http):
    analysis = {"kernel": [1.0, 0.5], "every": "P7D", "agg": "max"}
    raw = get(
        http, "bbox", vars="temp", datetime="../..", kernel="1.0,0.5", every="P7D", agg="max", **BOX
    ).json()
    with Client(svc.url) as c:
        body = c.bbox(
            "analytic", BOX["bbox"], level=7, vars="temp", datetime="../..", analysis=analysis
        )
        assert body == raw
        with pytest.raises(InvalidInput) as err:
            c.point("analytic", 45.0, 7.5, analysis={"smooth": "yes"})
        assert err.value.parameter == "analysis"
