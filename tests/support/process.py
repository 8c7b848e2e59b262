"""A server process of the test suite on the loopback interface: start, probe, stop."""

from __future__ import annotations

import socket
import subprocess
import time
import urllib.request
from pathlib import Path

__all__ = ["LoopbackProcess", "free_port"]


def free_port(host: str = "127.0.0.1") -> int:
    family = socket.AF_INET6 if ":" in host else socket.AF_INET
    with socket.socket(family, socket.SOCK_STREAM) as s:
        s.bind((host, 0))
        return int(s.getsockname()[1])


class LoopbackProcess:
    """Runs one command with its output in a log file, until a probe URL answers."""

    name = "server"

    def __init__(self, log_path: Path) -> None:
        self.log_path = log_path
        self._proc: subprocess.Popen[bytes] | None = None
        self._log = None

    @property
    def pid(self) -> int | None:
        return None if self._proc is None else self._proc.pid

    def log(self) -> str:
        return self.log_path.read_text(errors="replace") if self.log_path.exists() else ""

    def launch(
        self, args: list[str], env: dict[str, str], probe: str, *, ok_below: int, timeout: float
    ) -> None:
        """Start ``args`` and wait until ``probe`` answers with a status below ``ok_below``."""
        self._log = open(self.log_path, "ab")
        self._proc = subprocess.Popen(
            args, stdout=self._log, stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL, env=env
        )
        deadline = time.monotonic() + timeout
        while True:
            if self._proc.poll() is not None:
                raise RuntimeError(f"{self.name} exited: {self.log()[-3000:]}")
            try:
                with urllib.request.urlopen(probe, timeout=2) as resp:
                    if resp.status < ok_below:
                        return
            except OSError:
                pass
            if time.monotonic() > deadline:
                self.stop()
                raise RuntimeError(f"{self.name} did not answer on {probe}")
            time.sleep(0.1)

    def stop(self) -> None:
        if self._proc is not None:
            self._proc.terminate()
            try:
                self._proc.wait(timeout=15)
            except subprocess.TimeoutExpired:
                self._proc.kill()
                self._proc.wait(timeout=10)
            self._proc = None
        if self._log is not None:
            self._log.close()
            self._log = None

    def __enter__(self):
        return self.start()

    def __exit__(self, *exc: object) -> None:
        self.stop()
