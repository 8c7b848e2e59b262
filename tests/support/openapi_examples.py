"""The OpenAPI examples: which requests they are, how they are recorded and compared.

The files under ``openapi_examples/<operation_id>/<name>.json`` are recorded from a
service serving the demo cube (``alveary demo``) by
``python tests/support/openapi_examples.py BASE_URL [OPERATION_ID ...]`` (naming operations
records just those, keeping the cube version of the others), loaded into the OpenAPI document
by the service, and replayed by ``tests/api/test_api_examples.py``. The demo data are
invented. They are the service's own earlier answers: documentation that is kept true,
not a check against anything outside the code.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path
from typing import Any

import httpx

__all__ = [
    "EXAMPLES",
    "RECORDED_BASE",
    "ROOT",
    "compare",
    "compare_metrics",
    "record",
    "send",
    "with_base",
    "with_version",
]

ROOT = Path(__file__).resolve().parents[2] / "openapi_examples"

#: Absolute links in the examples (the landing page's) are written with this base URL;
#: the replay puts the live service's in its place.
RECORDED_BASE = "http://127.0.0.1:8000"
CUBE = "velmora-irrigation"
BASE = f"/cubes/{CUBE}"
WEEK = "2025-06-01T00:00:00Z/2025-06-07T00:00:00Z"
SQUARE = {
    "type": "Polygon",
    "coordinates": [
        [
            [-36.105, 30.545],
            [-36.095, 30.545],
            [-36.095, 30.553],
            [-36.105, 30.553],
            [-36.105, 30.545],
        ]
    ],
}

EDR = f"/collections/{CUBE}"
SQUARE_WKT = "POLYGON((" + ", ".join(f"{x} {y}" for x, y in SQUARE["coordinates"][0]) + "))"

# (operation id, name, summary, method, path, query, body, compare)
EXAMPLES: list[tuple[str, str, str, str, str, dict[str, Any], Any, str]] = [
    ("landing", "landing", "Links and version", "GET", "/", {}, None, "exact"),
    ("list_cubes", "all", "Every cube served", "GET", "/cubes", {}, None, "exact"),
    ("get_cube", "demo", "The demo cube's metadata", "GET", BASE, {}, None, "exact"),
    (
        "query_point",
        "week",
        "Soil moisture at a point for one week",
        "GET",
        f"{BASE}/point",
        {"lat": 30.55, "lon": -36.1, "vars": "soil_moisture", "datetime": WEEK},
        None,
        "exact",
    ),
    (
        "query_point",
        "bad-latitude",
        "Latitude out of range: 422 problem+json",
        "GET",
        f"{BASE}/point",
        {"lat": 91, "lon": -36.1},
        None,
        "exact",
    ),
    (
        "query_disk",
        "ring",
        "The zone under a fix and its six neighbours (k = 1)",
        "GET",
        f"{BASE}/disk",
        {
            "lat": 30.55,
            "lon": -36.1,
            "k": 1,
            "vars": "canopy_temperature",
            "datetime": "2025-07-15",
        },
        None,
        "exact",
    ),
    (
        "query_radius",
        "nearest",
        "Nearest zone with data within a GPS fix's 300 m accuracy",
        "GET",
        f"{BASE}/radius",
        {"lat": 30.55, "lon": -36.1, "meters": 300, "nearest": "true", "datetime": "2025-07-15"},
        None,
        "exact",
    ),
    (
        "query_bbox",
        "stats",
        "Daily mean, maximum and count of soil moisture over a box for a week",
        "GET",
        f"{BASE}/bbox",
        {
            "bbox": "-36.2,30.5,-36.0,30.6",
            "stats": "mean,max,count",
            "vars": "soil_moisture",
            "datetime": WEEK,
        },
        None,
        "exact",
    ),
    (
        "query_polygon",
        "values",
        "Per-zone values in a small field parcel on one day",
        "POST",
        f"{BASE}/polygon",
        {"datetime": "2025-07-15"},
        SQUARE,
        "exact",
    ),
    (
        "query_points",
        "two",
        "Two points at once (JSON here; pipelines ask for f=arrow)",
        "POST",
        f"{BASE}/points",
        {"vars": "soil_moisture", "datetime": "2025-07-15"},
        {"lat": [30.55, 30.62], "lon": [-36.1, -36.0]},
        "exact",
    ),
    (
        "edr_conformance",
        "classes",
        "The conformance classes",
        "GET",
        "/conformance",
        {},
        None,
        "exact",
    ),
    (
        "edr_collections",
        "all",
        "Every cube as a collection",
        "GET",
        "/collections",
        {},
        None,
        "exact",
    ),
    (
        "edr_collection",
        "demo",
        "The demo cube as an EDR collection",
        "GET",
        EDR,
        {},
        None,
        "exact",
    ),
    (
        "edr_position",
        "week",
        "Soil moisture at a point for one week, as a CoverageJSON PointSeries",
        "GET",
        f"{EDR}/position",
        {"coords": "POINT(-36.1 30.55)", "parameter-name": "soil_moisture", "datetime": WEEK},
        None,
        "exact",
    ),
    (
        "edr_position",
        "bad-crs",
        "A CRS other than CRS84: 400 with the EDR exception body",
        "GET",
        f"{EDR}/position",
        {"coords": "POINT(-36.1 30.55)", "crs": "EPSG:4326"},
        None,
        "exact",
    ),
    (
        "edr_position_post",
        "two",
        "Two points in a JSON body: a MultiPointSeries",
        "POST",
        f"{EDR}/position",
        {},
        {
            "coords": "MULTIPOINT((-36.1 30.55), (-36.0 30.62))",
            "parameter-name": ["soil_moisture"],
            "datetime": "2025-07-15T00:00:00Z",
        },
        "exact",
    ),
    (
        "edr_radius",
        "fix",
        "Zones within 300 m of a GPS fix on one day",
        "GET",
        f"{EDR}/radius",
        {
            "coords": "POINT(-36.1 30.55)",
            "within": "300",
            "within-units": "m",
            "parameter-name": "soil_moisture",
            "datetime": "2025-07-15T00:00:00Z",
        },
        None,
        "exact",
    ),
    (
        "edr_area",
        "mean",
        "Daily mean soil moisture over a field parcel for a week: a PolygonSeries",
        "GET",
        f"{EDR}/area",
        {
            "coords": SQUARE_WKT,
            "stats": "mean",
            "parameter-name": "soil_moisture",
            "datetime": WEEK,
        },
        None,
        "exact",
    ),
    (
        "edr_area_post",
        "values",
        "Per-zone values in a field parcel on one day, parameters in a JSON body",
        "POST",
        f"{EDR}/area",
        {},
        {"coords": SQUARE_WKT, "datetime": "2025-07-15T00:00:00Z"},
        "exact",
    ),
    (
        "edr_cube",
        "box",
        "Canopy temperature in a box on one day, as GeoJSON",
        "GET",
        f"{EDR}/cube",
        {
            "bbox": "-36.105,30.545,-36.095,30.553",
            "parameter-name": "canopy_temperature",
            "datetime": "2025-07-15T00:00:00Z",
            "f": "GeoJSON",
        },
        None,
        "exact",
    ),
    (
        "find_zone",
        "at-point",
        "The level-12 zone under a point",
        "GET",
        "/zones",
        {"lat": 30.55, "lon": -36.1, "level": 12},
        None,
        "exact",
    ),
    ("get_zone", "pentagon", "A pentagon: five neighbours", "GET", "/zones/5n", {}, None, "exact"),
    (
        "map_tilesets",
        "demo",
        "The demo cube's map tiles: tile set and TileJSON template",
        "GET",
        f"/collections/{CUBE}/map/tiles",
        {"vars": "soil_moisture", "colormap": "clover"},
        None,
        "exact",
    ),
    (
        "map_tile",
        "bad-row",
        "A row past the tile matrix: 422 problem+json (tiles themselves are PNG)",
        "GET",
        f"/collections/{CUBE}/map/tiles/WebMercatorQuad/3/8/1",
        {},
        None,
        "exact",
    ),
    (
        "vector_tilesets",
        "demo",
        "The demo cube's zones as vector tiles: tile set and TileJSON template",
        "GET",
        f"/collections/{CUBE}/tiles",
        {},
        None,
        "exact",
    ),
    (
        "vector_tile",
        "bad-zoom",
        "A zoom past 24: 422 problem+json (tiles themselves are Mapbox Vector Tiles)",
        "GET",
        f"/collections/{CUBE}/tiles/WebMercatorQuad/25/0/0",
        {},
        None,
        "exact",
    ),
    (
        "legend",
        "bad-format",
        "An unknown format: 422 problem+json (legends themselves are PNG or SVG)",
        "GET",
        f"/collections/{CUBE}/legend",
        {"vars": "soil_moisture", "f": "gif"},
        None,
        "exact",
    ),
    ("health", "ok", "The process is alive", "GET", "/healthz", {}, None, "exact"),
    ("ready", "ok", "Every store answers", "GET", "/readyz", {}, None, "exact"),
    (
        "metrics",
        "text",
        "Prometheus text format (abridged)",
        "GET",
        "/metrics",
        {},
        None,
        "metrics",
    ),
]


# Examples send their own request id, so the problem documents they record are whole.
EXAMPLE_REQUEST_ID = "example-request-0001"


def send(client: httpx.Client, method: str, path: str, query: dict, body: Any) -> httpx.Response:
    headers = {"X-Request-Id": EXAMPLE_REQUEST_ID}
    return client.request(method, path, params=query, json=body, headers=headers)


_JSON_MEDIA = (
    "application/json",
    "application/problem+json",
    "application/geo+json",
    "application/vnd.cov+json",
)


def record(base_url: str, root: Path = ROOT, only: set[str] | None = None) -> None:
    """Send every example request to a running service and write the example files.

    ``only``: record just these operations, with the cube version of the examples
    already recorded (``get_cube/demo``) in place of the live one.
    """
    with httpx.Client(base_url=base_url, timeout=30) as client:
        live = client.get(BASE).json()["version"]
        recorded = json.loads((root / "get_cube" / "demo.json").read_text())
        kept = recorded["response"]["body"]["version"]
        for op_id, name, summary, method, path, query, body, how in EXAMPLES:
            if only is not None and op_id not in only:
                continue
            r = send(client, method, path, query, body)
            media = r.headers["content-type"]
            if media.startswith(_JSON_MEDIA):
                content: Any = with_base(r.json(), base_url.rstrip("/"), RECORDED_BASE)
                if only is not None:
                    content = with_version(content, live, kept)
            else:
                content = r.text.splitlines()[:3] if how == "metrics" else r.text
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


def with_base(body: Any, recorded: str, live: str) -> Any:
    """``body`` with every string that starts with the base URL ``recorded`` starting with
    ``live`` instead (absolute links name the host they were served from)."""
    if isinstance(body, dict):
        return {k: with_base(v, recorded, live) for k, v in body.items()}
    if isinstance(body, list):
        return [with_base(v, recorded, live) for v in body]
    if isinstance(body, str) and body.startswith(recorded):
        return live + body[len(recorded) :]
    return body


def with_version(body: Any, recorded: str, live: str) -> Any:
    """``body`` with the cube version it was recorded from replaced by the live one (a
    build of the same cube gets a new version id, and nothing else changes)."""
    if isinstance(body, dict):
        return {k: with_version(v, recorded, live) for k, v in body.items()}
    if isinstance(body, list):
        return [with_version(v, recorded, live) for v in body]
    return live if body == recorded else body


def compare(expected: Any, got: Any, where: str = "body") -> None:
    """Assert that a whole response body matches an example (floats to 1e-9)."""
    if isinstance(expected, dict):
        assert isinstance(got, dict), where
        assert set(expected) == set(got), f"{where}: keys {sorted(expected)} != {sorted(got)}"
        for k, v in expected.items():
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


def compare_metrics(expected: str, got: str) -> None:
    """The abridged metrics example: its comment lines appear verbatim in the live text,
    and each sample it shows is exported under the same name and labels (counts differ
    from run to run)."""
    lines = got.splitlines()
    for line in expected.splitlines():
        if line.startswith("#"):
            assert line in lines, line
        else:
            series = line.rsplit(" ", 1)[0]
            assert any(g.rsplit(" ", 1)[0] == series for g in lines), series


if __name__ == "__main__":  # pragma: no cover
    record(sys.argv[1], only=set(sys.argv[2:]) or None)
