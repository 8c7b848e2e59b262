"""The HTTP layer: a FastAPI application over the query layer.

Build it with :func:`create_app` from validated :class:`Settings` (:func:`load_settings`
names the setting at fault); the ``alveary serve`` command runs it under uvicorn.
"""

from alveary.api._access import hash_key, key_line, new_key, verify_key
from alveary.api._app import create_app, create_app_from_env
from alveary.api._requestlog import RequestIdFilter
from alveary.api._settings import (
    CubeConfig,
    Settings,
    default_store,
    load_settings,
    scan_store,
)

__all__ = [
    "CubeConfig",
    "RequestIdFilter",
    "Settings",
    "create_app",
    "create_app_from_env",
    "default_store",
    "hash_key",
    "key_line",
    "load_settings",
    "new_key",
    "scan_store",
    "verify_key",
]
