"""deploy/Dockerfile: a digest-pinned base, a non-root user, a read-only-compatible layout.

Docker cannot run here, so the file is read as text: the checks follow the Dockerfile
reference (FROM name[:tag][@digest], USER, the exec form of CMD) and the OCI image spec
(a sha256 digest is 64 lowercase hex digits). The image's Python minor must be one the
package supports (pyproject's requires-python), and the Kubernetes and Compose files
must run it as the same user.
"""

from __future__ import annotations

import json
import re
import tomllib
from pathlib import Path

import yaml
from packaging.specifiers import SpecifierSet

REPO = Path(__file__).resolve().parents[2]
DOCKERFILE = REPO / "deploy" / "Dockerfile"

_FROM = re.compile(
    r"^FROM\s+(?:--platform=\S+\s+)?(?P<name>[\w./-]+):(?P<tag>[\w.-]+)"
    r"@sha256:(?P<digest>[0-9a-f]{64})(?:\s+AS\s+\w+)?\s*$",
    re.M | re.I,
)


def _instructions() -> list[tuple[str, str]]:
    text = re.sub(r"\\\n", " ", DOCKERFILE.read_text())
    out = []
    for line in text.splitlines():
        line = line.strip()
        if line and not line.startswith("#"):
            word, _, rest = line.partition(" ")
            out.append((word.upper(), rest.strip()))
    return out


def test_every_base_image_is_pinned_by_digest():
    froms = [rest for word, rest in _instructions() if word == "FROM"]
    assert froms
    pinned = [_FROM.match(f"FROM {rest}") for rest in froms]
    stages = set(re.findall(r"\bAS\s+(\w+)", "\n".join(froms), re.I))
    for rest, m in zip(froms, pinned, strict=True):
        if m is None:
            assert rest.split()[0] in stages, f"unpinned base image: FROM {rest}"
    bases = {(m["name"], m["tag"], m["digest"]) for m in pinned if m}
    assert len(bases) == 1, "build and runtime stages share one pinned base"
    ((name, tag, _digest),) = bases
    assert name == "python" and "slim" in tag
    # the image's Python satisfies the package's requires-python
    python = re.match(r"(\d+\.\d+)(?:\.\d+)?-", tag).group(1)
    requires = tomllib.loads((REPO / "pyproject.toml").read_text())["project"]["requires-python"]
    assert f"{python}.0" in SpecifierSet(requires)


def test_image_runs_as_a_fixed_unprivileged_user():
    instructions = _instructions()
    users = [rest for word, rest in instructions if word == "USER"]
    assert users and re.fullmatch(r"\d+:\d+", users[-1]), "numeric USER uid:gid"
    uid, gid = (int(x) for x in users[-1].split(":"))
    assert uid >= 1000 and gid >= 1000
    # the user is created with exactly that uid/gid
    runs = " ".join(rest for word, rest in instructions if word == "RUN")
    assert re.search(rf"useradd\b[^;&]*--uid {uid}\b", runs)
    assert re.search(rf"groupadd\b[^;&]*--gid {gid}\b", runs)
    # the orchestrators run it as the same user
    deployment = yaml.safe_load((REPO / "deploy/kubernetes/deployment.yaml").read_text())
    ctx = deployment["spec"]["template"]["spec"]["securityContext"]
    assert (ctx["runAsUser"], ctx["runAsGroup"]) == (uid, gid)
    compose = yaml.safe_load((REPO / "deploy/compose.yaml").read_text())
    for name in ("alveary", "demo-build"):
        assert compose["services"][name]["user"] == f"{uid}:{gid}"


def test_image_writes_nothing_outside_tmp_at_run_time():
    instructions = _instructions()
    env = " ".join(rest for word, rest in instructions if word == "ENV")
    assert "PYTHONDONTWRITEBYTECODE=1" in env
    assert "HOME=/tmp" in env  # libraries that keep config under $HOME find /tmp writable
    runs = " ".join(rest for word, rest in instructions if word == "RUN")
    assert "compileall" in runs  # bytecode is compiled at build time
    workdirs = [rest for word, rest in instructions if word == "WORKDIR"]
    assert workdirs[-1] == "/tmp"
    assert not [rest for word, rest in instructions if word == "VOLUME"]
    assert not [rest for word, rest in instructions if word == "ADD"]  # COPY only


def test_command_and_health_check():
    instructions = dict(_instructions())
    cmd = json.loads(instructions["CMD"])
    assert cmd == ["alveary", "serve", "--config", "/etc/alveary/cubes.toml"]
    health = instructions["HEALTHCHECK"]
    assert "/healthz" in health
    exec_form = json.loads(health[health.index("CMD") + 3 :].strip())
    assert exec_form[0] == "python"
    assert "EXPOSE" in instructions and instructions["EXPOSE"] == "8000"


def test_build_context_is_limited():
    ignore = (REPO / "deploy" / "Dockerfile.dockerignore").read_text().split()
    assert ignore[ignore.index("*") :][:1] == ["*"]  # everything excluded first
    copied = set()
    for word, rest in _instructions():
        if word == "COPY" and not rest.startswith("--from"):
            copied.update(rest.split()[:-1])
    for path in copied:
        assert f"!{path}" in ignore, f"{path} is copied but ignored"
        assert (REPO / path).exists()
