"""A real ``alveary serve`` (uvicorn) process on 127.0.0.1, for end-to-end tests.

The service runs as its own process from the virtualenv, on a free loopback port, with
the cubes written to a TOML file; :meth:`ServiceProcess.start` waits for ``/healthz``.

Usage (fixture ``alveary_service`` in ``support.fixtures``)::

    def test_x(alveary_service, s3_server):
        svc = alveary_service([{"id": "c", "url": "s3://b/c",
                                "storage_options": s3_server.storage_options()}])
        httpx.get(svc.url + "/cubes")
"""

from __future__ import annotations

import json
import os
import sys
import tempfile
from pathlib import Path
from typing import Any

from support.process import LoopbackProcess, free_port

__all__ = ["ServiceProcess", "free_port", "toml_cubes"]


def _toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int | float):
        return repr(value)
    if isinstance(value, str):
        return json.dumps(value)  # a JSON string is a valid TOML basic string
    if isinstance(value, dict):
        inner = ", ".join(f"{json.dumps(k)} = {_toml_value(v)}" for k, v in value.items())
        return "{ " + inner + " }"
    if isinstance(value, list | tuple):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    raise TypeError(f"cannot write {type(value).__name__} as TOML")


def toml_cubes(cubes: list[dict[str, Any]]) -> str:
    """The ``[[cubes]]`` TOML text for a list of cube dicts (id, url, title, storage_options)."""
    out = []
    for cube in cubes:
        out.append("[[cubes]]")
        for key, value in cube.items():
            out.append(f"{key} = {_toml_value(value)}")
        out.append("")
    return "\n".join(out)


class ServiceProcess(LoopbackProcess):
    """One ``alveary serve`` process on the loopback interface."""

    name = "alveary serve"

    def __init__(
        self,
        cubes: list[dict[str, Any]] | None = None,
        *,
        store: str | os.PathLike | None = None,
        options: dict[str, Any] | None = None,
        env: dict[str, str] | None = None,
        host: str = "127.0.0.1",
    ) -> None:
        if host not in ("127.0.0.1", "::1"):
            raise ValueError("test services listen on loopback only")
        self.host = host
        self.port = free_port(host)
        self._dir = Path(tempfile.mkdtemp(prefix="alveary-svc-"))
        super().__init__(self._dir / "server.log")
        self.args = [sys.executable, "-m", "alveary.cli", "serve"]
        if cubes is not None:
            config = self._dir / "cubes.toml"
            config.write_text(toml_cubes(cubes))
            self.args += ["--config", str(config)]
        elif store is not None:
            self.args += ["--store", str(store)]
        self.args += ["--host", host, "--port", str(self.port), "--log-level", "warning"]
        for key, value in (options or {}).items():
            flag = "--" + key.replace("_", "-")
            for item in value if isinstance(value, list) else [value]:
                self.args += [flag, str(item)]
        self.env = dict(os.environ)
        self.env.update(env or {})

    @property
    def url(self) -> str:
        return f"http://{self.host}:{self.port}"

    def start(self, timeout: float = 60.0) -> ServiceProcess:
        self.launch(self.args, self.env, self.url + "/healthz", ok_below=201, timeout=timeout)
        return self
