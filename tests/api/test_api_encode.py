"""The encoders without a server: a result built here by hand, encoded in every format and
read back by independent readers (the standard library's json and csv modules, pyarrow's
IPC reader); each must give back exactly the arrays that went in."""

from __future__ import annotations

import asyncio
import csv
import io
import json
import re

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest

from alveary import grid
from alveary.api._encode import encode, encode_blocks
from alveary.api._gate import Busy, CellGate
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


# -- block-by-block encoding, numbers as stored, CSV columns --------------------------
def big_result(n=37, dtype="float32", scale=None, offset=None) -> ZoneResult:
    rng = np.random.default_rng(7)
    zones = np.unique(grid.point_to_zone(rng.uniform(-80, 80, n), rng.uniform(-180, 180, n), 9))
    if dtype == "float32":
        values = rng.normal(290.0, 20.0, (TIMES.size, zones.size)).astype(np.float32)
        values = values.astype(np.float64)
    else:  # packed: stored integers decoded as the reader does (float64 arithmetic)
        stored = rng.integers(-30000, 30000, (TIMES.size, zones.size))
        values = stored * scale + (offset or 0.0)
    values[0, ::5] = np.nan
    info = {"v": ResultVariable("v", "K", "value", dtype, scale, offset)}
    extra = {"distance_m": rng.uniform(0, 1e4, zones.size)}
    return ZoneResult("c", "v1", 9, info, TIMES, zones, {"v": values}, extra, "radius")


@pytest.mark.parametrize("fmt", ["json", "geojson", "csv", "arrow"])
def test_blocks_join_to_the_whole_answer(fmt):
    result = big_result()
    whole, media = encode(result, fmt)
    blocks, media2 = encode_blocks(result, fmt, block_rows=5)  # two zones per block
    parts = list(blocks)
    assert media == media2 and len(parts) > 10
    joined = b"".join(parts)
    if fmt == "arrow":  # pyarrow reads the many record batches as one table
        assert pa.ipc.open_stream(joined).read_all().equals(pa.ipc.open_stream(whole).read_all())
    elif fmt == "csv":  # pandas reads the same frame
        pd.testing.assert_frame_equal(
            pd.read_csv(io.BytesIO(joined)), pd.read_csv(io.BytesIO(whole))
        )
    else:  # the standard library's json reads the same document
        assert json.loads(joined) == json.loads(whole)


def significant_digits(text: str) -> int:
    mantissa = text.lower().split("e")[0].replace("-", "").replace(".", "").strip("0")
    return len(mantissa)


def test_float32_values_print_as_the_shortest_float32_decimal():
    result = big_result()
    stored = result.values["v"].astype(np.float32)
    body = json.loads(encode(result, "json")[0])
    got = np.array([row["values"]["v"] for row in body["zones"]], dtype=float).T
    # numpy's float32 reading of each printed number is the stored float32
    np.testing.assert_array_equal(got.astype(np.float32), stored)
    frame = pd.read_csv(io.BytesIO(encode(result, "csv")[0]), dtype={"v": str})
    texts = frame["v"].fillna("").tolist()
    flat = stored.T.reshape(-1)
    for text, x in zip(texts, flat, strict=True):
        if np.isnan(x):
            assert text == ""
            continue
        assert float(np.float32(text)) == float(x)
        # as short as numpy's shortest unique float32 decimal
        shortest = np.format_float_scientific(np.float32(x), unique=True)
        assert significant_digits(text) == significant_digits(shortest), (text, shortest)
    # Arrow keeps the stored type.
    table = pa.ipc.open_stream(encode(result, "arrow")[0]).read_all()
    assert table.schema.field("v").type == pa.float32()


def test_packed_values_print_with_the_decimals_that_give_back_the_stored_integers():
    result = big_result(dtype="int16", scale=1e-4, offset=0.5)
    raw = json.loads(encode(result, "json")[0])
    got = np.array([row["values"]["v"] for row in raw["zones"]], dtype=float).T
    have = ~np.isnan(result.values["v"])
    stored = np.round((result.values["v"] - 0.5) / 1e-4)
    np.testing.assert_array_equal(np.round((got[have] - 0.5) / 1e-4), stored[have])
    text = encode(result, "json")[0].decode()
    numbers = re.findall(r'"v":\[([^\]]*)\]', text)
    for series in numbers:
        for token in series.split(","):
            if token != "null":
                assert len(token.split(".")[-1]) <= 4, token  # scale 1e-4: four decimals


def test_csv_rows_carry_zone_text_and_centre():
    result = big_result()
    frame = pd.read_csv(io.BytesIO(encode(result, "csv")[0]))
    assert list(frame.columns[:5]) == ["zone", "zone_text", "lat", "lon", "time"]
    zones = frame["zone"].to_numpy(dtype=np.uint64)
    assert zones.tolist() == np.repeat(result.zones, TIMES.size).tolist()
    assert frame["zone_text"].tolist() == grid.zone_to_text(zones).tolist()
    lat, lon = grid.zone_to_point(zones)
    np.testing.assert_array_equal(frame["lat"].to_numpy(), lat)  # exact through the text
    np.testing.assert_array_equal(frame["lon"].to_numpy(), lon)
    np.testing.assert_allclose(
        frame["distance_m"].to_numpy(), np.repeat(result.extra["distance_m"], TIMES.size)
    )


def test_gate_is_first_come_first_served_and_refuses_after_the_wait():
    async def run():
        gate = CellGate(100, wait=0.2, small=10)
        order = []

        async def job(name, cells, hold):
            async with gate.hold(cells):
                order.append(name)
                await asyncio.sleep(hold)

        async def refused():
            await asyncio.sleep(0.01)
            with pytest.raises(Busy):
                async with gate.hold(100):
                    pass

        await asyncio.gather(job("a", 60, 0.05), job("b", 60, 0.0), job("c", 5, 0.0))
        assert order == ["a", "c", "b"]  # c is small: it never waits
        await asyncio.gather(job("long", 100, 0.5), refused())
        assert gate.in_use == 0 and gate.refused == 1

    asyncio.run(run())
