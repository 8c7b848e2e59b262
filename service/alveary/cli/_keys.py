"""``alveary keys new CUBE [CUBE ...]``: a new API key for private cubes.

The key is printed once, on standard output; only its salted hash goes into the
configuration: one line per cube for the keys file (``ALVEARY_API_KEYS_FILE``), or the
same ``<key id> = "<hash>"`` in the cube's ``[cubes.keys]`` table.
"""

from __future__ import annotations

import argparse
import sys
from typing import Any, TextIO

from alveary.api import hash_key, key_line, new_key
from alveary.cube import check_cube_id

__all__ = ["new_key_text", "register"]


def register(subparsers: Any) -> None:
    """Add ``keys`` to the ``alveary`` command."""
    keys_p = subparsers.add_parser(
        "keys",
        help="API keys of private cubes",
        description="Make API keys for private cubes (public = false in the cube list).",
    )
    sub = keys_p.add_subparsers(dest="keys_command", metavar="ACTION", required=True)
    new_p = sub.add_parser(
        "new",
        help="print a new API key once, and the hash lines for the configuration",
        description=(
            "Print a new random API key (shown only this once: hand it to its user) and, "
            "for each cube, the line to add to the keys file (ALVEARY_API_KEYS_FILE). The "
            "key itself is stored nowhere."
        ),
    )
    new_p.add_argument("cubes", nargs="+", metavar="CUBE", help="id of a private cube")
    new_p.set_defaults(handler=_new_handler)


def new_key_text(cubes: list[str]) -> tuple[str, str]:
    """(key, configuration lines) for a new key admitted to ``cubes``."""
    for cube_id in cubes:
        check_cube_id(cube_id)
    key, key_id = new_key()
    hashed = hash_key(key)
    lines = [key_line(cube_id, key_id, hashed) for cube_id in cubes]
    return key, "\n".join(lines)


def _new_handler(args: argparse.Namespace, out: TextIO | None = None) -> int:
    out = out or sys.stdout
    key, lines = new_key_text(list(dict.fromkeys(args.cubes)))
    print(f"API key (shown once; give it to its user, it is stored nowhere):\n{key}\n", file=out)
    print("Add to the keys file (ALVEARY_API_KEYS_FILE):", file=out)
    print(lines, file=out)
    return 0
