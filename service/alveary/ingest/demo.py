"""The demo cube (public entry point used by ``alveary demo``); see ``_demo``."""

from alveary.ingest._demo import DEMO_CUBE_ID, build_demo, demo_url, write_demo_sources

__all__ = ["DEMO_CUBE_ID", "build_demo", "demo_url", "write_demo_sources"]
