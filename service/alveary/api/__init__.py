"""The HTTP layer: a FastAPI application over the query layer.

Build it with :func:`create_app` from validated :class:`Settings`; ``alveary serve`` runs
it under uvicorn.
"""

from alveary.api._app import create_app, create_app_from_env
from alveary.api._settings import CubeConfig, Settings

__all__ = ["CubeConfig", "Settings", "create_app", "create_app_from_env"]
