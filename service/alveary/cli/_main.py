"""The parser of the ``alveary`` command and its entry point."""

from __future__ import annotations

import argparse
import sys
from typing import Any

from alveary import AlvearyError, __version__
from alveary.cli import _serve, _zone
from alveary.ingest import _cli as _ingest_cli

__all__ = ["build_parser", "main"]


class _Without:
    """The subparsers of the command, hiding some names from a ``register`` function.

    The ingest commands still come with a fallback ``demo`` of their own; the ``demo``
    here (build, then serve) replaces it.
    """

    def __init__(self, subparsers: Any, hidden: set[str]) -> None:
        self._subparsers = subparsers
        self._hidden = hidden

    def add_parser(self, name: str, **kwargs: Any) -> argparse.ArgumentParser:
        if name in self._hidden:
            return argparse.ArgumentParser(prog=name, add_help=False)  # never reached
        parser: argparse.ArgumentParser = self._subparsers.add_parser(name, **kwargs)
        return parser


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="alveary",
        description="Serve and build hexagonal, equal-area data cubes.",
    )
    parser.add_argument("--version", action="version", version=f"alveary {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    _zone.register(subparsers)
    _ingest_cli.register(_Without(subparsers, {"demo"}))
    _serve.register(subparsers)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "handler", None):
        parser.print_help()
        return 2
    try:
        return int(args.handler(args) or 0)
    except AlvearyError as exc:
        print(f"alveary {args.command}: error: {exc}", file=sys.stderr)
        return 2
