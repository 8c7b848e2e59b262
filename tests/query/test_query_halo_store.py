"""The halo of a neighbourhood statistic against the S3-protocol test server: planning
sends nothing, the GETs of a focal query are exactly its plan, and the chunks it reads
beyond those of the plain query are exactly the plan's ``halo_chunks``. The judge is the
server's own request log."""

from __future__ import annotations

import asyncio
import time

from alveary.query import (
    BboxQuery,
    Catalog,
    CubeSource,
    FocalSpec,
    Limits,
    Selection,
    execute,
    make_plan,
    parse_datetime,
    resolve,
)
from support.analytic import build_cube


def chunk_gets(s3_server, mark, url, version, expected):
    """The chunk keys GET since ``mark``, once at least ``expected`` are logged (the log
    line of a request may come late on a busy machine), or after 10 s."""
    prefix = f"/versions/{version}/"
    deadline = time.monotonic() + 10.0
    while True:
        gets = [r for r in s3_server.requests(since=mark, bucket=url) if "/c/" in r.path]
        if len(gets) >= expected or time.monotonic() > deadline:
            return [r.path.split(prefix, 1)[1] for r in gets]
        time.sleep(0.2)


def test_focal_reads_the_plan_and_the_halo_costs_what_it_says(s3_server):
    url, options = f"s3://{s3_server.create_bucket()}/halo", s3_server.storage_options()
    build_cube(url, options, levels=(7,))
    cat = Catalog([CubeSource("analytic", url, storage_options=options)])
    assert cat.open_all() == {"analytic": None}
    box = (8.0, 6.0, 14.0, 11.0)  # in one 64 x 64 chunk; its k = 3 halo reaches two more
    every = parse_datetime("../..")
    temp = ("temp",)  # written everywhere (rain's empty chunks are not stored)
    plain_q = BboxQuery(*box, selection=Selection(variables=temp, time=every))
    spec = FocalSpec("mean", 3)
    focal_q = BboxQuery(*box, selection=Selection(variables=temp, time=every, focal=spec))
    mark = s3_server.mark()
    plain = make_plan(resolve(cat, "analytic", plain_q), Limits())
    focal = make_plan(resolve(cat, "analytic", focal_q), Limits())
    assert s3_server.requests(since=mark, bucket=url) == []  # plans are pure
    version = focal.resolved.version
    asyncio.run(execute(plain, None, deadline=30))
    plain_got = chunk_gets(s3_server, mark, url, version, plain.chunk_count)
    assert len(plain_got) == plain.chunk_count
    mark += len(s3_server.requests(since=mark))
    asyncio.run(execute(focal, None, deadline=30))
    focal_got = chunk_gets(s3_server, mark, url, version, focal.chunk_count)
    planned = [key for read in focal.reads.values() for key in read.keys]
    assert sorted(focal_got) == sorted(planned) and len(set(focal_got)) == len(focal_got)
    extra = sorted(set(focal_got) - set(plain_got))
    assert len(extra) == 2 and extra == sorted(focal.halo_chunks)
