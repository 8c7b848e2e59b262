"""Where cubes live: URLs to zarr stores, request counting, atomic small objects.

Supported URLs: a local path or ``file://`` URL (zarr's LocalStore), ``s3://bucket/prefix``
(s3fs; endpoint and credentials from ``storage_options`` or the usual AWS environment
variables, e.g. ``AWS_ENDPOINT_URL``), ``memory://name`` (fsspec's in-process memory
filesystem, for tests) and any other fsspec protocol with an async implementation.
"""

from __future__ import annotations

import json
import os
import re
import secrets
from pathlib import Path
from typing import Any

from zarr.abc.store import ByteRequest, Store
from zarr.core.buffer import Buffer, BufferPrototype, default_buffer_prototype
from zarr.storage import FsspecStore, LocalStore, WrapperStore

from alveary._errors import InvalidInput, NotFound, StoreUnavailable
from alveary.cube._cache import IOStats, io_totals, request_io

__all__ = [
    "CountingStore",
    "default_store_root",
    "get_json",
    "normalize_url",
    "open_store",
    "put_json_atomic",
]

_SCHEME = re.compile(r"^([a-zA-Z][a-zA-Z0-9+.-]*)://")


def default_store_root() -> Path:
    """The embedded local store: ``$ALVEARY_STORE`` or ``./var/cubes``.

    Examples
    --------
    >>> default_store_root().parts[-2:] if "ALVEARY_STORE" not in os.environ else ("var", "cubes")
    ('var', 'cubes')
    """
    env = os.environ.get("ALVEARY_STORE")
    return Path(env) if env else Path.cwd() / "var" / "cubes"


def normalize_url(url: str | os.PathLike[str]) -> tuple[str, str]:
    """Split a cube URL into ``(protocol, location)``; local paths become absolute.

    Examples
    --------
    >>> normalize_url("s3://bucket/cubes/demo/")
    ('s3', 's3://bucket/cubes/demo')
    >>> normalize_url("file:///tmp/x")
    ('file', '/tmp/x')
    >>> normalize_url("memory://a/b")[0]
    'memory'
    """
    text = os.fspath(url)
    if not text:
        raise InvalidInput("url", text, "a local path or an fsspec URL such as s3://bucket/prefix")
    m = _SCHEME.match(text)
    if m is None:
        return "file", str(Path(text).expanduser().resolve())
    protocol = m.group(1).lower()
    if protocol in ("file", "local"):
        return "file", str(Path(text[m.end() :] or "/").resolve())
    rest = text[m.end() :].rstrip("/")
    if not rest:
        raise InvalidInput("url", text, f"{protocol}://BUCKET[/PREFIX]")
    return protocol, f"{protocol}://{rest}"


#: botocore settings of S3 readers unless the cube's storage options say otherwise: a store
#: that cannot be reached fails a read at once (one attempt, a 1 s connect timeout)
#: instead of after botocore's retries with back-off (about 5 s); the service answers 503
#: with Retry-After and the client retries. Throttling answers are still retried by s3fs.
S3_CLIENT_DEFAULTS: dict[str, Any] = {
    "connect_timeout": 1.0,
    "read_timeout": 20.0,
    "retries": {"total_max_attempts": 1, "mode": "standard"},
}


def _fsspec_options(
    protocol: str, options: dict[str, Any] | None, read_only: bool = True
) -> dict[str, Any]:
    """Store options with the defaults of the protocol filled in (writers keep botocore's
    retries: a build should ride out a hiccup).

    >>> opts = _fsspec_options("s3", {"config_kwargs": {"connect_timeout": 3}})
    >>> opts["config_kwargs"]["connect_timeout"], opts["config_kwargs"]["retries"]
    (3, {'total_max_attempts': 1, 'mode': 'standard'})
    """
    opts = dict(options or {})
    if protocol == "s3":
        # s3fs sends a HEAD before every whole-object GET when max_concurrency > 1
        # (to decide on splitting it); one chunk must cost one GET, so read in one piece.
        opts.setdefault("max_concurrency", 1)
        if not read_only:
            return opts
        config = dict(opts.get("config_kwargs") or {})
        for key, value in S3_CLIENT_DEFAULTS.items():
            config.setdefault(key, value)
        opts["config_kwargs"] = config
    return opts


class CountingStore(WrapperStore[Store]):
    """A store wrapper that counts GET requests and bytes into :class:`IOStats` sinks."""

    def __init__(self, store: Store, sinks: tuple[IOStats, ...] = ()) -> None:
        super().__init__(store)
        self.sinks = (*sinks, io_totals)

    def _with_store(self, store: Store) -> CountingStore:
        return type(self)(store, self.sinks[:-1])

    async def get(
        self,
        key: str,
        prototype: BufferPrototype | None = None,
        byte_range: ByteRequest | None = None,
    ) -> Buffer | None:
        prototype = prototype or default_buffer_prototype()
        try:
            value = await self._store.get(key, prototype, byte_range)
        except OSError as exc:
            raise StoreUnavailable(f"cannot read {key!r} from the cube store: {exc}") from exc
        n = None if value is None else len(value)
        for sink in self.sinks:
            sink.add(key, n)
        per_request = request_io.get()
        if per_request is not None:
            per_request.add(key, n)
        return value


def open_store(
    url: str,
    storage_options: dict[str, Any] | None = None,
    *,
    read_only: bool = True,
    stats: IOStats | None = None,
) -> CountingStore:
    """Open the zarr store at a cube URL (the cube's root, holding pointer and versions)."""
    protocol, location = normalize_url(url)
    try:
        if protocol == "file":
            if read_only and not Path(location).is_dir():
                raise NotFound("cube", url, f"no cube at {url} (no such directory)")
            store: Store = LocalStore(location, read_only=read_only)
        else:
            store = FsspecStore.from_url(
                location,
                storage_options=_fsspec_options(protocol, storage_options, read_only),
                read_only=read_only,
            )
    except (ImportError, ValueError, TypeError) as exc:
        raise InvalidInput("url", url, f"a supported store URL ({exc})") from exc
    return CountingStore(store, (stats,) if stats is not None else ())


async def get_json(store: Store, key: str) -> dict[str, Any] | None:
    """Read one small JSON object (one GET); None if it does not exist."""
    buf = await store.get(key, default_buffer_prototype())
    if buf is None:
        return None
    data: dict[str, Any] = json.loads(buf.to_bytes())
    return data


async def put_json_atomic(store: Store, key: str, data: dict[str, Any]) -> None:
    """Write a small JSON object so that readers see the old or the new one, whole.

    On an object store a single PUT is atomic. On local disk the bytes go to a
    temporary file in the same directory, which then replaces the target; the file is
    created with the permissions of the process's umask, like every other object.
    """
    payload = json.dumps(data, indent=1, sort_keys=True).encode()
    inner = store._store if isinstance(store, WrapperStore) else store
    if isinstance(inner, LocalStore):
        _replace_file(Path(inner.root) / key, payload)
        return
    await store.set(key, default_buffer_prototype().buffer.from_bytes(payload))


def _replace_file(target: Path, payload: bytes) -> None:
    target.parent.mkdir(parents=True, exist_ok=True)
    tmp = target.parent / f".tmp-{secrets.token_hex(8)}-{target.name}"
    # os.open applies the umask to 0o666, as open() does for any new file
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(payload)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, target)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
