"""The encoders without a server: a result built here by hand, encoded in every format and
read back by independent readers (the standard library's json and csv modules, pyarrow's
IPC reader); each must give back exactly the arrays that went in."""

from __future__ import annotations

import csv
import io
import json

import numpy as np
import pyarrow as pa

from alveary import grid
from alveary.api._encode import encode
from alveary.query import ResultVariable, StatsResult, ZoneResult

TIMES = np.array(["2024-05-01T00:00:00", "2024-05-02T06:00:00"], dtype="datetime64[s]")
ZONES = grid.point_to_zone(np.array([45.2, -10.0, 0.0]), np.array([7.6, 100.0, 180.0]), 7)
VALUES = np.array([[1.5, np.nan, -2.25], [0.1, 3.0, np.nan]])  # (time, zone)


def zone_result() -> ZoneResult:
    info = {"t": ResultVariable("t", "K", "temperature")}
    steps = {"steps": np.array([0, 1, 1], dtype=np.int32)}
    return ZoneResult("c", "v1", 7, info, TIMES, ZONES, {"t": VALUES}, steps, "disk")


def test_json_rows_are_the_arrays():
    body = json.loads(encode(zone_result(), "json")[0])
    assert body["times"] == ["2024-05-01T00:00:00Z", "2024-05-02T06:00:00Z"]
    assert [row["zone"] for row in body["zones"]] == ZONES.tolist()
    got = np.array([row["values"]["t"] for row in body["zones"]], dtype=float).T  # None -> nan
    np.testing.assert_array_equal(got, VALUES)
    assert [row["steps"] for row in body["zones"]] == [0, 1, 1]
    assert body["variables"] == {"t": {"units": "K", "long_name": "temperature"}}


def test_arrow_and_csv_long_form_are_the_arrays():
    table = pa.ipc.open_stream(encode(zone_result(), "arrow")[0]).read_all()
    assert table.column("zone").to_pylist() == np.repeat(ZONES, 2).tolist()  # zone-major
    assert table.column("t").null_count == 2
    np.testing.assert_array_equal(
        np.array(table.column("t").to_pylist(), dtype=float), VALUES.T.reshape(-1)
    )
    assert table.schema.field("t").metadata[b"units"] == b"K"
    rows = list(csv.DictReader(io.StringIO(encode(zone_result(), "csv")[0].decode())))
    assert [int(r["zone"]) for r in rows] == np.repeat(ZONES, 2).tolist()
    assert [r["time"] for r in rows] == ["2024-05-01T00:00:00Z", "2024-05-02T06:00:00Z"] * 3
    got = np.array([float(r["t"]) if r["t"] else np.nan for r in rows])
    np.testing.assert_array_equal(got, VALUES.T.reshape(-1))  # exact through the text


def test_statistics_in_json_and_arrow():
    stats = {"t": {"mean": np.array([1.0, np.nan]), "area_m2": np.array([5.0, 0.0])}}
    info = {"t": ResultVariable("t", "K", "temperature")}
    result = StatsResult("c", "v1", 7, info, TIMES, 3, 15.0, ("mean",), stats)
    body = json.loads(encode(result, "json")[0])
    assert body["stats"] == {"t": {"mean": [1.0, None], "area_m2": [5.0, 0.0]}}
    assert body["zone_count"] == 3 and body["area_m2"] == 15.0
    table = pa.ipc.open_stream(encode(result, "arrow")[0]).read_all()
    assert table.column("mean").to_pylist() == [1.0, None]
    assert table.schema.metadata[b"zone_count"] == b"3"
