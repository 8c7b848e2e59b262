"""``alveary serve`` and ``alveary demo``: the HTTP layer under uvicorn, and the demo cube.

With more than one worker, uvicorn starts each worker process anew and the workers build
their settings themselves, from the same places the parent read them: the ALVEARY_*
variables, the TOML file named by ``--config`` (which holds the stores' credentials) and
the command-line options, which are handed down as JSON in one environment variable.
Nothing from the cube list, so no credential, is ever copied into the environment.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from pathlib import Path
from typing import Any

import uvicorn
from fastapi import FastAPI

from alveary.api import create_app, default_store, load_settings, scan_store
from alveary.cli._http import HeaderDeadlineProtocol, configure_headers, log_config
from alveary.ingest import build_demo

__all__ = ["register", "serve", "serve_demo", "worker_app"]

#: Where worker processes find the command-line options (paths and numbers only).
OPTIONS_ENV = "ALVEARY_SERVE_OPTIONS"

# (option, settings field, type, help)
_OPTIONS: tuple[tuple[str, str, type, str], ...] = (
    ("--host", "host", str, "interface to listen on (default 127.0.0.1)"),
    ("--port", "port", int, "port (default 8000)"),
    ("--workers", "workers", int, "worker processes (default 1)"),
    ("--cache-bytes", "cache_bytes", int, "decoded-chunk cache per worker, bytes"),
    ("--answer-cache-bytes", "answer_cache_bytes", int, "encoded-answer cache per worker, bytes"),
    ("--plan-cache-bytes", "plan_cache_bytes", int, "plans of area queries kept, bytes"),
    ("--max-age", "max_age", int, "Cache-Control max-age of answers, seconds"),
    ("--refresh-interval", "refresh_interval", float, "seconds between cube version checks"),
    ("--deadline", "deadline", float, "request deadline for store reads, seconds"),
    ("--max-zones", "max_zones", int, "limit: zones per request"),
    ("--max-k", "max_k", int, "limit: k of disk queries"),
    ("--max-polygon-vertices", "max_polygon_vertices", int, "limit: polygon vertices"),
    ("--max-points", "max_points", int, "limit: points per multi-point request"),
    ("--max-cells", "max_cells", int, "limit: time steps x zones per request"),
    ("--max-focal-k", "max_focal_k", int, "limit: focal_k of neighbourhood statistics"),
    ("--max-body-bytes", "max_body_bytes", int, "limit: request body size, bytes"),
    ("--max-cells-in-flight", "max_cells_in_flight", int, "cells of large answers in flight"),
    ("--queue-wait", "queue_wait", float, "seconds a large request may wait for room"),
    ("--stream-rows", "stream_rows", int, "answers over this many rows are streamed"),
    ("--header-timeout", "header_timeout", float, "seconds a client may take to send headers"),
    ("--keep-alive-timeout", "keep_alive_timeout", float, "idle keep-alive, seconds"),
    ("--max-connections", "max_connections", int, "open connections per worker (more: 503)"),
    ("--log-level", "log_level", str, "uvicorn log level (default info)"),
)
_KEYS = (*(dest for _, dest, _, _ in _OPTIONS), "cors_origins", "config", "store")


def _add_options(p: argparse.ArgumentParser) -> None:
    for flag, dest, kind, text in _OPTIONS:
        p.add_argument(flag, dest=dest, type=kind, default=None, help=text)
    p.add_argument(
        "--cors-origin",
        dest="cors_origins",
        action="append",
        default=None,
        help="origin allowed by CORS (repeatable; default: none)",
    )


def register(subparsers: Any) -> None:
    """Add ``serve`` and ``demo`` to the ``alveary`` command."""
    serve_p = subparsers.add_parser(
        "serve",
        help="serve cubes over HTTP",
        description=(
            "Serve the cubes listed in a TOML file (--config) or every cube under a local "
            "directory (--store). With neither, serve the demo cube, building it first if "
            "it is missing. Every option can also be set as an ALVEARY_* environment "
            "variable (e.g. ALVEARY_MAX_ZONES)."
        ),
    )
    group = serve_p.add_mutually_exclusive_group()
    group.add_argument("--config", type=Path, default=None, help="TOML file listing the cubes")
    group.add_argument("--store", type=Path, default=None, help="directory of cubes to serve")
    _add_options(serve_p)
    serve_p.set_defaults(handler=_serve_handler)

    demo_p = subparsers.add_parser(
        "demo",
        help="build the demo cube if missing, then serve it",
        description="Build the demo cube on the embedded store if it is missing, then serve it.",
    )
    demo_p.add_argument(
        "--store", type=Path, default=None, help="store directory (default var/cubes)"
    )
    _add_options(demo_p)
    demo_p.set_defaults(handler=_demo_handler)


def _overrides(args: argparse.Namespace) -> dict[str, Any]:
    return {k: getattr(args, k) for k in _KEYS if getattr(args, k, None) is not None}


def serve(overrides: dict[str, Any]) -> int:
    """Validate settings and run uvicorn (blocks until the server stops).

    ``overrides`` are command-line options (names of :class:`alveary.api.Settings`).
    """
    settings = load_settings(overrides)
    if settings.config is None and settings.store is None:
        return serve_demo(None, overrides)
    if not settings.sources():
        where = settings.config or settings.store_dir()
        print(f"alveary serve: warning: no cubes found in {where}", file=sys.stderr)
    if settings.workers == 1:
        configure_headers(settings.header_timeout)
        app: FastAPI | str = create_app(settings)
    else:
        os.environ[OPTIONS_ENV] = options_json(overrides)
        app = f"{__name__}:worker_app"
    uvicorn.run(
        app,
        factory=settings.workers > 1,
        workers=settings.workers,
        host=settings.host,
        port=settings.port,
        log_level=settings.log_level,
        log_config=log_config(settings.log_level),
        access_log=not settings.access_log,  # the service writes its own JSON request log
        proxy_headers=False,
        # Slow or idle clients cannot hold the server: request headers within
        # header_timeout, idle keep-alive connections closed after keep_alive_timeout,
        # and at most max_connections connections (and tasks) per worker, more get 503.
        # As an import string: worker processes import it after they answer uvicorn's
        # health checks (a class would be unpickled, importing the package, before).
        http=f"{HeaderDeadlineProtocol.__module__}:{HeaderDeadlineProtocol.__name__}",
        timeout_keep_alive=settings.keep_alive_timeout,  # type: ignore[arg-type]
        limit_concurrency=settings.max_connections,
    )
    return 0


def options_json(overrides: dict[str, Any]) -> str:
    """The command-line options as JSON for worker processes (only the known options).

    >>> options_json({"store": Path("/srv/cubes"), "max_zones": 10, "cubes": ["x"]})
    '{"store": "/srv/cubes", "max_zones": 10}'
    """
    return json.dumps({k: v for k, v in overrides.items() if k in _KEYS}, default=str)


def worker_app() -> FastAPI:
    """uvicorn factory in a worker process: settings read as the parent read them."""
    settings = load_settings(json.loads(os.environ.get(OPTIONS_ENV, "{}")))
    configure_headers(settings.header_timeout)
    return create_app(settings)


def serve_demo(url: str | os.PathLike[str] | None, overrides: dict[str, Any]) -> int:
    """Build the demo cube under the store directory ``url`` if it is missing, then serve it.

    ``url`` defaults to the embedded store (``$ALVEARY_STORE`` or ``var/cubes``).
    """
    store = Path(url) if url is not None else default_store()
    if not scan_store(store):
        print(f"alveary: building the demo cube in {store} ...", file=sys.stderr)
        build_demo(store)
    options = dict(overrides)
    options.pop("config", None)
    options["store"] = store
    return serve(options)


def _serve_handler(args: argparse.Namespace) -> int:
    return serve(_overrides(args))


def _demo_handler(args: argparse.Namespace) -> int:
    overrides = _overrides(args)
    return serve_demo(overrides.pop("store", None), overrides)
