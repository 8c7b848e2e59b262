"""The cubes a process serves: named in configuration only, opened once, refreshed.

A request names a cube by its id; it can never make the process open a URL of its own
choosing. A cube whose store cannot be reached at start-up stays in the catalogue and is
retried on every refresh; until then requests for it get :class:`StoreUnavailable`.
"""

from __future__ import annotations

import logging
import threading
import time
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

from alveary._errors import NotFound, StoreUnavailable
from alveary.cube import open_cube
from alveary.query._cube import ServedCube
from alveary.query._failures import as_domain_error

__all__ = ["Catalog", "CubeSource"]

log = logging.getLogger("alveary.query")


@dataclass(frozen=True)
class CubeSource:
    """One configured cube: its public id, where it is stored, and how to reach it.

    ``storage_options`` (endpoint, credentials, ...) go to the store client only and are
    never shown to a client of the service.
    """

    id: str
    url: str
    title: str | None = None
    storage_options: dict[str, Any] | None = field(default=None, repr=False)


@dataclass
class _Entry:
    source: CubeSource
    cube: ServedCube | None = None
    error: str | None = None
    checked: float = 0.0


class Catalog:
    """The served cubes by id.

    Parameters
    ----------
    sources:
        The configured cubes (opened with :func:`alveary.cube.open_cube`). Ids must be
        unique.
    """

    def __init__(self, sources: Iterable[CubeSource]) -> None:
        self._entries: dict[str, _Entry] = {}
        self._lock = threading.Lock()
        for source in sources:
            if source.id in self._entries:
                raise ValueError(f"cube id {source.id!r} is configured twice")
            self._entries[source.id] = _Entry(source)

    def ids(self) -> list[str]:
        """The configured cube ids, in configuration order."""
        return list(self._entries)

    def source(self, cube_id: str) -> CubeSource:
        """The configuration of one cube (:class:`NotFound` if there is none)."""
        entry = self._entries.get(cube_id)
        if entry is None:
            raise NotFound("cube", cube_id)
        return entry.source

    def _open(self, entry: _Entry) -> None:
        try:
            cube = open_cube(entry.source.url, storage_options=entry.source.storage_options)
        except Exception as exc:
            entry.error = type(as_domain_error(exc, "cube metadata")).__name__
            log.warning("cube %s could not be opened: %s", entry.source.id, exc)
        else:
            entry.cube, entry.error = cube, None
        entry.checked = time.monotonic()

    def open_all(self) -> dict[str, str | None]:
        """Open every cube not yet open; returns id -> None (open) or an error name."""
        with self._lock:
            for entry in self._entries.values():
                if entry.cube is None:
                    self._open(entry)
            return {k: e.error for k, e in self._entries.items()}

    def get(self, cube_id: str) -> ServedCube:
        """The open cube with this id.

        Raises
        ------
        NotFound
            No cube with this id is configured.
        StoreUnavailable
            The cube is configured but its store could not be reached yet.
        """
        entry = self._entries.get(cube_id)
        if entry is None:
            raise NotFound("cube", cube_id)
        cube = entry.cube
        if cube is None:
            raise StoreUnavailable(f"the store of cube {cube_id!r} cannot be reached")
        return cube

    def cubes(self) -> list[tuple[CubeSource, ServedCube | None]]:
        """(source, cube or None) for every configured cube."""
        return [(e.source, e.cube) for e in self._entries.values()]

    def refresh(self) -> dict[str, bool | None]:
        """Re-read every cube's published version (blocking I/O: run it off the event loop).

        Returns id -> True (a new version was picked up), False (unchanged) or None (the
        store could not be reached; the cube keeps serving what it has).
        """
        out: dict[str, bool | None] = {}
        with self._lock:
            for cube_id, entry in self._entries.items():
                if entry.cube is None:
                    self._open(entry)
                    out[cube_id] = None if entry.cube is None else True
                    continue
                try:
                    out[cube_id] = bool(entry.cube.refresh())
                    entry.error = None
                except Exception as exc:
                    entry.error = type(as_domain_error(exc, "the version pointer")).__name__
                    out[cube_id] = None
                    log.warning("cube %s could not be refreshed: %s", cube_id, exc)
                entry.checked = time.monotonic()
        return out

    def status(self) -> dict[str, str | None]:
        """id -> None (reachable at the last check) or the name of the last error."""
        return {k: e.error for k, e in self._entries.items()}
