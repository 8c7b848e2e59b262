"""The OpenAPI document: problem+json responses on every operation, and the examples.

Examples live as files under ``openapi_examples/<operation_id>/<name>.json`` at the top of
the repository (or wherever ``ALVEARY_EXAMPLES`` points). Each file holds one request and
the response the service gives to it::

    {"summary": "...",
     "request": {"method": "GET", "path": "/cubes/demo/point",
                 "query": {"lat": 45.2, "lon": 7.6}, "body": null},
     "response": {"status": 200, "content_type": "application/json", "body": {...}}}

They are loaded into the schema (parameter, request-body and response examples), and a
test replays every one against a running service.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

from fastapi import FastAPI
from fastapi.openapi.docs import get_swagger_ui_html
from fastapi.openapi.utils import get_openapi
from starlette.responses import FileResponse, HTMLResponse, Response

from alveary import __version__
from alveary._errors import (
    AlvearyError,
    ChunkDecodeError,
    DeadlineExceeded,
    InvalidInput,
    LimitExceeded,
    NotFound,
    StoreUnavailable,
    http_status,
)
from alveary.api._schemas import EdrProblem, PointsBody, Problem

__all__ = ["DOCS_ASSETS", "examples_dir", "install_docs", "install_openapi", "load_examples"]

# The problems each operation documents, by error class; the status comes from the one
# table (alveary._errors.HTTP_STATUS).
_PROBLEM_TEXT: tuple[tuple[type[AlvearyError], str], ...] = (
    (NotFound, "Unknown cube or zone."),
    (
        LimitExceeded,
        "Over a configured limit (zones, k, vertices, points, time steps × zones, body).",
    ),
    (InvalidInput, "Invalid parameter: the detail names it and the allowed range."),
    (ChunkDecodeError, "A stored chunk cannot be decoded."),
    (StoreUnavailable, "The store cannot be reached (Retry-After says when to try again)."),
    (DeadlineExceeded, "The request ran past its deadline."),
)
_PROBLEMS = {str(http_status(cls).status): text for cls, text in _PROBLEM_TEXT}
_GRID_PROBLEMS = tuple(str(http_status(cls).status) for cls in (NotFound, InvalidInput))
_META_OPS = {"landing", "health", "ready", "metrics"}
# OGC API - EDR operations answer invalid parameters with 400 (not 422) and the EDR
# exception body; their documents have no store reads, their queries every fault.
_EDR_PREFIX = "edr_"
_EDR_INVALID = "Invalid or unsupported parameter (including one the operation does not define)."
_EDR_DOCS = {"edr_conformance": ("400",), "edr_collections": ("400",)}

DESCRIPTION = """\
Spatial and time queries over hexagonal, equal-area data cubes.

Zones are the cells of an equal-area hexagonal grid (twelve pentagons per level). A zone id
is an integer that fits in 53 bits (exact in JavaScript); every answer also carries its
readable text form, and `/zones/{zone}` accepts either.

* `datetime` follows OGC API: an RFC 3339 instant selects the time step in force at that
  instant (the latest at or before it); `start/end` selects every step in between, ends
  included, `..` for an open end. Without it, the latest step.
* Formats by `Accept` or `f`: JSON (default), GeoJSON, Arrow IPC stream, CSV; the same
  numbers in each. Missing data is `null` (JSON), null (Arrow) or an empty field (CSV).
* Every answer has an ETag (cube version + normalised query) and Cache-Control;
  `If-None-Match` gets 304.
* Errors are `application/problem+json` (RFC 9457). A query parameter an operation does
  not take is refused (422 naming it), so a typo never goes unnoticed.
* Every GET also answers HEAD (the same status and headers, no body).

Values are only as good as the data the cubes were built from; for decisions such as
irrigation or flood response, local authorities and licensed practice decide.
"""


def examples_dir() -> Path:
    """Where the example files are: ``$ALVEARY_EXAMPLES`` or ``openapi_examples/``."""
    env = os.environ.get("ALVEARY_EXAMPLES")
    if env:
        return Path(env)
    here = Path(__file__).resolve()
    for parent in here.parents:
        candidate = parent / "openapi_examples"
        if candidate.is_dir():
            return candidate
    return Path("openapi_examples")


def load_examples(root: Path | None = None) -> dict[str, dict[str, dict[str, Any]]]:
    """operation id -> example name -> example, from the example files."""
    root = examples_dir() if root is None else Path(root)
    out: dict[str, dict[str, dict[str, Any]]] = {}
    if not root.is_dir():
        return out
    for path in sorted(root.glob("*/*.json")):
        out.setdefault(path.parent.name, {})[path.stem] = json.loads(path.read_text())
    return out


def _add_examples(op: dict[str, Any], examples: dict[str, dict[str, Any]]) -> None:
    for name, ex in examples.items():
        request, response = ex.get("request", {}), ex.get("response", {})
        summary = ex.get("summary", name)
        query = request.get("query") or {}
        for param in op.get("parameters", []):
            if param.get("in") == "query" and param["name"] in query:
                param.setdefault("examples", {})[name] = {
                    "summary": summary,
                    "value": query[param["name"]],
                }
            if param.get("in") == "path":
                value = _path_value(op, request.get("path", ""), param["name"])
                if value is not None:
                    param.setdefault("examples", {})[name] = {"summary": summary, "value": value}
        if request.get("body") is not None and "requestBody" in op:
            content = op["requestBody"].setdefault("content", {}).setdefault("application/json", {})
            content.setdefault("examples", {})[name] = {
                "summary": summary,
                "value": request["body"],
            }
        status = str(response.get("status", 200))
        media = response.get("content_type", "application/json").split(";")[0]
        if "body" in response:
            resp = op.setdefault("responses", {}).setdefault(status, {"description": summary})
            entry = resp.setdefault("content", {}).setdefault(media, {})
            entry.setdefault("examples", {})[name] = {"summary": summary, "value": response["body"]}


def _path_value(op: dict[str, Any], path: str, name: str) -> str | None:
    template = op.get("x-path", "")
    parts, values = template.strip("/").split("/"), path.strip("/").split("/")
    if len(parts) != len(values):
        return None
    for p, v in zip(parts, values, strict=True):
        if p == "{" + name + "}":
            return v
    return None


def _edr_problems(op_id: str, responses: dict[str, Any]) -> None:
    """The errors of an EDR operation: 400 for parameters, the rest as on native paths."""
    invalid = str(http_status(InvalidInput).status)
    texts = {"400": _EDR_INVALID} | {k: v for k, v in _PROBLEMS.items() if k != invalid}
    codes = _EDR_DOCS.get(op_id, tuple(texts))
    ref = {"$ref": "#/components/schemas/EdrProblem"}
    for code in codes:
        responses[code] = {
            "description": texts[code],
            "content": {"application/problem+json": {"schema": ref}},
        }


def install_openapi(app: FastAPI) -> None:
    """Replace ``app.openapi`` by a generator that adds problems and examples."""

    def build() -> dict[str, Any]:
        if app.openapi_schema:
            return app.openapi_schema
        schema = get_openapi(
            title="alveary",
            version=__version__,
            description=DESCRIPTION,
            routes=app.routes,
        )
        components = schema.setdefault("components", {}).setdefault("schemas", {})
        for model in (Problem, EdrProblem, PointsBody):
            components[model.__name__] = model.model_json_schema(
                ref_template="#/components/schemas/{model}"
            )
        examples = load_examples()
        problem_ref = {"$ref": "#/components/schemas/Problem"}
        for path, item in schema.get("paths", {}).items():
            for op in item.values():
                op_id = op.get("operationId", "")
                responses = op.setdefault("responses", {})
                responses.pop("422", None)  # FastAPI's own validation schema: replaced below
                if op_id.startswith(_EDR_PREFIX):
                    _edr_problems(op_id, responses)
                elif op_id not in _META_OPS:
                    codes = _GRID_PROBLEMS if path.startswith("/zones") else tuple(_PROBLEMS)
                    for code in codes:
                        responses[code] = {
                            "description": _PROBLEMS[code],
                            "content": {"application/problem+json": {"schema": problem_ref}},
                        }
                op["x-path"] = path
                _add_examples(op, examples.get(op_id, {}))
                del op["x-path"]
        app.openapi_schema = schema
        return schema

    app.openapi = build  # type: ignore[method-assign]


# The API documentation page's assets, vendored from the npm package swagger-ui-dist (see
# static/vendor/README.txt) and served by the service itself: /docs needs no internet.
_VENDOR = Path(__file__).resolve().parent / "static" / "vendor" / "swagger-ui"
DOCS_ASSETS = {
    "swagger-ui-bundle.js": "text/javascript; charset=utf-8",
    "swagger-ui.css": "text/css; charset=utf-8",
    "favicon-32x32.png": "image/png",
    "LICENSE.txt": "text/plain; charset=utf-8",
    "NOTICE.txt": "text/plain; charset=utf-8",
}


def install_docs(app: FastAPI, openapi_url: str = "/openapi.json") -> None:
    """``/docs``: the interactive documentation, every asset served from ``/docs/assets``."""

    @app.get("/docs", include_in_schema=False)
    async def docs() -> HTMLResponse:
        return get_swagger_ui_html(
            openapi_url=openapi_url,
            title="alveary - API documentation",
            swagger_js_url="/docs/assets/swagger-ui-bundle.js",
            swagger_css_url="/docs/assets/swagger-ui.css",
            swagger_favicon_url="/docs/assets/favicon-32x32.png",
        )

    @app.get("/docs/assets/{name}", include_in_schema=False)
    async def docs_asset(name: str) -> Response:
        media = DOCS_ASSETS.get(name)
        if media is None:
            return Response(status_code=404)
        return FileResponse(
            _VENDOR / name,
            media_type=media,
            headers={"Cache-Control": "public, max-age=86400"},
        )
