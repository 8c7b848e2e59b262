"""Service settings: ALVEARY_* environment variables, command-line options, a TOML file.

Settings are built and validated once at start-up (never at import time). The cubes come
from, in order of precedence: a TOML file (``config``) listing them, every cube under a
local directory (``store``), or the embedded default store with the demo cube.

The TOML file::

    [[cubes]]
    id = "rainfall"                      # the name in request paths
    url = "s3://bucket/cubes/rainfall"   # or a local path
    title = "Rainfall, invented valley"  # optional
    public = false                       # optional: only listed API keys may read it
    [cubes.storage_options]              # optional, passed to the store client only
    endpoint_url = "http://127.0.0.1:9000"
    [cubes.keys]                         # optional: key id -> salted hash of an API key
    3f9a1c0d7e2b = "scrypt:14:8:1:...:..."

Keys of private cubes may also come from the keys file (``api_keys_file``), see
:mod:`alveary.api._access`.
"""

from __future__ import annotations

import logging
import math
import tomllib
from collections.abc import Mapping
from pathlib import Path
from typing import Annotated, Any

from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    ValidationError,
    field_validator,
    model_validator,
)
from pydantic_settings import BaseSettings, NoDecode, SettingsConfigDict

from alveary._errors import InvalidInput
from alveary.api._access import KeyRing, read_keys_file
from alveary.cube import check_cube_id, default_store_root
from alveary.query import CubeSource, Limits

__all__ = ["CubeConfig", "Settings", "default_store", "load_settings", "scan_store"]

log = logging.getLogger("alveary.api")


def default_store() -> Path:
    """The embedded local store: ``$ALVEARY_STORE`` or ``var/cubes`` under the working dir."""
    return Path(default_store_root())


class CubeConfig(BaseModel):
    """One cube in the TOML file."""

    model_config = ConfigDict(extra="forbid")

    id: str
    url: str
    title: str | None = None
    storage_options: dict[str, Any] | None = None
    public: bool = True
    keys: dict[str, str] = Field(default_factory=dict)

    _id = field_validator("id")(check_cube_id)

    @model_validator(mode="after")
    def _keys_only_if_private(self) -> CubeConfig:
        if self.keys and self.public:
            raise InvalidInput(f"cubes.{self.id}.keys", "set", "keys only with public = false")
        return self

    def source(self) -> CubeSource:
        return CubeSource(self.id, self.url, self.title, self.storage_options)


def _split(value: Any) -> Any:
    if isinstance(value, str):
        return [v.strip() for v in value.split(",") if v.strip()]
    return value


class Settings(BaseSettings):
    """Everything the service can be configured with (environment prefix ``ALVEARY_``)."""

    model_config = SettingsConfigDict(env_prefix="ALVEARY_", extra="ignore")

    config: Path | None = Field(None, description="TOML file listing the cubes to serve.")
    store: Path | None = Field(None, description="Serve every cube under this local directory.")
    cubes: list[CubeConfig] = Field(default_factory=list, description="Cubes (from config).")
    host: str = "127.0.0.1"
    port: int = Field(8000, ge=0, le=65535)
    workers: int = Field(1, ge=1, le=64)
    log_level: str = "info"

    cache_bytes: int = Field(256 * 2**20, ge=0, description="Decoded-chunk cache per process.")
    answer_cache_bytes: int = Field(
        32 * 2**20, ge=0, description="Cache of encoded answers (by ETag) per process; 0: off."
    )
    plan_cache_bytes: int = Field(
        32 * 2**20, ge=0, description="Plans of area queries kept for repeats; 0: off."
    )
    pixel_cache_bytes: int = Field(
        64 * 2**20,
        ge=0,
        description="Pixel-to-zone maps of map tiles kept for other time steps; 0: off.",
    )
    basemap_url: str = Field(
        "",
        max_length=1000,
        description="Raster tile URL template ({z}/{x}/{y}) drawn under the map page's "
        "cube layer; empty (default): none, so the page needs no other host.",
    )
    max_age: int = Field(60, ge=0, description="Cache-Control max-age of answers, seconds.")
    refresh_interval: float = Field(30.0, gt=0, description="Seconds between version checks.")
    deadline: float = Field(30.0, gt=0, description="Request deadline for store reads, seconds.")
    retry_after: int = Field(5, ge=1, description="Retry-After sent with 503, seconds.")
    max_cells_in_flight: int = Field(
        10_000_000,
        ge=1,
        description="Cells (zone x time step x variable) of large answers in flight per "
        "process (default: one of the largest admissible answers; see reliability.md); "
        "more wait up to queue_wait seconds, then get 503.",
    )
    queue_wait: float = Field(2.0, ge=0, description="Seconds a large request may queue.")
    stream_rows: int = Field(
        100_000,
        ge=1,
        description="Answers over this many (zone, time) rows are streamed as they are encoded.",
    )
    header_timeout: float = Field(
        10.0, gt=0, description="Seconds a client may take to send a request's headers."
    )
    keep_alive_timeout: float = Field(5.0, gt=0, description="Idle keep-alive, seconds.")
    max_connections: int = Field(
        1000, ge=1, description="Open connections per process; more are answered 503."
    )
    cors_origins: Annotated[list[str], NoDecode] = Field(
        default_factory=list, description="CORS allow-list (comma-separated in the environment)."
    )

    max_zones: int = Field(Limits.max_zones, ge=1)
    max_k: int = Field(Limits.max_k, ge=0)
    max_polygon_vertices: int = Field(Limits.max_polygon_vertices, ge=4)
    max_points: int = Field(Limits.max_points, ge=1)
    max_cells: int = Field(Limits.max_cells, ge=1)
    max_read_bytes: int = Field(Limits.max_read_bytes, ge=1)
    max_focal_k: int = Field(Limits.max_focal_k, ge=1, description="Largest focal_k allowed.")
    max_body_bytes: int = Field(8 * 2**20, ge=1024)

    access_log: bool = Field(
        True, description="One JSON line per request on the alveary.access logger (stderr)."
    )
    rate_limit_rps: float = Field(
        0.0, ge=0, description="Requests per second per client (API key or address); 0: off."
    )
    rate_limit_burst: int = Field(
        0, ge=0, description="Requests a client may send at once; 0: twice rate_limit_rps."
    )
    rate_limit_storage: str = Field(
        "memory://", description="Where rate counters live (a limits storage URI)."
    )
    rate_limit_client_header: str | None = Field(
        None, description="Header a trusted proxy sets with the client address (last entry)."
    )

    api_keys_file: Path | None = Field(
        None, description="TOML file of API key hashes of private cubes (<cube>.<key id> = hash)."
    )

    _split_origins = field_validator("cors_origins", mode="before")(_split)

    @model_validator(mode="after")
    def _load_cubes(self) -> Settings:
        if self.config is not None and not self.cubes:
            self.cubes = read_cube_file(self.config)
        return self

    @property
    def limits(self) -> Limits:
        return Limits(
            max_zones=self.max_zones,
            max_k=self.max_k,
            max_polygon_vertices=self.max_polygon_vertices,
            max_points=self.max_points,
            max_cells=self.max_cells,
            max_read_bytes=self.max_read_bytes,
            max_focal_k=self.max_focal_k,
        )

    @property
    def burst(self) -> int:
        """The rate limit's burst (explicit, or twice the rate)."""
        return self.rate_limit_burst or max(math.ceil(2 * self.rate_limit_rps), 1)

    def key_ring(self) -> KeyRing:
        """The private cubes and the keys that may read them (cube list and keys file)."""
        private = {c.id for c in self.cubes if not c.public}
        keys: dict[str, dict[str, str]] = {c.id: dict(c.keys) for c in self.cubes if c.keys}
        if self.api_keys_file is not None:
            configured = {c.id for c in self.cubes}
            for cube_id, listed in read_keys_file(self.api_keys_file).items():
                if cube_id not in configured:
                    log.warning("API keys file lists keys of cube %r, which is not served", cube_id)
                    continue
                keys.setdefault(cube_id, {}).update(listed)
        ring = KeyRing(private, keys)
        for cube_id in sorted(private - set(keys)):
            log.warning("private cube %r has no API keys: nobody can read it", cube_id)
        return ring

    def store_dir(self) -> Path:
        """The local directory whose cubes are served when no TOML file is given."""
        return self.store if self.store is not None else default_store()

    def sources(self) -> list[CubeSource]:
        """The configured cubes: the TOML list, else every cube under the store directory."""
        if self.cubes:
            return [c.source() for c in self.cubes]
        return scan_store(self.store_dir())


def read_cube_file(path: Path) -> list[CubeConfig]:
    """Read the ``[[cubes]]`` list of a TOML file."""
    try:
        data = tomllib.loads(Path(path).read_text())
    except FileNotFoundError:
        raise InvalidInput("config", str(path), "an existing TOML file") from None
    except tomllib.TOMLDecodeError as exc:
        raise InvalidInput("config", str(path), f"valid TOML ({exc})") from None
    cubes = data.get("cubes")
    if not isinstance(cubes, list) or not cubes:
        raise InvalidInput("config", str(path), "a TOML file with at least one [[cubes]] table")
    out = [CubeConfig.model_validate(c) for c in cubes]
    ids = [c.id for c in out]
    if len(set(ids)) != len(ids):
        raise InvalidInput("config", str(path), "unique cube ids")
    return out


def scan_store(root: Path) -> list[CubeSource]:
    """Every cube directly under a local directory (a directory holding a cube marker).

    The cube id is the directory name.
    """
    root = Path(root)
    if not root.is_dir():
        return []
    out = []
    for child in sorted(root.iterdir()):
        if child.is_dir() and _is_cube_id(child.name) and _looks_like_cube(child):
            out.append(CubeSource(child.name, str(child.resolve())))
    return out


def _is_cube_id(name: str) -> bool:
    try:
        check_cube_id(name)
    except InvalidInput:
        return False
    return True


def _looks_like_cube(path: Path) -> bool:
    return (path / "current.json").is_file()  # the published-version pointer of a cube


def load_settings(overrides: Mapping[str, Any]) -> Settings:
    """Settings from ALVEARY_* variables and ``overrides``; an error names the setting.

    Raises
    ------
    InvalidInput
        The first invalid setting, with its name, value and what is allowed.
    """
    try:
        return Settings(**overrides)
    except ValidationError as exc:
        first = exc.errors()[0]
        cause = (first.get("ctx") or {}).get("error")
        if isinstance(cause, InvalidInput):
            raise cause from None
        where = ".".join(str(p) for p in first.get("loc", ())) or "settings"
        raise InvalidInput(where, first.get("input"), str(first.get("msg"))) from None
