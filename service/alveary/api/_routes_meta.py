"""Landing page, liveness, readiness and metrics."""

from __future__ import annotations

import orjson
from fastapi import APIRouter, Depends, Request
from starlette.responses import Response

from alveary import StoreUnavailable, __version__
from alveary._errors import http_status
from alveary.api._edr_docs import landing_page
from alveary.api._routes_maps import landing_html, wants_html
from alveary.api._schemas import Landing, Ready
from alveary.api.deps import AcceptHeader, CredentialsDep, ServiceDep, known_parameters

__all__ = ["router"]

router = APIRouter(tags=["service"], dependencies=[Depends(known_parameters())])

_HEALTHY = orjson.dumps({"status": "ok"})
_DESCRIPTION = "Spatial and time queries over hexagonal, equal-area data cubes"
_OPENAPI_30_LINK = {
    "href": "/openapi-3.0.json",
    "rel": "service-desc",
    "type": "application/vnd.oai.openapi+json;version=3.0",
    "title": "The API definition (OpenAPI 3.0, for clients that read only 3.0)",
}
_CUBES_LINK = {
    "href": "/cubes",
    "rel": "data",
    "type": "application/json",
    "title": "Cubes (the native API)",
}
_MAP_LINK = {
    "href": "/map",
    "rel": "alternate",
    "type": "text/html",
    "title": "The map page",
}
_NOT_READY = http_status(StoreUnavailable).status  # a store cannot be reached


@router.get(
    "/",
    operation_id="landing",
    summary="Landing page: links to the API definition, conformance, collections and cubes",
    response_model=Landing,
)
async def landing(
    request: Request,
    service: ServiceDep,
    credentials: CredentialsDep,
    accept: AcceptHeader = None,
) -> Response:
    if wants_html(accept):  # a browser: a page with links to the map and the API docs
        page = landing_html(service, credentials)
        return Response(page, media_type="text/html; charset=utf-8")
    # One landing page for both APIs: OGC API - EDR's links (service-desc, service-doc,
    # conformance, data -> /collections) and the native /cubes. EDR's landing-page schema
    # has no member for a version, so it is part of the description. Links are absolute
    # (from the request's base URL): some clients (OWSLib's api()) follow them as given.
    base = str(request.base_url).rstrip("/")
    links = (_OPENAPI_30_LINK, _CUBES_LINK, _MAP_LINK)
    extra = [{**link, "href": base + link["href"]} for link in links]
    body = landing_page(
        base,
        title="alveary",
        description=f"{_DESCRIPTION} (alveary {__version__}).",
        extra_links=extra,
    )
    return Response(orjson.dumps(body), media_type="application/json")


@router.get(
    "/healthz",
    operation_id="health",
    summary="Liveness: the process is up",
    responses={200: {"content": {"application/json": {"schema": {"type": "object"}}}}},
)
async def health() -> Response:
    return Response(_HEALTHY, media_type="application/json")


@router.get(
    "/readyz",
    operation_id="ready",
    summary="Readiness: every configured store can be reached and has what it should",
    response_model=Ready,
    responses={_NOT_READY: {"description": "A store cannot be reached.", "model": Ready}},
)
async def ready(service: ServiceDep, credentials: CredentialsDep) -> Response:
    status = await service.ready_async()
    ok = all(v is None for v in status.values())
    # Every store counts for readiness; only the cubes the caller may read are named.
    named = {k: v for k, v in status.items() if service.readable(k, credentials)}
    body = {
        "ready": ok,
        "cubes": {k: "ok" if v is None else "unreachable" for k, v in named.items()},
    }
    headers = None if ok else {"Retry-After": str(service.settings.retry_after)}
    return Response(
        orjson.dumps(body),
        status_code=200 if ok else _NOT_READY,
        media_type="application/json",
        headers=headers,
    )


@router.get(
    "/metrics",
    operation_id="metrics",
    summary="Prometheus metrics (text exposition format)",
    responses={200: {"content": {"text/plain": {"schema": {"type": "string"}}}}},
)
async def metrics(service: ServiceDep, credentials: CredentialsDep) -> Response:
    # Series labelled with a cube id only for the cubes the scraper may read.
    body = service.metrics.render(lambda cube_id: service.readable(cube_id, credentials))
    return Response(body, media_type="text/plain; version=0.0.4; charset=utf-8")
