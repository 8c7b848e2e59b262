"""The OpenAPI examples under openapi_examples/: every operation has one, they are in the
live OpenAPI document, and replayed against a real service serving the demo cube (built
here by ``alveary.ingest.build_demo``) they get the documented response, whole.

The examples are the service's own earlier answers: these tests keep the documentation
true; they are not a check of the code against anything outside it."""

from __future__ import annotations

import httpx
import pytest

from alveary.api._openapi import load_examples
from support.openapi_examples import (
    CUBE,
    EXAMPLES,
    RECORDED_BASE,
    ROOT,
    compare,
    compare_metrics,
    send,
    with_base,
    with_version,
)
from support.server import ServiceProcess

pytestmark = pytest.mark.server


@pytest.fixture(scope="module")
def demo_service(tmp_path_factory):
    from alveary.ingest import build_demo

    store = tmp_path_factory.mktemp("demo-store")
    build_demo(store)
    with ServiceProcess(store=store, env={"ALVEARY_EXAMPLES": str(ROOT)}) as proc:
        yield proc


@pytest.fixture(scope="module")
def versions(demo_service):
    """(recorded, live) version of the demo cube: a new build has a new version id."""
    recorded = load_examples(ROOT)["get_cube"]["demo"]["response"]["body"]["version"]
    live = httpx.get(f"{demo_service.url}/cubes/{CUBE}").json()["version"]
    return recorded, live


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
def test_replay(demo_service, versions, op_id, name, example):
    req, expected = example["request"], example["response"]
    with httpx.Client(base_url=demo_service.url, timeout=30) as client:
        r = send(client, req["method"], req["path"], req["query"], req["body"])
    assert r.status_code == expected["status"]
    assert r.headers["content-type"].split(";")[0] == expected["content_type"]
    if expected["compare"] == "metrics":
        compare_metrics(expected["body"], r.text)
        return
    body = with_base(expected["body"], RECORDED_BASE, demo_service.url)
    compare(with_version(body, *versions), r.json())
