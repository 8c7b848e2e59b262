"""The OpenAPI examples: which requests they are, how they are recorded and compared.

The files under ``openapi_examples/<operation_id>/<name>.json`` are recorded from a
running service by ``python tests/support/openapi_examples.py BASE_URL`` (the service
serving the analytic cube of ``support.analytic`` under the id ``demo``), loaded into the
OpenAPI document by the service, and replayed by ``tests/api/test_api_examples.py``.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path
from typing import Any

import httpx

__all__ = ["EXAMPLES", "ROOT", "compare", "record", "send"]

ROOT = Path(__file__).resolve().parents[2] / "openapi_examples"

SQUARE = {
    "type": "Polygon",
    "coordinates": [[[7.0, 45.0], [7.3, 45.0], [7.3, 45.2], [7.0, 45.2], [7.0, 45.0]]],
}

# (operation id, name, summary, method, path, query, body, compare)
EXAMPLES: list[tuple[str, str, str, str, str, dict[str, Any], Any, str]] = [
    ("landing", "landing", "Links and version", "GET", "/", {}, None, "exact"),
    ("list_cubes", "all", "Every cube served", "GET", "/cubes", {}, None, "exact"),
    ("get_cube", "demo", "The demo cube's metadata", "GET", "/cubes/demo", {}, None, "exact"),
    (
        "query_point",
        "series",
        "Temperature series at a point, open-ended interval",
        "GET",
        "/cubes/demo/point",
        {"lat": 45.2, "lon": 7.6, "vars": "temp", "datetime": "2024-05-04T00:00:00Z/.."},
        None,
        "exact",
    ),
    (
        "query_point",
        "bad-latitude",
        "Latitude out of range: 422 problem+json",
        "GET",
        "/cubes/demo/point",
        {"lat": 91, "lon": 7.6},
        None,
        "exact",
    ),
    (
        "query_disk",
        "ring",
        "The zone under a fix and its neighbours (k = 1)",
        "GET",
        "/cubes/demo/disk",
        {"lat": 45.2, "lon": 7.6, "k": 1, "vars": "temp"},
        None,
        "exact",
    ),
    (
        "query_radius",
        "nearest",
        "Nearest zone with rain data within a GPS fix's accuracy",
        "GET",
        "/cubes/demo/radius",
        {"lat": 44.75, "lon": 7.6, "meters": 20000, "vars": "rain", "nearest": "true"},
        None,
        "exact",
    ),
    (
        "query_bbox",
        "stats",
        "Mean and maximum per day over a box",
        "GET",
        "/cubes/demo/bbox",
        {
            "bbox": "7.0,45.0,7.3,45.2",
            "stats": "mean,max,count",
            "vars": "temp",
            "datetime": "../..",
        },
        None,
        "exact",
    ),
    (
        "query_polygon",
        "values",
        "Per-zone values in a polygon at the latest step",
        "POST",
        "/cubes/demo/polygon",
        {"vars": "temp"},
        SQUARE,
        "exact",
    ),
    (
        "query_points",
        "two",
        "Two points at once (JSON; Arrow with f=arrow)",
        "POST",
        "/cubes/demo/points",
        {"vars": "temp"},
        {"lat": [45.2, 44.9], "lon": [7.6, 7.1]},
        "exact",
    ),
    (
        "find_zone",
        "at-point",
        "The level-9 zone under a point",
        "GET",
        "/zones",
        {"lat": 45.2, "lon": 7.6, "level": 9},
        None,
        "exact",
    ),
    ("get_zone", "pentagon", "A pentagon: five neighbours", "GET", "/zones/5n", {}, None, "exact"),
    ("health", "ok", "The process is alive", "GET", "/healthz", {}, None, "exact"),
    ("ready", "ok", "Every store answers", "GET", "/readyz", {}, None, "exact"),
    ("metrics", "text", "Prometheus text format (abridged)", "GET", "/metrics", {}, None, "status"),
]

_IGNORED = {"version"}  # differs between builds of the same cube


def send(client: httpx.Client, method: str, path: str, query: dict, body: Any) -> httpx.Response:
    return client.request(method, path, params=query, json=body)


def record(base_url: str, root: Path = ROOT) -> None:
    """Send every example request to a running service and write the example files."""
    with httpx.Client(base_url=base_url, timeout=30) as client:
        for op_id, name, summary, method, path, query, body, how in EXAMPLES:
            r = send(client, method, path, query, body)
            media = r.headers["content-type"]
            if media.startswith(
                ("application/json", "application/problem+json", "application/geo+json")
            ):
                content: Any = r.json()
            else:
                content = r.text.splitlines()[:3] if how == "status" else r.text
                content = "\n".join(content) if isinstance(content, list) else content
            doc = {
                "summary": summary,
                "request": {"method": method, "path": path, "query": query, "body": body},
                "response": {
                    "status": r.status_code,
                    "content_type": media.split(";")[0],
                    "compare": how,
                    "body": content,
                },
            }
            out = root / op_id / f"{name}.json"
            out.parent.mkdir(parents=True, exist_ok=True)
            out.write_text(json.dumps(doc, indent=2, ensure_ascii=False) + "\n")


def compare(expected: Any, got: Any, where: str = "body") -> None:
    """Assert that a response body matches an example (floats to 1e-9, versions ignored)."""
    if isinstance(expected, dict):
        assert isinstance(got, dict), where
        assert set(expected) == set(got), f"{where}: keys {sorted(expected)} != {sorted(got)}"
        for k, v in expected.items():
            if k not in _IGNORED:
                compare(v, got[k], f"{where}.{k}")
    elif isinstance(expected, list):
        assert isinstance(got, list) and len(expected) == len(got), where
        for i, (a, b) in enumerate(zip(expected, got, strict=True)):
            compare(a, b, f"{where}[{i}]")
    elif isinstance(expected, float) and isinstance(got, int | float):
        assert math.isclose(expected, got, rel_tol=1e-9, abs_tol=1e-12), (
            f"{where}: {expected} != {got}"
        )
    else:
        assert expected == got, f"{where}: {expected!r} != {got!r}"


if __name__ == "__main__":  # pragma: no cover
    record(sys.argv[1])
