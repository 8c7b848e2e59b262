"""What the query layer needs of a cube, as typing protocols.

:class:`alveary.cube.Cube` and :class:`alveary.cube.CubeVersion` are the implementations
(the tests use real cubes on an in-memory store, so they run the production path). A
query is resolved against a :class:`CubeSnapshot`, one fixed version: the plan made from
it and the reads that run the plan see that version, even when the catalogue's cube moves
on to a newer one in between.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, Protocol

import numpy as np

from alveary.cube import ChunkCache, IOStats, ReadPlan, VariableInfo

__all__ = ["CubeSnapshot", "ServedCube"]


class CubeSnapshot(Protocol):
    """One published version of a cube: its metadata, pure read plans, and reads."""

    @property
    def version(self) -> str: ...

    @property
    def title(self) -> str: ...

    @property
    def levels(self) -> tuple[int, ...]: ...

    @property
    def times(self) -> np.ndarray: ...

    @property
    def variables(self) -> Mapping[str, VariableInfo]: ...

    @property
    def coverage(self) -> tuple[float, float, float, float]: ...

    def value_range(self, variable: str, level: int) -> tuple[float, float] | None:
        """(min, max) of a variable's stored values at a level, recorded at build time."""
        ...

    def plan(
        self,
        variable: str,
        zones: Any,
        start: Any = None,
        end: Any = None,
        *,
        steps: slice | None = None,
    ) -> ReadPlan:
        """The chunks a read of ``zones`` over ``[start, end]`` (or the time steps
        ``steps``) needs (no I/O)."""
        ...

    def read_cached(self, plan: ReadPlan, cache: ChunkCache | None = None) -> np.ndarray | None:
        """:meth:`execute_async`'s values when every chunk of the plan is cached, else
        None (no I/O)."""
        ...

    async def execute_async(self, plan: ReadPlan, cache: ChunkCache | None = None) -> np.ndarray:
        """Values ``(time, zone)`` of a plan made by :meth:`plan` on this snapshot,
        float32 or float64 (what holds the stored values exactly)."""
        ...


class ServedCube(Protocol):
    """A cube as the catalogue serves it: it moves to newer versions when refreshed."""

    @property
    def stats(self) -> IOStats: ...

    def snapshot(self) -> CubeSnapshot:
        """The version served now, fixed."""
        ...

    def refresh(self) -> bool:
        """Re-read the published version; True if a new one is now served (blocking I/O)."""
        ...
