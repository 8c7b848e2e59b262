"""Who may read which cube: API keys, their salted hashes, and the credentials of a request.

A cube is public (the default) or private. A private cube is read only with an API key
listed for it; to anyone else it does not exist (the service answers exactly as it does
for an unknown cube id). The check itself is :meth:`alveary.api._service.Service.cube_for`;
this module knows keys and hashes.

An API key is ``<key id>.<secret>``: twelve hex digits naming the key, a dot, and 43
URL-safe characters (32 random bytes). Only a salted hash of the whole key is stored::

    scrypt:<log2 N>:<r>:<p>:<salt>:<digest>

salt and digest in unpadded URL-safe base64. A presented key is hashed with the stored
parameters and salt and compared in constant time (:func:`hmac.compare_digest`). The key
id only finds the hash to compare with; it grants nothing by itself.

Keys are listed per cube, key id -> hash, in the cube's ``keys`` table of the cube list
or in the keys file (``ALVEARY_API_KEYS_FILE``), one line per key and cube::

    rainfall.3f9a1c0d7e2b = "scrypt:14:8:1:...:..."

A request presents a key as ``Authorization: Bearer <key>`` or ``X-API-Key: <key>``. A key
that does not verify is treated as no key (a public cube is still readable).
"""

from __future__ import annotations

import base64
import hashlib
import hmac
import json
import logging
import re
import secrets
import threading
import tomllib
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path

import cachetools
from starlette.types import Scope

from alveary._errors import InvalidInput

__all__ = [
    "ANONYMOUS",
    "Credentials",
    "KeyRing",
    "hash_key",
    "key_line",
    "new_key",
    "presented_key",
    "read_keys_file",
    "verify_key",
]

log = logging.getLogger("alveary.api")

# scrypt cost: N = 2**14, r = 8, p = 1 (16 MiB, tens of milliseconds): paid once per key
# and process, the verified key is remembered.
_LOG2_N, _R, _P = 14, 8, 1
_SALT_BYTES = 16
_DIGEST_BYTES = 32
_KEY_ID = re.compile(r"^[0-9a-f]{12}$")
_KEY = re.compile(r"^([0-9a-f]{12})\.([A-Za-z0-9_-]{16,128})$")
HASH_FORM = "scrypt:<log2 N>:<r>:<p>:<salt>:<digest> (as printed by `alveary keys new`)"


def _b64(raw: bytes) -> str:
    return base64.urlsafe_b64encode(raw).rstrip(b"=").decode("ascii")


def _unb64(text: str) -> bytes:
    return base64.urlsafe_b64decode(text + "=" * (-len(text) % 4))


def new_key() -> tuple[str, str]:
    """A new random API key and its key id.

    >>> key, key_id = new_key()
    >>> key.startswith(key_id + "."), len(key_id), len(key) > 50
    (True, 12, True)
    """
    key_id = secrets.token_hex(6)
    return f"{key_id}.{secrets.token_urlsafe(32)}", key_id


def _scrypt(key: str, salt: bytes, log2_n: int, r: int, p: int, size: int) -> bytes:
    return hashlib.scrypt(
        key.encode("utf-8"), salt=salt, n=1 << log2_n, r=r, p=p, maxmem=256 * 2**20, dklen=size
    )


def hash_key(key: str) -> str:
    """The salted hash text of a key (a new random salt each call)."""
    salt = secrets.token_bytes(_SALT_BYTES)
    digest = _scrypt(key, salt, _LOG2_N, _R, _P, _DIGEST_BYTES)
    return f"scrypt:{_LOG2_N}:{_R}:{_P}:{_b64(salt)}:{_b64(digest)}"


@dataclass(frozen=True)
class _Hash:
    log2_n: int
    r: int
    p: int
    salt: bytes
    digest: bytes


def _parse_hash(text: str, where: str) -> _Hash:
    parts = text.split(":") if isinstance(text, str) else []
    try:
        if len(parts) != 6 or parts[0] != "scrypt":
            raise ValueError
        log2_n, r, p = int(parts[1]), int(parts[2]), int(parts[3])
        salt, digest = _unb64(parts[4]), _unb64(parts[5])
        if not (10 <= log2_n <= 20 and 1 <= r <= 32 and 1 <= p <= 16):
            raise ValueError
        if len(salt) < 8 or len(digest) < 16:
            raise ValueError
    except ValueError:
        raise InvalidInput(where, "(not shown)", HASH_FORM) from None
    return _Hash(log2_n, r, p, salt, digest)


def verify_key(key: str, hashed: str) -> bool:
    """Whether ``key`` is the key ``hashed`` was made from (constant-time comparison).

    >>> key, _ = new_key()
    >>> text = hash_key(key)
    >>> verify_key(key, text), verify_key(key + "x", text)
    (True, False)
    """
    h = _parse_hash(hashed, "key hash")
    return hmac.compare_digest(_scrypt(key, h.salt, h.log2_n, h.r, h.p, len(h.digest)), h.digest)


def key_line(cube_id: str, key_id: str, hashed: str) -> str:
    """One line of the keys file (TOML) admitting a key to a cube.

    >>> key_line("rain", "0123456789ab", "scrypt:...")
    'rain.0123456789ab = "scrypt:..."'
    >>> key_line("v1.rain", "0123456789ab", "h")
    '"v1.rain".0123456789ab = "h"'
    """
    name = cube_id if re.fullmatch(r"[A-Za-z0-9_-]+", cube_id) else json.dumps(cube_id)
    return f"{name}.{key_id} = {json.dumps(hashed)}"


def presented_key(scope: Scope) -> str | None:
    """The API key a request presents: ``Authorization: Bearer`` first, else ``X-API-Key``.

    >>> presented_key({"headers": [(b"x-api-key", b"k1")]})
    'k1'
    >>> presented_key({"headers": [(b"authorization", b"bearer  k2 ")]})
    'k2'
    >>> presented_key({"headers": [(b"authorization", b"Basic eHg6eXk=")]}) is None
    True
    """
    bearer = other = None
    for name, value in scope.get("headers", ()):
        if name == b"authorization":
            scheme, _, rest = value.decode("latin-1").strip().partition(" ")
            if scheme.lower() == "bearer" and rest.strip():
                bearer = rest.strip()
        elif name == b"x-api-key":
            other = value.decode("latin-1").strip() or None
    return bearer or other


@dataclass(frozen=True)
class Credentials:
    """What a request has proven: the id of its verified key and the private cubes that
    key may read (none without a valid key)."""

    key_id: str | None = None
    cubes: frozenset[str] = frozenset()


ANONYMOUS = Credentials()


@dataclass(frozen=True)
class _Listed:
    hashed: _Hash
    cubes: frozenset[str]


class KeyRing:
    """The configured keys: key id -> hash and the cubes it may read; and which cubes are
    private.

    Parameters
    ----------
    private:
        Ids of the private cubes.
    keys:
        cube id -> {key id -> hash text}. A key id may appear under several cubes, with
        the same hash (the same key) each time.
    """

    def __init__(self, private: Iterable[str], keys: Mapping[str, Mapping[str, str]]) -> None:
        self.private = frozenset(private)
        cubes_of: dict[str, set[str]] = {}
        texts: dict[str, str] = {}
        for cube_id, listed in keys.items():
            if cube_id not in self.private:
                raise InvalidInput(
                    f"keys of cube {cube_id}", "a public cube", "keys only for private cubes"
                )
            for key_id, text in listed.items():
                if not _KEY_ID.match(key_id):
                    raise InvalidInput(f"key id of cube {cube_id}", key_id, "12 hex digits")
                if texts.setdefault(key_id, text) != text:
                    raise InvalidInput(
                        f"key {key_id}", "two different hashes", "one hash per key id"
                    )
                cubes_of.setdefault(key_id, set()).add(cube_id)
        self._keys = {
            key_id: _Listed(_parse_hash(texts[key_id], f"hash of key {key_id}"), frozenset(c))
            for key_id, c in cubes_of.items()
        }
        # sha256 of presented key -> its credentials, for keys already checked (valid or
        # not), so the slow hash runs once per key and process.
        self._seen: cachetools.LRUCache[bytes, Credentials] = cachetools.LRUCache(4096)
        self._lock = threading.Lock()

    def __len__(self) -> int:
        return len(self._keys)

    def readable(self, cube_id: str, credentials: Credentials) -> bool:
        """Whether these credentials may read the cube (public, or a key listed for it)."""
        return cube_id not in self.private or cube_id in credentials.cubes

    def known(self, key: str | None) -> Credentials | None:
        """The credentials of a key, if they are known without the slow hash (None: the
        key names a listed key id and was not checked yet)."""
        if not key:
            return ANONYMOUS
        match = _KEY.match(key)
        if match is None or match.group(1) not in self._keys:
            return ANONYMOUS  # malformed, or no such key id: nothing to hash
        with self._lock:
            return self._seen.get(hashlib.sha256(key.encode("utf-8")).digest())

    def check(self, key: str | None) -> Credentials:
        """The credentials a presented key proves (blocking: the slow hash may run)."""
        seen = self.known(key)
        if seen is not None:
            return seen
        assert key is not None
        out = ANONYMOUS
        match = _KEY.match(key)
        listed = self._keys.get(match.group(1)) if match else None
        if listed is not None:
            h = listed.hashed
            digest = _scrypt(key, h.salt, h.log2_n, h.r, h.p, len(h.digest))
            if hmac.compare_digest(digest, h.digest):
                out = Credentials(key[:12], listed.cubes)
        with self._lock:
            self._seen[hashlib.sha256(key.encode("utf-8")).digest()] = out
        return out


def read_keys_file(path: Path) -> dict[str, dict[str, str]]:
    """cube id -> {key id -> hash} from a keys file (TOML, one line per key and cube).

    A missing file lists no keys (the Secret holding it is optional) and is logged.
    """
    try:
        data = tomllib.loads(Path(path).read_text())
    except FileNotFoundError:
        log.warning("API keys file %s does not exist: no API keys", path)
        return {}
    except (OSError, UnicodeDecodeError) as exc:
        raise InvalidInput("api_keys_file", str(path), f"a readable file ({exc})") from None
    except tomllib.TOMLDecodeError as exc:
        raise InvalidInput("api_keys_file", str(path), f"valid TOML ({exc})") from None
    out: dict[str, dict[str, str]] = {}
    for cube_id, listed in data.items():
        if not isinstance(listed, dict) or not all(isinstance(v, str) for v in listed.values()):
            raise InvalidInput(
                "api_keys_file", str(path), 'lines of the form <cube>.<key id> = "<hash>"'
            )
        out[cube_id] = dict(listed)
    return out
