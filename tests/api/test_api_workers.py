"""``alveary serve --workers 2``: each worker process reads the stores' credentials from
the TOML file, as the parent does; no credential is ever copied into the environment of
any process. The judge is each process's environment as the operating system reports it
(psutil reads /proc/PID/environ on Linux)."""

from __future__ import annotations

import uuid

import httpx
import psutil


def test_workers_get_no_credentials_through_the_environment(analytic_store, alveary_service):
    url, options = analytic_store
    secret = f"never-in-an-environment-{uuid.uuid4().hex}"  # the test S3 server takes any
    cubes = [{"id": "analytic", "url": url, "storage_options": {**options, "secret": secret}}]
    svc = alveary_service(cubes, options={"workers": 2, "max_zones": 777})
    parent = psutil.Process(svc.pid)
    children = parent.children(recursive=True)
    workers = [p for p in children if "--multiprocessing-fork" in p.cmdline()]
    assert len(workers) == 2
    with httpx.Client(base_url=svc.url, timeout=30) as c:
        for _ in range(8):  # new connections, spread over the workers by the kernel
            r = c.get(
                "/cubes/analytic/point",
                params={"lat": 45.2, "lon": 7.6},
                headers={"Connection": "close"},
            )
            assert r.status_code == 200, r.text
        # The command-line options did reach the workers (a limit only they enforce).
        over = c.get("/cubes/analytic/disk", params={"lat": 0, "lon": 0, "k": 20})
        assert over.status_code == 413 and over.json()["maximum"] == 777
    for proc in [parent, *children]:
        environ = proc.environ()
        assert not [k for k, v in environ.items() if secret in v], proc.pid
