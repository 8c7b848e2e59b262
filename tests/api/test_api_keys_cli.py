"""``alveary keys new``: the printed line admits the printed key, and only it.

Judges: the lines are read by Python's own TOML reader, and the hash is recomputed here
with hashlib.scrypt from the documented text form (scrypt:<log2 N>:<r>:<p>:<salt>:<digest>),
not with the service's verifier; the service's key ring is then built from the same lines.
"""

from __future__ import annotations

import base64
import hashlib
import subprocess
import sys
import tomllib

from alveary.api._access import KeyRing, new_key


def run_keys_new(*cubes):
    done = subprocess.run(
        [sys.executable, "-m", "alveary.cli", "keys", "new", *cubes],
        capture_output=True,
        text=True,
        timeout=120,
        check=True,
    )
    lines = done.stdout.splitlines()
    key = lines[1].strip()
    config = "\n".join(line for line in lines if " = " in line)
    return key, config, done.stdout


def unb64(text):
    return base64.urlsafe_b64decode(text + "=" * (-len(text) % 4))


def admits(hashed, key):
    kind, log2_n, r, p, salt, digest = hashed.split(":")
    assert kind == "scrypt"
    want = unb64(digest)
    got = hashlib.scrypt(
        key.encode(),
        salt=unb64(salt),
        n=2 ** int(log2_n),
        r=int(r),
        p=int(p),
        maxmem=2**28,
        dklen=len(want),
    )
    return got == want


def test_printed_line_admits_the_printed_key_only():
    key, config, stdout = run_keys_new("rain", "v2.soil")
    assert stdout.count(key) == 1  # printed once
    data = tomllib.loads(config)
    assert set(data) == {"rain", "v2.soil"}
    ((key_id, hashed),) = data["rain"].items()
    assert data["v2.soil"] == {key_id: hashed}  # one key, both cubes
    assert key.startswith(key_id + ".") and key not in config
    assert admits(hashed, key)
    other, _ = new_key()
    flipped = key[:-1] + ("A" if key[-1] != "A" else "B")
    assert not admits(hashed, other) and not admits(hashed, flipped)
    # the service reads the same lines the same way
    ring = KeyRing({"rain", "v2.soil", "dry"}, data)
    granted = ring.check(key)
    assert granted.key_id == key_id and granted.cubes == {"rain", "v2.soil"}
    for wrong in (other, flipped, key_id + "." + key.split(".")[1][::-1], "", key + " "):
        assert ring.check(wrong).cubes == frozenset()
    assert ring.readable("open", ring.check(None)) and not ring.readable("dry", granted)


def test_two_runs_give_different_keys_and_salts():
    key1, config1, _ = run_keys_new("rain")
    key2, config2, _ = run_keys_new("rain")
    hash1 = next(iter(tomllib.loads(config1)["rain"].values()))
    hash2 = next(iter(tomllib.loads(config2)["rain"].values()))
    assert key1 != key2 and hash1.split(":")[4] != hash2.split(":")[4]
    assert not admits(hash1, key2) and not admits(hash2, key1)


def test_bad_cube_id_is_refused():
    done = subprocess.run(
        [sys.executable, "-m", "alveary.cli", "keys", "new", "../etc"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 2 and "cube_id" in done.stderr and done.stdout == ""
