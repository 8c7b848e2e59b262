"""Cubes: variables over time and refinement levels, stored as Zarr v3 in five strips.

A cube is published at a URL (local path, ``file://``, ``s3://``, ``memory://``) as
versions beside each other and a small pointer naming the current one; see
``service/docs/cube-format.md``. :func:`open_cube` reads it, :func:`create_cube` writes
a new version. Read plans are pure: :meth:`Cube.plan` names the exact chunks a read
fetches without touching the store.
"""

from alveary.cube._cache import ByteLRU, ChunkCache, IOStats, io_totals
from alveary.cube._layout import ChunkShape, LevelLayout, default_chunk_shape
from alveary.cube._meta import FORMAT_VERSION, CubeMeta, VariableInfo, check_cube_id
from alveary.cube._plan import ChunkRead, ReadPlan, plan_cells
from alveary.cube._reader import Cube, CubeVersion, open_cube
from alveary.cube._store import default_store_root, normalize_url
from alveary.cube._time import RFC3339_EXAMPLE, parse_time, to_times
from alveary.cube._writer import ChunkSink, CubeWriter, create_cube

__all__ = [
    "FORMAT_VERSION",
    "RFC3339_EXAMPLE",
    "ByteLRU",
    "ChunkCache",
    "ChunkRead",
    "ChunkShape",
    "ChunkSink",
    "Cube",
    "CubeMeta",
    "CubeVersion",
    "CubeWriter",
    "IOStats",
    "LevelLayout",
    "ReadPlan",
    "VariableInfo",
    "check_cube_id",
    "create_cube",
    "default_chunk_shape",
    "default_store_root",
    "io_totals",
    "normalize_url",
    "open_cube",
    "parse_time",
    "plan_cells",
    "to_times",
]
