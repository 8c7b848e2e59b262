"""Building cubes from the data practitioners have: rasters and point tables.

:func:`ingest` (the ``alveary ingest`` command) reads GeoTIFF, NetCDF, Zarr, CSV and
Parquet sources, resamples them to a refinement level (nearest zone centre or area
mean), optionally builds the coarser levels, and publishes a new cube version: a fresh
one, or one that appends time steps to the published version. The work is split by
chunks and runs on dask: local threads, or a dask.distributed cluster.
See ``service/docs/ingest.md``.
"""

from alveary.ingest._build import IngestSummary, ingest
from alveary.ingest._demo import build_demo, demo_built, demo_url, publish_demo
from alveary.ingest._weights import aggregate_children, child_weights, descendant_weights

__all__ = [
    "IngestSummary",
    "aggregate_children",
    "build_demo",
    "child_weights",
    "demo_built",
    "demo_url",
    "descendant_weights",
    "ingest",
    "publish_demo",
]
