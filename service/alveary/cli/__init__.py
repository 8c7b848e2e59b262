"""The ``alveary`` command: the edge where the layers are put together.

Each subcommand calls the public functions of the layers it needs: ``zone`` the grid,
``serve`` the HTTP layer, ``demo`` the demo build of ``alveary.ingest`` and then the HTTP
layer, ``ingest`` and ``build-demo`` the ingest layer. No layer imports this package.
"""

from alveary.cli._main import build_parser, main

__all__ = ["build_parser", "main"]
