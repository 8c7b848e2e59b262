"""The parser of the ``alveary`` command and its entry point."""

from __future__ import annotations

import argparse
import sys

from alveary import AlvearyError, __version__
from alveary.cli import _ingest, _keys, _serve, _zone

__all__ = ["build_parser", "main"]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="alveary",
        description="Serve and build hexagonal, equal-area data cubes.",
    )
    parser.add_argument("--version", action="version", version=f"alveary {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    _zone.register(subparsers)
    _ingest.register(subparsers)
    _serve.register(subparsers)
    _keys.register(subparsers)
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
