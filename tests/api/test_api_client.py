"""The Python client against the real service: every operation once, sync and async, and
problem documents raised as the package's exceptions. Arrow answers are read by pyarrow
and compared with the JSON answer to the same query."""

from __future__ import annotations

import asyncio
import datetime as dt

import numpy as np
import pyarrow as pa
import pytest

from alveary import InvalidInput, LimitExceeded, NotFound
from alveary.client import AsyncClient, Client
from support.analytic import field

SQUARE = {"type": "Polygon", "coordinates": [[[7, 45], [7.4, 45], [7.4, 45.3], [7, 45.3], [7, 45]]]}


@pytest.fixture(scope="module")
def client(service):
    with Client(service.url) as c:
        yield c


def test_every_operation(client):
    assert client.health() == {"status": "ok"}
    assert client.ready()["ready"] is True
    assert client.landing()["title"] == "alveary"
    assert [c["id"] for c in client.cubes()["cubes"]] == ["analytic"]
    meta = client.cube("analytic")
    assert meta["levels"] == [3, 7] and meta["time"]["steps"] == 6
    point = client.point("analytic", 45.2, 7.6, datetime=(dt.datetime(2024, 5, 2), None))
    assert len(point["times"]) == 5
    row = point["zones"][0]
    np.testing.assert_allclose(
        row["values"]["temp"], field(row["lat"], row["lon"], np.arange(1.0, 6.0))
    )
    assert len(client.disk("analytic", 45.2, 7.6, k=2)["zones"]) == 19
    assert len(client.disk("analytic", k=1, zone=row["zone_text"])["zones"]) == 7
    near = client.radius("analytic", 45.2, 7.6, 30_000, nearest=True)
    assert len(near["zones"]) == 1
    stats = client.bbox("analytic", (7.0, 45.0, 7.4, 45.3), stats=["mean", "count"])
    poly = client.polygon("analytic", SQUARE, stats="mean,count")
    assert stats["stats"] == poly["stats"]  # the same zones either way
    table = client.points("analytic", [45.2, -10.0], [7.6, 30.0], vars=["temp"])
    assert isinstance(table, pa.Table) and table.num_rows == 2
    assert table.column("point").to_pylist() == [0, 1]
    zone = client.zone(row["zone"])
    assert zone["zone_text"] == row["zone_text"]
    assert client.find_zone(45.2, 7.6, 7) == zone
    assert "alveary_requests_total" in client.metrics()


def test_arrow_matches_json(client):
    js = client.polygon("analytic", SQUARE, datetime="../..")
    table = client.polygon("analytic", SQUARE, datetime="../..", f="arrow")
    assert table.num_rows == len(js["zones"]) * len(js["times"])
    from_json = np.array([v for z in js["zones"] for v in z["values"]["temp"]])
    np.testing.assert_array_equal(table.column("temp").to_numpy(), from_json)


def test_errors_are_raised_as_package_exceptions(client):
    with pytest.raises(InvalidInput) as info:
        client.point("analytic", 91, 0)
    assert info.value.parameter == "lat"
    with pytest.raises(NotFound):
        client.cube("nowhere")
    with pytest.raises(InvalidInput) as info:
        client.disk("analytic", 0, 0, k=1, vars="snow")
    assert info.value.parameter == "vars"
    with pytest.raises(LimitExceeded) as info:
        client.disk("analytic", 0, 0, k=500)
    assert info.value.limit == "k"


def test_async_client(service):
    async def main():
        async with AsyncClient(service.url) as c:
            answers = await asyncio.gather(
                c.point("analytic", 45.2, 7.6),
                c.disk("analytic", 45.2, 7.6, k=1),
                c.zone("5n"),
            )
            return answers

    point, disk, zone = asyncio.run(main())
    assert point["kind"] == "point" and len(disk["zones"]) == 7 and zone["pentagon"] is True
