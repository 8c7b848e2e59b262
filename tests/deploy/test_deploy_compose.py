"""deploy/compose.yaml: the Compose specification's schema, cross-references, the one-shot.

Judges: the Compose specification's JSON schema (compose-spec/schema/compose-spec.json as
shipped in the npm package ``dclint`` 3.1.0, vendored under tests/deploy/compose-spec/
with its Apache-2.0 licence), the service's own cube-file reader, botocore's
shared-credentials parser, and, for the one-shot job, ``alveary build-demo``'s own
build of the same days on local disk (the job must publish the same cube into S3).
Docker is not needed: the job's script runs here against the S3-protocol test server.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path
from urllib.parse import urlparse

import jsonschema
import numpy as np
import pytest
import yaml

REPO = Path(__file__).resolve().parents[2]
DEPLOY = REPO / "deploy"
COMPOSE_FILE = DEPLOY / "compose.yaml"
SCHEMA = Path(__file__).parent / "compose-spec" / "compose-spec.json"


def _compose() -> dict:
    return yaml.safe_load(COMPOSE_FILE.read_text())


def _validator() -> jsonschema.Draft7Validator:
    schema = json.loads(SCHEMA.read_text())
    jsonschema.Draft7Validator.check_schema(schema)
    return jsonschema.Draft7Validator(schema)


def test_compose_file_follows_the_compose_specification():
    errors = sorted(_validator().iter_errors(_compose()), key=str)
    assert not errors, [f"{list(e.absolute_path)}: {e.message}" for e in errors]


@pytest.mark.parametrize(
    "path, value",
    [
        (("services", "alveary", "depends_on", "demo-build", "condition"), "service_done"),
        (("services", "alveary", "cap_drop"), "ALL"),
        (("services", "store", "healthcheck", "retry"), 3),
    ],
)
def test_the_schema_rejects_broken_variants(path, value):
    # the vendored schema is strict enough to catch a wrong condition, type or key
    doc = _compose()
    node = doc
    for key in path[:-1]:
        node = node[key]
    node[path[-1]] = value
    assert list(_validator().iter_errors(doc))


def test_vendored_schema_keeps_its_licence():
    folder = SCHEMA.parent
    assert "Apache License" in (folder / "LICENSE").read_text()
    assert "Compose Specification" in (folder / "NOTICE").read_text()
    assert json.loads(SCHEMA.read_text())["title"] == "Compose Specification"


def test_services_reference_each_other_consistently():
    doc = _compose()
    services = doc["services"]
    assert set(services) == {"store", "demo-build", "alveary"}
    for name, svc in services.items():
        for dep in svc.get("depends_on", {}):
            assert dep in services, f"{name} depends on unknown {dep}"
        for ref in svc.get("secrets", []):
            assert (ref if isinstance(ref, str) else ref["source"]) in doc["secrets"]
        for ref in svc.get("configs", []):
            assert ref["source"] in doc["configs"]
        for volume in svc.get("volumes", []):
            assert volume.split(":")[0] in doc["volumes"]
    for section in ("secrets", "configs"):
        for name, entry in doc[section].items():
            assert (DEPLOY / entry["file"]).is_file(), f"{section}.{name}: {entry['file']}"
    # the service starts only after the demo build succeeded; the build waits for the store
    assert services["alveary"]["depends_on"]["demo-build"] == {
        "condition": "service_completed_successfully"
    }
    assert services["demo-build"]["depends_on"]["store"] == {"condition": "service_healthy"}
    assert "healthcheck" in services["store"]
    assert services["demo-build"]["restart"] == "no"
    # both alveary containers come from this repository's image, hardened the same way
    for name in ("demo-build", "alveary"):
        svc = services[name]
        assert svc["build"]["dockerfile"] == "deploy/Dockerfile"
        assert (DEPLOY / svc["build"]["context"] / svc["build"]["dockerfile"]).is_file()
        assert svc["read_only"] is True and svc["cap_drop"] == ["ALL"]
        assert "no-new-privileges:true" in svc["security_opt"]
        assert svc["user"].split(":")[0] != "0"
        assert any(t.split(":")[0] == "/tmp" for t in svc["tmpfs"])
    assert services["alveary"]["image"] == services["demo-build"]["image"]


def test_job_writes_where_the_service_reads(tmp_path):
    from alveary.api._settings import read_cube_file

    doc = _compose()
    services = doc["services"]
    job_env = services["demo-build"]["environment"]
    cubes_file = DEPLOY / doc["configs"]["cubes"]["file"]
    (cube,) = read_cube_file(cubes_file)  # judge: the service's own reader
    assert cube.id == "velmora-irrigation"
    assert cube.url == job_env["ALVEARY_DEMO_URL"]
    # both talk to the store service, at the port MinIO listens on
    endpoint = urlparse(cube.storage_options["client_kwargs"]["endpoint_url"])
    assert endpoint == urlparse(job_env["AWS_ENDPOINT_URL"])
    assert endpoint.hostname == "store"
    command = services["store"]["command"]
    assert command[command.index("--address") + 1] == f":{endpoint.port}"
    # the mounted files are where the containers look for them
    alveary = services["alveary"]
    (cfg,) = alveary["configs"]
    assert alveary["command"][-2:] == ["--config", cfg["target"]]
    (script,) = services["demo-build"]["configs"]
    assert services["demo-build"]["command"] == ["python", script["target"]]
    for svc in (alveary, services["demo-build"]):
        (secret,) = svc["secrets"]
        assert svc["environment"]["AWS_SHARED_CREDENTIALS_FILE"] == f"/run/secrets/{secret}"


def test_demo_credentials_match_the_store_root_user(monkeypatch):
    import botocore.session

    doc = _compose()
    store_env = doc["services"]["store"]["environment"]
    secrets = {name: (DEPLOY / e["file"]).read_text().strip() for name, e in doc["secrets"].items()}
    # MinIO reads MINIO_ROOT_*_FILE relative to /run/secrets, where Compose mounts them
    user = secrets[store_env["MINIO_ROOT_USER_FILE"]]
    password = secrets[store_env["MINIO_ROOT_PASSWORD_FILE"]]
    assert len(user) >= 3 and len(password) >= 8  # MinIO's minimum lengths
    # judge: botocore reads the clients' credentials file and finds the same pair
    for name in ("AWS_ACCESS_KEY_ID", "AWS_SECRET_ACCESS_KEY", "AWS_SESSION_TOKEN", "AWS_PROFILE"):
        monkeypatch.delenv(name, raising=False)
    monkeypatch.setenv(
        "AWS_SHARED_CREDENTIALS_FILE", str(DEPLOY / "compose/secrets/store-credentials")
    )
    monkeypatch.setenv("AWS_CONFIG_FILE", os.devnull)
    monkeypatch.setenv("AWS_EC2_METADATA_DISABLED", "true")
    creds = botocore.session.Session().get_credentials()
    assert (creds.access_key, creds.secret_key) == (user, password)
    assert "LOCAL DEMO ONLY" in (DEPLOY / "compose/secrets/store-credentials").read_text()


def _clean_aws_env(**extra: str) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("AWS_", "ALVEARY_"))}
    env.update(AWS_EC2_METADATA_DISABLED="true", AWS_CONFIG_FILE=os.devnull, **extra)
    return env


@pytest.mark.server
def test_one_shot_job_publishes_the_demo_cube_into_s3(s3_server, tmp_path):
    from alveary import grid
    from alveary.cube import open_cube
    from alveary.ingest import build_demo

    doc = _compose()
    job = doc["services"]["demo-build"]
    script = DEPLOY / doc["configs"]["demo_build_script"]["file"]
    bucket = f"compose-{os.getpid()}"
    url = f"s3://{bucket}/velmora-irrigation"
    days = 2
    env = _clean_aws_env(
        ALVEARY_DEMO_URL=url,
        ALVEARY_DEMO_DAYS=str(days),
        AWS_ENDPOINT_URL=s3_server.endpoint_url,  # the job's http://store:9000, here
        AWS_DEFAULT_REGION=job["environment"]["AWS_DEFAULT_REGION"],
        # the same credentials file the composition mounts (the test server takes any)
        AWS_SHARED_CREDENTIALS_FILE=str(DEPLOY / "compose/secrets/store-credentials"),
        TMPDIR=str(tmp_path),
    )
    first = subprocess.run(
        [sys.executable, str(script)], env=env, capture_output=True, text=True, timeout=180
    )
    assert first.returncode == 0, first.stderr[-3000:]
    assert "cube velmora-irrigation version" in first.stdout
    # a second start finds the published cube and leaves it alone
    mark = s3_server.mark()
    again = subprocess.run(
        [sys.executable, str(script)], env=env, capture_output=True, text=True, timeout=120
    )
    assert again.returncode == 0 and "nothing to do" in again.stdout
    assert not [r for r in s3_server.requests(since=mark, bucket=bucket) if r.method == "PUT"]

    # judge: `alveary build-demo`'s own build of the same days on local disk
    reference = open_cube(build_demo(tmp_path / "reference", days=days))
    built = open_cube(url, s3_server.storage_options())
    assert built.meta.id == reference.meta.id == "velmora-irrigation"
    assert built.levels == reference.levels == tuple(range(9, 15))
    assert set(built.variables) == {"soil_moisture", "canopy_temperature"}
    np.testing.assert_array_equal(built.times, reference.times)
    assert built.times.size == days
    zones = grid.zones_in_bbox(-36.45, 30.4, -35.75, 30.7, 14)
    for variable in built.variables:
        got, want = built.read(variable, zones), reference.read(variable, zones)
        assert np.isfinite(want).sum() > 1000
        np.testing.assert_array_equal(got, want)


def test_one_shot_job_refuses_a_bad_target():
    script = DEPLOY / _compose()["configs"]["demo_build_script"]["file"]
    for url, days in (("/var/cubes/demo", "3"), ("s3://bucket-only", "3"), ("s3://b/p", "0")):
        env = _clean_aws_env(ALVEARY_DEMO_URL=url, ALVEARY_DEMO_DAYS=days)
        done = subprocess.run(
            [sys.executable, str(script)], env=env, capture_output=True, text=True, timeout=60
        )
        assert done.returncode == 2
        assert "ALVEARY_DEMO_" in done.stderr
