"""Cubes: variables over time and refinement levels, stored as Zarr v3 in five strips.

A cube is published at a URL (local path, ``file://``, ``s3://``, ``memory://``) as
versions beside each other and a small pointer naming the current one; see
``service/docs/cube-format.md``. :func:`open_cube` reads it, :func:`create_cube` writes
a new version (fresh, or inheriting the published one's chunks to append),
:func:`list_versions` and :func:`rollback` manage the published versions. Read plans are
pure: :meth:`Cube.plan` names the exact chunks a read fetches without touching the store.
"""

from alveary.cube._cache import ByteLRU, ChunkCache, IOStats, io_totals, request_io
from alveary.cube._checksum import is_checksum_error
from alveary.cube._layout import (
    DEFAULT_SPATIAL_BLOCK,
    DEFAULT_TIME_BLOCK,
    ChunkShape,
    LevelLayout,
    default_chunk_shape,
)
from alveary.cube._manifest import Manifest
from alveary.cube._meta import FORMAT_VERSION, CubeMeta, VariableInfo, check_cube_id
from alveary.cube._plan import ChunkRead, ReadPlan, plan_cells
from alveary.cube._reader import Cube, CubeVersion, open_cube
from alveary.cube._store import default_store_root, normalize_url
from alveary.cube._time import RFC3339_EXAMPLE, parse_time, to_times
from alveary.cube._versions import Retention, VersionInfo, list_versions, rollback
from alveary.cube._writer import ChunkSink, ChunkWrite, CubeWriter, create_cube

__all__ = [
    "DEFAULT_SPATIAL_BLOCK",
    "DEFAULT_TIME_BLOCK",
    "FORMAT_VERSION",
    "RFC3339_EXAMPLE",
    "ByteLRU",
    "ChunkCache",
    "ChunkRead",
    "ChunkShape",
    "ChunkSink",
    "ChunkWrite",
    "Cube",
    "CubeMeta",
    "CubeVersion",
    "CubeWriter",
    "IOStats",
    "LevelLayout",
    "Manifest",
    "ReadPlan",
    "Retention",
    "VariableInfo",
    "VersionInfo",
    "check_cube_id",
    "create_cube",
    "default_chunk_shape",
    "default_store_root",
    "io_totals",
    "is_checksum_error",
    "list_versions",
    "normalize_url",
    "open_cube",
    "parse_time",
    "plan_cells",
    "request_io",
    "rollback",
    "to_times",
]
