"""``alveary serve`` and ``alveary demo``."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from alveary._errors import InvalidInput

__all__ = ["register", "serve", "serve_demo"]

_SETTINGS_ENV = "ALVEARY_SETTINGS_JSON"

# (option, settings field, type, help)
_OPTIONS: tuple[tuple[str, str, Any, str], ...] = (
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
    ("--max-body-bytes", "max_body_bytes", int, "limit: request body size, bytes"),
    ("--log-level", "log_level", str, "uvicorn log level (default info)"),
)


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
    keys = [dest for _, dest, _, _ in _OPTIONS] + ["cors_origins", "config", "store"]
    return {k: getattr(args, k) for k in keys if getattr(args, k, None) is not None}


def _settings(overrides: dict[str, Any]) -> Any:
    from alveary.api._settings import Settings

    try:
        return Settings(**overrides)
    except ValidationError as exc:
        first = exc.errors()[0]
        cause = (first.get("ctx") or {}).get("error")
        if isinstance(cause, InvalidInput):
            raise cause from None
        where = ".".join(str(p) for p in first.get("loc", ())) or "settings"
        raise InvalidInput(where, first.get("input"), str(first.get("msg"))) from None


def serve(overrides: dict[str, Any]) -> int:
    """Validate settings and run uvicorn (blocks until the server stops)."""
    import uvicorn

    settings = _settings(overrides)
    if settings.config is None and settings.store is None:
        return serve_demo(None, overrides)
    if not settings.sources():
        where = settings.config or settings.store_dir()
        print(f"alveary serve: warning: no cubes found in {where}", file=sys.stderr)
    if settings.workers == 1:
        from alveary.api._app import create_app

        uvicorn.run(
            create_app(settings),
            host=settings.host,
            port=settings.port,
            log_level=settings.log_level,
            proxy_headers=False,
        )
        return 0
    os.environ[_SETTINGS_ENV] = settings.model_dump_json()
    uvicorn.run(
        "alveary.api._cli:app_from_settings_env",
        factory=True,
        host=settings.host,
        port=settings.port,
        workers=settings.workers,
        log_level=settings.log_level,
        proxy_headers=False,
    )
    return 0


def app_from_settings_env() -> Any:
    """uvicorn factory for worker processes: settings passed by the parent as JSON."""
    from alveary.api._app import create_app
    from alveary.api._settings import Settings

    raw = os.environ.get(_SETTINGS_ENV)
    settings = Settings.model_validate_json(raw) if raw else Settings()
    return create_app(settings)


def serve_demo(
    url: str | os.PathLike | None = None, overrides: dict[str, Any] | None = None
) -> int:
    """Build the demo cube under the store directory ``url`` if it is missing, then serve it.

    ``url`` defaults to the embedded store (``$ALVEARY_STORE`` or ``var/cubes``).
    """
    from alveary.api._settings import default_store, scan_store

    store = Path(url) if url is not None else default_store()
    if not scan_store(store):
        from alveary.ingest import build_demo

        print(f"alveary: building the demo cube in {store} ...", file=sys.stderr)
        build_demo(store)
    options = dict(overrides or {})
    options.pop("config", None)
    options["store"] = store
    return serve(options)


def _serve_handler(args: argparse.Namespace) -> int:
    return serve(_overrides(args))


def _demo_handler(args: argparse.Namespace) -> int:
    overrides = _overrides(args)
    return serve_demo(overrides.pop("store", None), overrides)
