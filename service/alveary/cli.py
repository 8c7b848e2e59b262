"""The ``alveary`` command line: one subcommand per layer, each registered by its layer."""

from __future__ import annotations

import argparse
import importlib
import sys

from alveary import AlvearyError, __version__

# Each entry names a module with ``register(subparsers)``; a layer adds its own commands.
_COMMAND_MODULES = (
    "alveary.grid._cli",
    "alveary.ingest._cli",
    "alveary.api._cli",
)


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="alveary",
        description="Serve and build hexagonal, equal-area data cubes.",
    )
    parser.add_argument("--version", action="version", version=f"alveary {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in _COMMAND_MODULES:
        try:
            module = importlib.import_module(name)
        except ModuleNotFoundError as exc:
            if exc.name != name:
                raise
            continue
        module.register(subparsers)
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


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
