"""``alveary ingest``, ``versions``, ``rollback`` and ``build-demo``: building and
publishing cubes, on the public functions of :mod:`alveary.ingest` and :mod:`alveary.cube`."""

from __future__ import annotations

import argparse
import sys
from typing import Any

from alveary.cube import list_versions, rollback
from alveary.ingest import demo_built, demo_url, ingest, publish_demo

__all__ = ["register"]


def _ingest_parser(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "ingest",
        help="build a cube from GeoTIFF, NetCDF, Zarr, CSV or Parquet sources",
        description=(
            "Resample sources to a refinement level of the grid and publish a new version "
            "of the cube at --out (a local path or an fsspec URL such as s3://bucket/x). "
            "A build that would change a published cube is refused unless --append or "
            "--replace says what to do."
        ),
    )
    p.add_argument("sources", nargs="+", metavar="SOURCE", help="input files")
    p.add_argument("--out", required=True, metavar="URL", help="where the cube is published")
    p.add_argument("--level", required=True, type=int, metavar="L", help="target level 0..24")
    p.add_argument(
        "--variable",
        action="append",
        dest="variables",
        metavar="NAME",
        help="variable to take (repeatable); names a GeoTIFF series",
    )
    p.add_argument("--method", choices=("nearest", "mean"), default="nearest")
    p.add_argument("--pyramid", action="store_true", help="also build every coarser level")
    p.add_argument("--pyramid-min-level", type=int, default=0, metavar="L")
    p.add_argument("--cube-id", default=None, metavar="ID")
    p.add_argument("--title", default=None)
    p.add_argument("--scheduler", default=None, metavar="ADDRESS", help="dask scheduler")
    p.add_argument("--mean-depth", type=int, default=None, metavar="D")
    p.add_argument("--min-coverage", type=float, default=0.5, metavar="F")
    p.add_argument("--time-block", type=int, default=None, metavar="N")
    p.add_argument("--spatial-block", type=int, default=None, metavar="N")
    p.add_argument("--time-step", default="1D", help="binning step for point tables")
    p.add_argument(
        "--time", default=None, metavar="INSTANT", help="the instant of sources without a time axis"
    )
    mode = p.add_mutually_exclusive_group()
    mode.add_argument(
        "--append",
        action="store_true",
        help="add new time steps (and variables) to the published cube as a new version",
    )
    mode.add_argument(
        "--replace", action="store_true", help="publish this build in place of the cube"
    )
    p.add_argument(
        "--overwrite-steps",
        action="store_true",
        help="with --append: replace time steps the cube already has",
    )
    p.add_argument("--keep-versions", type=int, default=None, metavar="N", help="versions kept")
    p.add_argument(
        "--grace-seconds",
        type=float,
        default=None,
        metavar="S",
        help="seconds a retired version stays (longer than any service's refresh interval)",
    )
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    p.set_defaults(handler=_ingest)


def _version_parsers(subparsers: Any) -> None:
    v = subparsers.add_parser(
        "versions",
        help="list the published versions of a cube",
        description="List the published versions of the cube at CUBE_URL, newest first.",
    )
    v.add_argument("url", metavar="CUBE_URL")
    v.set_defaults(handler=_versions)
    r = subparsers.add_parser(
        "rollback",
        help="make a kept version of a cube current again",
        description="Switch the cube's pointer to VERSION (one atomic write).",
    )
    r.add_argument("url", metavar="CUBE_URL")
    r.add_argument("version", metavar="VERSION")
    r.set_defaults(handler=_rollback)


def register(subparsers: Any) -> None:
    """Add ``ingest``, ``versions``, ``rollback`` and ``build-demo``."""
    _ingest_parser(subparsers)
    _version_parsers(subparsers)
    b = subparsers.add_parser(
        "build-demo",
        help="build the demo cube (invented data) on the embedded store",
        description="Build the demo cube on the embedded store (var/cubes or $ALVEARY_STORE).",
    )
    b.add_argument("--store", default=None, help="store directory (default var/cubes)")
    b.add_argument("--force", action="store_true", help="rebuild even if it exists")
    b.set_defaults(handler=_build_demo)


def _ingest(args: argparse.Namespace) -> int:
    summary = ingest(
        args.sources,
        args.out,
        args.level,
        variables=args.variables,
        method=args.method,
        pyramid=args.pyramid,
        cube_id=args.cube_id,
        scheduler=args.scheduler,
        title=args.title,
        mean_depth=args.mean_depth,
        min_coverage=args.min_coverage,
        pyramid_min_level=args.pyramid_min_level,
        time_block=args.time_block,
        spatial_block=args.spatial_block,
        time_step=args.time_step,
        time=args.time,
        append=args.append,
        replace=args.replace,
        overwrite_steps=args.overwrite_steps,
        keep_versions=args.keep_versions,
        grace_seconds=args.grace_seconds,
        progress=not args.no_progress and sys.stderr.isatty(),
    )
    print(summary.text())
    return 0


def _versions(args: argparse.Namespace) -> int:
    rows = [v.row() for v in list_versions(args.url)]
    cols = ("version", "published", "state", "steps", "bytes", "variables")
    width = {c: max(len(c), *(len(str(r[c])) for r in rows)) for c in cols}
    print("  ".join(c.ljust(width[c]) for c in cols).rstrip())
    for r in rows:
        print("  ".join(str(r[c]).ljust(width[c]) for c in cols).rstrip())
    return 0


def _rollback(args: argparse.Namespace) -> int:
    pointer = rollback(args.url, args.version)
    print(f"cube {pointer.cube_id} at {args.url}: current version {pointer.version}")
    return 0


def _build_demo(args: argparse.Namespace) -> int:
    url = demo_url(args.store)
    if not args.force and demo_built(url):
        print(f"demo cube already built at {url}")
        return 0
    print(publish_demo(url, progress=sys.stderr.isatty()).text())
    return 0
