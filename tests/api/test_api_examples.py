"""The OpenAPI examples under openapi_examples/: every operation has one, they are in the
live OpenAPI document, and replayed against a real service they get the documented
response (the numbers of the analytic field, so the examples are also checked against
``support.analytic.field``)."""

from __future__ import annotations

import httpx
import numpy as np
import pytest

from alveary.api._openapi import load_examples
from support.analytic import field
from support.openapi_examples import EXAMPLES, ROOT, compare, send
from support.server import ServiceProcess


@pytest.fixture(scope="module")
def demo_service(analytic_store):
    url, options = analytic_store
    cubes = [{"id": "demo", "url": url, "title": "Analytic", "storage_options": options}]
    with ServiceProcess(cubes, env={"ALVEARY_EXAMPLES": str(ROOT)}) as proc:
        yield proc


def all_examples():
    return [
        (op, name, ex)
        for op, named in sorted(load_examples(ROOT).items())
        for name, ex in named.items()
    ]


def test_every_operation_has_an_example_in_the_schema(demo_service):
    schema = httpx.get(demo_service.url + "/openapi.json").json()
    ops = {op["operationId"]: op for item in schema["paths"].values() for op in item.values()}
    files = load_examples(ROOT)
    assert set(files) == set(ops) == {e[0] for e in EXAMPLES}
    for op_id, op in ops.items():
        assert op.get("summary"), op_id
        shown = [
            name
            for response in op["responses"].values()
            for content in response.get("content", {}).values()
            for name in content.get("examples", {})
        ]
        assert set(shown) == set(files[op_id]), op_id


@pytest.mark.parametrize(
    ("op_id", "name", "example"), all_examples(), ids=lambda v: v if isinstance(v, str) else ""
)
def test_replay(demo_service, op_id, name, example):
    req, expected = example["request"], example["response"]
    with httpx.Client(base_url=demo_service.url, timeout=30) as client:
        r = send(client, req["method"], req["path"], req["query"], req["body"])
    assert r.status_code == expected["status"]
    assert r.headers["content-type"].split(";")[0] == expected["content_type"]
    if expected["compare"] == "status":
        assert r.text.startswith(expected["body"].splitlines()[0])
        return
    compare(expected["body"], r.json())


def test_point_example_is_the_field():
    example = load_examples(ROOT)["query_point"]["series"]["response"]["body"]
    row = example["zones"][0]
    days = np.arange(3.0, 6.0)  # 2024-05-04 .. 2024-05-06
    np.testing.assert_allclose(
        row["values"]["temp"], field(row["lat"], row["lon"], days), rtol=1e-12
    )
