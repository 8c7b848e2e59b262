"""A small Python client for the alveary HTTP service (httpx; sync and async).

One method per operation: ``landing``, ``cubes``, ``cube``, ``point``, ``disk``,
``radius``, ``bbox``, ``polygon``, ``points``, ``zone``, ``find_zone``, ``health``,
``ready``, ``metrics``. JSON answers come back as dicts, ``f="arrow"`` as pyarrow tables.
"""

from alveary.client._client import AsyncClient, Client, format_datetime

__all__ = ["AsyncClient", "Client", "format_datetime"]
