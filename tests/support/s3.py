"""A real S3-protocol server for tests: moto's standalone ``moto_server`` on 127.0.0.1.

The server runs as its own process (from the virtualenv's bin directory) on a free
loopback port. Every request it serves is written to its request log (werkzeug's
access log), which :meth:`S3Server.requests` parses, so tests can count the GET, HEAD
and listing requests a read really sent over the wire.

Usage in tests (fixtures in ``support.fixtures``)::

    def test_x(s3_server):
        url = "s3://" + s3_server.create_bucket() + "/cube"   # a fresh bucket
        mark = s3_server.mark()
        ...                                  # read through s3fs
        reqs = s3_server.requests(since=mark, bucket=url)
"""

from __future__ import annotations

import os
import re
import sys
import tempfile
import time
import uuid
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from support.process import LoopbackProcess, free_port

__all__ = ["S3Request", "S3Server"]

_LINE = re.compile(
    r'"(?:\x1b\[[0-9;]*m)?(?P<method>[A-Z]+) (?P<target>\S+) HTTP/[0-9.]+(?:\x1b\[0m)?" '
    r"(?P<status>\d{3})"
)

ACCESS_KEY = "alveary-test"
SECRET_KEY = "alveary-test-secret"
REGION = "us-east-1"


@dataclass(frozen=True)
class S3Request:
    """One request as the server logged it."""

    method: str
    path: str
    query: str
    status: int

    @property
    def is_listing(self) -> bool:
        """A bucket listing (ListObjects/ListObjectsV2): a GET of the bucket itself."""
        return self.method == "GET" and self.path.strip("/").count("/") == 0

    @property
    def is_object_get(self) -> bool:
        return self.method == "GET" and not self.is_listing


def _moto_executable() -> str:
    candidate = Path(sys.executable).parent / "moto_server"
    if candidate.exists():
        return str(candidate)
    raise RuntimeError(
        f"moto_server not found beside {sys.executable}; install the test extras (moto[server])"
    )


class S3Server(LoopbackProcess):
    """Start, query and stop one ``moto_server`` process on the loopback interface."""

    name = "moto_server"

    def __init__(self, host: str = "127.0.0.1", port: int | None = None) -> None:
        if host not in ("127.0.0.1", "localhost", "::1"):
            raise ValueError("the test S3 server listens on loopback only")
        self.host = host
        self.port = port or free_port(host)
        self._dir = Path(tempfile.mkdtemp(prefix="alveary-s3-"))
        super().__init__(self._dir / "requests.log")

    # -- lifecycle -------------------------------------------------------------------
    @property
    def endpoint_url(self) -> str:
        return f"http://{self.host}:{self.port}"

    def start(self, timeout: float = 30.0) -> S3Server:
        env = dict(os.environ)
        env.update(
            PYTHONUNBUFFERED="1",
            AWS_ACCESS_KEY_ID=ACCESS_KEY,
            AWS_SECRET_ACCESS_KEY=SECRET_KEY,
            AWS_DEFAULT_REGION=REGION,
        )
        self.launch(
            [_moto_executable(), "-H", self.host, "-p", str(self.port)],
            env,
            self.endpoint_url + "/",
            ok_below=500,
            timeout=timeout,
        )
        return self

    # -- clients ---------------------------------------------------------------------
    def storage_options(self, **extra: Any) -> dict[str, Any]:
        """Options for s3fs (``storage_options=`` of fsspec/zarr/alveary)."""
        opts: dict[str, Any] = {
            "key": ACCESS_KEY,
            "secret": SECRET_KEY,
            "client_kwargs": {"endpoint_url": self.endpoint_url, "region_name": REGION},
        }
        opts.update(extra)
        return opts

    def env(self) -> dict[str, str]:
        """Environment variables that point any AWS SDK client at this server."""
        return {
            "AWS_ENDPOINT_URL": self.endpoint_url,
            "AWS_ACCESS_KEY_ID": ACCESS_KEY,
            "AWS_SECRET_ACCESS_KEY": SECRET_KEY,
            "AWS_DEFAULT_REGION": REGION,
        }

    def client(self):
        """A boto3 S3 client for this server (buckets are created with it: s3fs's mkdir
        sends a LocationConstraint that moto refuses for us-east-1)."""
        import boto3

        return boto3.client(
            "s3",
            endpoint_url=self.endpoint_url,
            aws_access_key_id=ACCESS_KEY,
            aws_secret_access_key=SECRET_KEY,
            region_name=REGION,
        )

    def create_bucket(self, name: str | None = None) -> str:
        """Create a bucket (a fresh unique name by default) and return its name."""
        name = name or f"alveary-{uuid.uuid4().hex[:16]}"
        self.client().create_bucket(Bucket=name)
        return name

    # -- the request log -------------------------------------------------------------
    def _lines(self) -> list[str]:
        if not self.log_path.exists():
            return []
        return self.log_path.read_text(errors="replace").splitlines()

    def mark(self) -> int:
        """A position in the request log; pass it to :meth:`requests` as ``since``."""
        return len(self._parse(self._settled_lines()))

    def _settled_lines(self, quiet: float = 0.05, timeout: float = 2.0) -> list[str]:
        # The access log line is written as the response goes out; wait until the log
        # stops growing so that the last request of the caller is in it.
        deadline = time.monotonic() + timeout
        lines = self._lines()
        while time.monotonic() < deadline:
            time.sleep(quiet)
            again = self._lines()
            if len(again) == len(lines):
                return again
            lines = again
        return lines

    @staticmethod
    def _parse(lines: list[str]) -> list[S3Request]:
        out = []
        for line in lines:
            m = _LINE.search(line)
            if m is None:
                continue
            target = m.group("target")
            path, _, query = target.partition("?")
            out.append(S3Request(m.group("method"), path, query, int(m.group("status"))))
        return out

    def requests(self, since: int = 0, bucket: str | None = None) -> list[S3Request]:
        """Requests logged after position ``since`` (see :meth:`mark`).

        The server is shared by the whole test session; pass ``bucket`` (a name or an
        ``s3://`` URL) to keep only the requests to that bucket.
        """
        reqs = self._parse(self._settled_lines())[since:]
        if bucket is not None:
            name = bucket.removeprefix("s3://").split("/", 1)[0]
            reqs = [r for r in reqs if r.path.strip("/").split("/", 1)[0] == name]
        return reqs
