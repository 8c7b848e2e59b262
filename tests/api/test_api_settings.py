"""Settings: environment variables, the TOML cube list (read with the standard library's
tomllib as the reference parser of the file format) and start-up validation."""

from __future__ import annotations

import tomllib

import pytest

from alveary import InvalidInput
from alveary.api import Settings, load_settings, scan_store
from support.server import toml_cubes


def test_environment_and_overrides(monkeypatch):
    monkeypatch.setenv("ALVEARY_MAX_ZONES", "1234")
    monkeypatch.setenv("ALVEARY_CORS_ORIGINS", "https://a.example, https://b.example")
    settings = Settings(port=9000)
    assert settings.max_zones == 1234 and settings.limits.max_zones == 1234
    assert settings.cors_origins == ["https://a.example", "https://b.example"]
    assert settings.port == 9000 and settings.host == "127.0.0.1"


def test_toml_cube_list(tmp_path):
    cubes = [
        {"id": "soil", "url": "s3://b/soil", "title": "Soil", "storage_options": {"anon": True}},
        {"id": "demo", "url": str(tmp_path / "demo")},
    ]
    path = tmp_path / "cubes.toml"
    path.write_text(toml_cubes(cubes))
    assert tomllib.loads(path.read_text())["cubes"] == cubes  # the file is what we meant
    sources = Settings(config=path).sources()
    assert [s.id for s in sources] == ["soil", "demo"]
    assert sources[0].storage_options == {"anon": True}
    assert "anon" not in repr(sources[0])  # options (credentials) are never shown


@pytest.mark.parametrize(
    ("text", "parameter", "allowed"),
    [
        ("", "config", "at least one [[cubes]] table"),
        ("[[cubes]]\nurl = 'x'\n", "id", "required"),
        ("[[cubes]]\nid = 'a b'\nurl = 'x'\n", "cube_id", "1-64 characters"),
        ("[[cubes]]\nid = 'a'\nurl = 'x'\n[[cubes]]\nid = 'a'\nurl = 'y'\n", "config", "unique"),
        ("[[cubes]\n", "config", "valid TOML"),
    ],
)
def test_bad_cube_files_stop_start_up(tmp_path, text, parameter, allowed):
    path = tmp_path / "cubes.toml"
    path.write_text(text)
    # The standard library's TOML reader agrees on which files are not TOML at all.
    if allowed == "valid TOML":
        with pytest.raises(tomllib.TOMLDecodeError):
            tomllib.loads(text)
    with pytest.raises(InvalidInput) as info:
        load_settings({"config": path})
    assert info.value.parameter == parameter and allowed in info.value.allowed


def test_bad_option_is_named():
    with pytest.raises(InvalidInput) as info:
        load_settings({"port": 70000})
    assert info.value.parameter == "port"
    with pytest.raises(InvalidInput) as info:
        load_settings({"config": "/nonexistent/cubes.toml"})
    assert info.value.parameter == "config"


def test_store_scan_finds_published_cubes_only(tmp_path):
    (tmp_path / "one").mkdir()
    (tmp_path / "one" / "current.json").write_text("{}")
    (tmp_path / "other").mkdir()
    assert [s.id for s in scan_store(tmp_path)] == ["one"]
    assert scan_store(tmp_path / "missing") == []
