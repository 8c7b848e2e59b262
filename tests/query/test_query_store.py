"""The query layer against a cube on the S3-protocol test server: planning sends nothing
to the store, and executing a plan sends exactly one GET per chunk the plan names. The
judge is the server's own request log."""

from __future__ import annotations

import asyncio

import numpy as np

from alveary.query import (
    Catalog,
    CubeSource,
    DiskQuery,
    Limits,
    Selection,
    execute,
    make_plan,
    parse_datetime,
    resolve,
)
from support.analytic import build_cube


def test_plan_reads_nothing_and_execute_reads_the_plan(s3_server):
    # A bucket of its own: no other process of the session reads it.
    url, options = f"s3://{s3_server.create_bucket()}/plan", s3_server.storage_options()
    build_cube(url, options, levels=(3,))
    cat = Catalog([CubeSource("analytic", url, storage_options=options)])
    assert cat.open_all() == {"analytic": None}
    query = DiskQuery(k=3, lat=-20.0, lon=120.0, selection=Selection(time=parse_datetime("../..")))
    mark = s3_server.mark()
    resolved = resolve(cat, "analytic", query)
    plan = make_plan(resolved, Limits())
    assert s3_server.requests(since=mark, bucket=url) == []  # pure: no I/O at all
    result = asyncio.run(execute(plan, None, deadline=30))
    gets = [r for r in s3_server.requests(since=mark, bucket=url) if "/c/" in r.path]
    prefix = f"/versions/{resolved.version}/"
    got = sorted(r.path.split(prefix, 1)[1] for r in gets)
    planned = sorted(key for read in plan.reads.values() for key in read.keys)
    assert got == planned and len(set(got)) == len(got)
    assert np.isfinite(result.values["temp"]).all() and result.values["temp"].shape == (6, 37)
