"""Published versions of a cube: the pointer, retention, listing and rollback.

``current.json`` names the version readers use and lists every published version whose
objects are still in the store, newest first, with the time it was published and, once
it falls out of the last ``keep`` versions, the time it was retired and the time after
which its objects may be deleted (``retired + grace_seconds``). The grace period must
be longer than the refresh interval of every service reading the cube, so that a reader
still holding a retired version finishes its reads before anything of it is deleted.
Deletion happens at the next publish or rollback after that time, and only removes
objects that no listed version references through its manifest.
"""

from __future__ import annotations

import asyncio
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime, timedelta
from typing import Any

from zarr.abc.store import Store
from zarr.core.sync import sync

from alveary._errors import CubeFormatError, InvalidInput, NotFound
from alveary.cube._manifest import MANIFEST_KEY, Manifest
from alveary.cube._meta import FORMAT_NAME, FORMAT_VERSION
from alveary.cube._store import get_json, normalize_url, open_store, put_json_atomic

__all__ = [
    "DEFAULT_GRACE_SECONDS",
    "DEFAULT_KEEP",
    "POINTER_KEY",
    "VERSIONS",
    "Pointer",
    "Retention",
    "VersionEntry",
    "VersionInfo",
    "delete_versions",
    "drop_unpublished",
    "list_versions",
    "load_pointer",
    "publish_pointer",
    "read_manifest",
    "read_pointer",
    "rollback",
    "stamp",
    "write_pointer",
]

POINTER_KEY = "current.json"
VERSIONS = "versions"
DEFAULT_KEEP = 2
DEFAULT_GRACE_SECONDS = 300.0


def stamp(when: datetime) -> str:
    """RFC 3339 UTC time to the microsecond.

    Examples
    --------
    >>> stamp(datetime(2025, 3, 1, 12, 0, 0, 5, tzinfo=UTC))
    '2025-03-01T12:00:00.000005Z'
    """
    return when.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def _parse_stamp(text: str) -> datetime:
    when = datetime.fromisoformat(text.replace("Z", "+00:00"))
    return when if when.tzinfo is not None else when.replace(tzinfo=UTC)


@dataclass(frozen=True)
class Retention:
    """Keep the last ``keep`` published versions; delete older ones ``grace_seconds``
    after they were retired."""

    keep: int = DEFAULT_KEEP
    grace_seconds: float = DEFAULT_GRACE_SECONDS

    def __post_init__(self) -> None:
        if int(self.keep) < 1:
            raise InvalidInput("keep_versions", self.keep, "an integer >= 1")
        if not float(self.grace_seconds) >= 0.0:
            raise InvalidInput("grace_seconds", self.grace_seconds, "seconds >= 0")


@dataclass(frozen=True)
class VersionEntry:
    """One published version as the pointer lists it."""

    id: str
    published: str
    retired: str | None = None
    delete_after: str | None = None

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {"id": self.id, "published": self.published}
        if self.retired is not None:
            out.update(retired=self.retired, delete_after=self.delete_after)
        return out


@dataclass(frozen=True)
class Pointer:
    """The content of ``current.json``."""

    cube_id: str
    version: str
    published: str
    entries: tuple[VersionEntry, ...]
    retention: Retention = field(default_factory=Retention)
    format_version: int = FORMAT_VERSION

    @property
    def listed(self) -> tuple[str, ...]:
        """Every version whose objects are kept, newest first."""
        return tuple(e.id for e in self.entries)

    @property
    def kept(self) -> tuple[str, ...]:
        """Versions not retired (a rollback may go to any of them)."""
        return tuple(e.id for e in self.entries if e.retired is None)

    def to_json(self) -> dict[str, Any]:
        return {
            "format": FORMAT_NAME,
            "format_version": self.format_version,
            "cube_id": self.cube_id,
            "version": self.version,
            "published": self.published,
            "versions": [e.to_json() for e in self.entries],
            "retention": {
                "keep": int(self.retention.keep),
                "grace_seconds": float(self.retention.grace_seconds),
            },
        }

    @classmethod
    def from_json(cls, data: dict[str, Any]) -> Pointer:
        try:
            version = str(data["version"])
            published = str(data.get("published", ""))
            if "versions" in data:
                entries = tuple(
                    VersionEntry(
                        str(e["id"]),
                        str(e.get("published", "")),
                        e.get("retired"),
                        e.get("delete_after"),
                    )
                    for e in data["versions"]
                )
            else:  # format 1: the kept versions' ids only
                entries = tuple(
                    VersionEntry(str(v), published if v == version else "")
                    for v in data.get("history", [version])
                )
            r = data.get("retention", {})
            retention = Retention(
                int(r.get("keep", DEFAULT_KEEP)),
                float(r.get("grace_seconds", DEFAULT_GRACE_SECONDS)),
            )
            return cls(
                str(data["cube_id"]),
                version,
                published,
                entries,
                retention,
                int(data.get("format_version", 1)),
            )
        except (KeyError, TypeError, ValueError) as exc:
            raise CubeFormatError(POINTER_KEY, str(exc), "a complete version pointer") from None


async def read_pointer(store: Store) -> dict[str, Any] | None:
    """The pointer as JSON (one GET); None if the cube was never published."""
    ptr = await get_json(store, POINTER_KEY)
    if ptr is not None and ptr.get("format") != FORMAT_NAME:
        raise CubeFormatError(POINTER_KEY, ptr.get("format"), FORMAT_NAME)
    return ptr


async def load_pointer(store: Store) -> Pointer | None:
    data = await read_pointer(store)
    return None if data is None else Pointer.from_json(data)


async def read_manifest(store: Store, version: str) -> Manifest | None:
    """A version's manifest (one GET); None for versions written before manifests."""
    data = await get_json(store, f"{VERSIONS}/{version}/{MANIFEST_KEY}")
    return None if data is None else Manifest.from_json(data)


def publish_pointer(
    current: Pointer | None,
    cube_id: str,
    version: str,
    now: datetime,
    retention: Retention | None = None,
) -> tuple[Pointer, list[str]]:
    """The pointer after publishing ``version``, and the versions now due for deletion.

    The new version goes first; kept versions beyond ``retention.keep`` are retired now;
    retired versions whose ``delete_after`` has passed leave the list.
    """
    retention = retention or (current.retention if current is not None else Retention())
    old = current.entries if current is not None else ()
    entries = [VersionEntry(version, stamp(now)), *old]
    return _settle(
        Pointer(cube_id, version, stamp(now), tuple(entries), retention), now, current=version
    )


def _settle(pointer: Pointer, now: datetime, current: str) -> tuple[Pointer, list[str]]:
    """Retire kept versions beyond ``keep`` (the current one always stays); split off
    the retired versions whose grace period has passed."""
    grace = timedelta(seconds=float(pointer.retention.grace_seconds))
    settled: list[VersionEntry] = []
    due: list[str] = []
    kept = 1  # the current version
    for e in pointer.entries:
        if e.id == current:
            settled.append(replace(e, retired=None, delete_after=None))
            continue
        if e.retired is None:
            if kept < int(pointer.retention.keep):
                kept += 1
                settled.append(e)
                continue
            e = replace(e, retired=stamp(now), delete_after=stamp(now + grace))
        if e.delete_after is not None and _parse_stamp(e.delete_after) <= now:
            due.append(e.id)
        else:
            settled.append(e)
    return replace(pointer, entries=tuple(settled)), due


async def _references(store: Store, listed: tuple[str, ...]) -> dict[str, set[str] | None]:
    """Per version directory, the object keys listed versions use (None: all of them)."""
    manifests = await asyncio.gather(*(read_manifest(store, v) for v in listed))
    refs: dict[str, set[str] | None] = {}
    for vid, m in zip(listed, manifests, strict=True):
        if m is None:  # written before manifests: the version uses its whole directory
            refs[vid] = None
            continue
        for owner, keys in m.referenced().items():
            have = refs.get(owner, set())
            if have is not None:
                refs[owner] = have | keys
    return refs


async def _prune_dir(store: Store, version: str, keep: set[str]) -> None:
    root = f"{VERSIONS}/{version}"
    if not keep:
        await store.delete_dir(root)
        return
    doomed = [k async for k in store.list_prefix(root + "/") if k[len(root) + 1 :] not in keep]
    await asyncio.gather(*(store.delete(k) for k in doomed))


async def delete_versions(store: Store, pointer: Pointer, due: list[str]) -> None:
    """Delete the objects of ``due`` versions, and of the directories they took chunks
    from, that no version the pointer lists references any more."""
    if not due:
        return
    candidates = set(due) | set(await _references(store, tuple(due)))
    refs = await _references(store, pointer.listed)
    for version in sorted(candidates - set(pointer.listed)):
        keys = refs.get(version, set())
        if keys is not None:
            await _prune_dir(store, version, keys)


async def drop_unpublished(store: Store, pointer: Pointer | None, building: str) -> None:
    """Remove version directories that were never published (a killed build's)."""
    listed = pointer.listed if pointer is not None else ()
    refs = await _references(store, listed) if listed else {}
    try:
        names = [n async for n in store.list_dir(VERSIONS)]
    except FileNotFoundError:
        return
    for name in names:
        if name not in ("zarr.json", building) and name not in listed and name not in refs:
            await store.delete_dir(f"{VERSIONS}/{name}")


async def write_pointer(store: Store, pointer: Pointer) -> None:
    await put_json_atomic(store, POINTER_KEY, pointer.to_json())


@dataclass(frozen=True)
class VersionInfo:
    """One published version, as ``alveary versions`` lists it."""

    id: str
    published: str
    current: bool
    retired: str | None
    delete_after: str | None
    variables: tuple[str, ...]
    levels: tuple[int, ...]
    steps: int
    first: str
    last: str
    bytes_stored: int
    base: str | None

    def row(self) -> dict[str, Any]:
        return {
            "version": self.id,
            "published": self.published,
            "state": "current" if self.current else ("retired" if self.retired else "kept"),
            "variables": ",".join(self.variables),
            "steps": self.steps,
            "bytes": self.bytes_stored,
        }


async def _version_info(store: Store, pointer: Pointer, entry: VersionEntry) -> VersionInfo:
    manifest = await read_manifest(store, entry.id)
    if manifest is not None and manifest.info:
        info = manifest.info
        nbytes = int(info.get("bytes_written", 0))
    else:
        root = await get_json(store, f"{VERSIONS}/{entry.id}/zarr.json")
        block = ((root or {}).get("attributes") or {}).get("alveary") or {}
        t = block.get("time", {})
        info = {
            "variables": sorted(block.get("variables", {})),
            "levels": block.get("levels", []),
            "time_count": t.get("count", 0),
            "time_first": t.get("first", ""),
            "time_last": t.get("last", ""),
        }
        nbytes = int(await store.getsize_prefix(f"{VERSIONS}/{entry.id}"))
    return VersionInfo(
        id=entry.id,
        published=entry.published,
        current=entry.id == pointer.version,
        retired=entry.retired,
        delete_after=entry.delete_after,
        variables=tuple(str(v) for v in info.get("variables", ())),
        levels=tuple(int(v) for v in info.get("levels", ())),
        steps=int(info.get("time_count", 0)),
        first=str(info.get("time_first", "")),
        last=str(info.get("time_last", "")),
        bytes_stored=nbytes,
        base=info.get("base"),
    )


def list_versions(url: str, storage_options: dict[str, Any] | None = None) -> list[VersionInfo]:
    """The published versions of the cube at ``url``, newest first.

    ``bytes_stored`` counts the objects a version wrote itself (chunks it inherited are
    counted with the version that wrote them).
    """
    normalize_url(url)
    store = open_store(url, storage_options, read_only=True)

    async def run() -> list[VersionInfo]:
        pointer = await load_pointer(store)
        if pointer is None:
            raise NotFound("cube", url, f"no published cube at {url} (no {POINTER_KEY})")
        return list(
            await asyncio.gather(*(_version_info(store, pointer, e) for e in pointer.entries))
        )

    result: list[VersionInfo] = sync(run())
    return result


def rollback(
    url: str,
    version: str,
    storage_options: dict[str, Any] | None = None,
    now: datetime | None = None,
) -> Pointer:
    """Make ``version`` (a kept, published version) current again: one pointer write.

    Versions retired earlier whose grace period has passed are deleted afterwards.
    """
    normalize_url(url)
    store = open_store(url, storage_options, read_only=False)
    now = now or datetime.now(UTC)

    async def run() -> Pointer:
        pointer = await load_pointer(store)
        if pointer is None:
            raise NotFound("cube", url, f"no published cube at {url} (no {POINTER_KEY})")
        if version not in pointer.kept:
            raise InvalidInput(
                "version", version, "a kept version of the cube: " + ", ".join(pointer.kept)
            )
        if await get_json(store, f"{VERSIONS}/{version}/zarr.json") is None:
            raise CubeFormatError("version", version, "a version whose objects are in the store")
        moved, due = _settle(replace(pointer, version=version, published=stamp(now)), now, version)
        await write_pointer(store, moved)
        await delete_versions(store, moved, due)
        return moved

    result: Pointer = sync(run())
    return result
