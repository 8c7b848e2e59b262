"""The application factory."""

from __future__ import annotations

import contextlib
import gc
from collections.abc import AsyncIterator

from fastapi import FastAPI
from fastapi.middleware.cors import CORSMiddleware
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from alveary._errors import LimitExceeded
from alveary.api._answers import AnswerFrontMiddleware
from alveary.api._head import HeadMiddleware
from alveary.api._metrics import MetricsMiddleware
from alveary.api._openapi import DESCRIPTION, install_docs, install_openapi
from alveary.api._problem import domain_response, install_handlers
from alveary.api._ratelimit import RateLimit, RateLimitMiddleware
from alveary.api._requestlog import RequestLogMiddleware, access_logger
from alveary.api._routes_cubes import install_point_lane
from alveary.api._routes_cubes import router as cubes_router
from alveary.api._routes_edr import install_position_lane
from alveary.api._routes_edr import router as edr_router
from alveary.api._routes_maps import router as maps_router
from alveary.api._routes_meta import router as meta_router
from alveary.api._routes_zones import router as zones_router
from alveary.api._service import Service
from alveary.api._settings import Settings
from alveary.query import Catalog

__all__ = ["create_app", "create_app_from_env"]


class _BodyTooLarge(Exception):
    pass


class BodyLimitMiddleware:
    """Refuse request bodies over ``max_bytes`` with 413 problem+json, before parsing."""

    def __init__(self, app: ASGIApp, max_bytes: int) -> None:
        self.app = app
        self.max_bytes = max_bytes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        for name, value in scope.get("headers", ()):
            if name == b"content-length":
                try:
                    size = int(value)
                except ValueError:
                    size = 0
                if size > self.max_bytes:
                    await self._refuse(scope, receive, send, size)
                    return
        seen = 0
        started = False

        async def limited() -> Message:
            nonlocal seen
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.max_bytes:
                    raise _BodyTooLarge
            return message

        async def tracking_send(message: Message) -> None:
            nonlocal started
            if message["type"] == "http.response.start":
                started = True
            await send(message)

        try:
            await self.app(scope, limited, tracking_send)
        except _BodyTooLarge:
            if not started:
                await self._refuse(scope, receive, send, seen)

    async def _refuse(self, scope: Scope, receive: Receive, send: Send, size: int) -> None:
        error = LimitExceeded("request body bytes", size, self.max_bytes)
        await domain_response(error, retry_after=0)(scope, receive, send)


def create_app(settings: Settings, catalog: Catalog | None = None) -> FastAPI:
    """Build the FastAPI application.

    Parameters
    ----------
    settings:
        Validated settings.
    catalog:
        The cubes to serve; by default built from ``settings`` (TOML list or store dir).
    """
    service = Service(settings, catalog)

    @contextlib.asynccontextmanager
    async def lifespan(app: FastAPI) -> AsyncIterator[None]:
        await service.start()
        # Objects alive after start-up (modules, metadata) live as long as the process:
        # keep them out of every later garbage-collection pass (common server practice).
        gc.collect()
        gc.freeze()
        try:
            yield
        finally:
            await service.stop()

    app = FastAPI(
        title="alveary",
        description=DESCRIPTION,
        lifespan=lifespan,
        docs_url=None,  # served from the package's own assets (install_docs)
        redoc_url=None,
    )
    app.state.service = service
    install_handlers(app, settings.retry_after)
    app.include_router(meta_router)
    install_point_lane(app)
    install_position_lane(app)
    app.include_router(cubes_router)
    app.include_router(zones_router)
    app.include_router(maps_router)
    app.include_router(edr_router)
    install_openapi(app)
    install_docs(app)
    _add_middleware(app, service, settings)
    return app


def _add_middleware(app: FastAPI, service: Service, settings: Settings) -> None:
    """The ASGI layers around the routes; the last added runs first (request log outermost,
    then metrics, body limit, CORS, rate limit, answer front)."""
    app.add_middleware(
        AnswerFrontMiddleware,
        cache=service.answers,
        current_version=service.current_version,
        headers=service.headers,
        credentials=service.credentials,
        readable=service.readable,
    )
    if settings.rate_limit_rps > 0:
        app.add_middleware(
            RateLimitMiddleware,
            limit=RateLimit(settings.rate_limit_rps, settings.burst, settings.rate_limit_storage),
            credentials=service.credentials,
            client_header=settings.rate_limit_client_header,
        )
    if settings.cors_origins:
        app.add_middleware(
            CORSMiddleware,
            allow_origins=settings.cors_origins,
            allow_methods=["GET", "POST"],
            allow_headers=["*"],
            expose_headers=["ETag", "Retry-After", "X-Request-Id"],
            max_age=600,
        )
    app.add_middleware(BodyLimitMiddleware, max_bytes=settings.max_body_bytes)
    app.add_middleware(HeadMiddleware)
    app.add_middleware(MetricsMiddleware, metrics=service.metrics)
    logger = access_logger() if settings.access_log else None
    app.add_middleware(RequestLogMiddleware, logger=logger)


def create_app_from_env() -> FastAPI:
    """Factory for ``uvicorn --factory``: settings from ALVEARY_* variables."""
    return create_app(Settings())
