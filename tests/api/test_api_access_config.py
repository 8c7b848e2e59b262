"""Configuration of private cubes: what the cube list and the keys file may say, and the
errors that name what is wrong. Keys are hashed with ``hash_key`` and judged by
``hashlib.scrypt`` in test_api_keys_cli.py; here the rules of the configuration."""

from __future__ import annotations

import logging

import pytest

from alveary import InvalidInput
from alveary.api import Settings, load_settings
from alveary.api._access import ANONYMOUS, hash_key, new_key

KEY, KEY_ID = new_key()
HASH = hash_key(KEY)


def cube(cube_id, **extra):
    return {"id": cube_id, "url": f"/srv/{cube_id}", **extra}


def test_cube_list_keys_and_keys_file_are_merged(tmp_path, caplog):
    other, other_id = new_key()
    keys_file = tmp_path / "api-keys.toml"
    keys_file.write_text(
        "# one line per key and cube\n"
        f'secret.{other_id} = "{hash_key(other)}"\n'
        f'gone.{other_id} = "{hash_key(other)}"\n'
    )
    settings = Settings(
        cubes=[
            cube("open"),
            cube("secret", public=False, keys={KEY_ID: HASH}),
            cube("nobody", public=False),
        ],
        api_keys_file=keys_file,
    )
    with caplog.at_level(logging.WARNING, logger="alveary.api"):
        ring = settings.key_ring()
    assert "'gone'" in caplog.text and "'nobody'" in caplog.text
    assert ring.private == {"secret", "nobody"}
    for key in (KEY, other):
        granted = ring.check(key)
        assert granted.cubes == {"secret"}
        assert ring.readable("secret", granted) and not ring.readable("nobody", granted)
    assert ring.readable("open", ANONYMOUS) and not ring.readable("secret", ANONYMOUS)


def test_keys_of_a_public_cube_are_refused(tmp_path):
    with pytest.raises(InvalidInput, match="public = false"):
        load_settings({"cubes": [cube("open", keys={KEY_ID: HASH})]})
    keys_file = tmp_path / "api-keys.toml"
    keys_file.write_text(f'open.{KEY_ID} = "{HASH}"\n')
    with pytest.raises(InvalidInput, match="keys only for private cubes"):
        Settings(cubes=[cube("open")], api_keys_file=keys_file).key_ring()


@pytest.mark.parametrize(
    ("line", "error"),
    [
        (f'secret.{KEY_ID} = "{HASH[:-20]}:x"', "scrypt:<log2 N>"),
        (f'secret.{KEY_ID} = "plain-text-key"', "scrypt:<log2 N>"),
        (f'secret.{KEY_ID} = "scrypt:40:8:1:{HASH.split(":", 4)[4]}"', "scrypt:<log2 N>"),
        (f'secret.ABC = "{HASH}"', "12 hex digits"),
        (f"secret.{KEY_ID} = 5", "<cube>.<key id>"),
        ("secret = [", "valid TOML"),
    ],
    # stable ids (the key is new in each process; parallel workers must collect alike)
    ids=["cut-hash", "plain-text", "huge-cost", "bad-key-id", "not-a-string", "bad-toml"],
)
def test_malformed_keys_file_names_the_problem(tmp_path, line, error):
    keys_file = tmp_path / "api-keys.toml"
    keys_file.write_text(line + "\n")
    settings = Settings(cubes=[cube("secret", public=False)], api_keys_file=keys_file)
    with pytest.raises(InvalidInput, match=error.replace("<", ".").replace(">", ".")) as info:
        settings.key_ring()
    assert HASH not in str(info.value)  # a hash is never echoed into messages


def test_missing_keys_file_is_a_warning(tmp_path, caplog):
    settings = Settings(
        cubes=[cube("secret", public=False)], api_keys_file=tmp_path / "absent.toml"
    )
    with caplog.at_level(logging.WARNING, logger="alveary.api"):
        ring = settings.key_ring()
    assert "does not exist" in caplog.text and len(ring) == 0
    assert not ring.readable("secret", ring.check(KEY))
