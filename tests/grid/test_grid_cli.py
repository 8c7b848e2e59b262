"""``alveary zone``, run as a real process (the installed console script)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pyproj
import pytest

from alveary import grid

ALVEARY = Path(sys.executable).with_name("alveary")
ARGS = ["zone", "--lat", "12.5", "--lon", "-3.25", "--level", "9"]


def run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [str(ALVEARY), *args], capture_output=True, text=True, timeout=60, check=False
    )


@pytest.fixture(scope="module")
def facts() -> dict:
    out = run(*ARGS, "--json")
    assert out.returncode == 0, out.stderr
    return json.loads(out.stdout)


def test_json_output_is_the_zone_under_the_point(facts):
    zone = grid.point_to_zone(12.5, -3.25, 9)
    assert facts.get("zone", facts.get("id")) == int(zone)
    assert facts["text"] == str(grid.zone_to_text(zone))
    assert int(grid.zone_from_text(facts["text"])) == int(zone)
    lat, lon = grid.zone_to_point(zone)
    centre = facts["centre"]
    assert centre["lat"] == pytest.approx(float(lat), abs=1e-12)
    assert centre["lon"] == pytest.approx(float(lon), abs=1e-12)
    np.testing.assert_allclose(np.array(facts["boundary"]), grid.zone_boundary(zone), atol=1e-12)
    area = facts.get("area_m2", facts.get("area"))
    assert area == pytest.approx(grid.zone_area(9))


def test_json_output_is_sensible_on_its_own(facts):
    # judged against outside facts, not only the library: the point lies within a zone's
    # reach of the centre (pyproj.Geod), and the boundary's geodesic area is the zone area
    geod = pyproj.Geod(ellps="WGS84")
    _, _, d = geod.inv(-3.25, 12.5, facts["centre"]["lon"], facts["centre"]["lat"])
    assert d < 12_000  # level 9 zones are about 14 km across
    ring = np.array(facts["boundary"])
    assert ring.shape[0] >= 6 and ring.shape[1] == 2  # a hexagon's true outline
    area, _ = geod.polygon_area_perimeter(ring[:, 1], ring[:, 0])
    assert area == pytest.approx(facts.get("area_m2", facts.get("area")), rel=1e-3)


def test_text_output():
    out = run(*ARGS)
    assert out.returncode == 0, out.stderr
    zone = grid.point_to_zone(12.5, -3.25, 9)
    assert str(int(zone)) in out.stdout
    assert str(grid.zone_to_text(zone)) in out.stdout


@pytest.mark.parametrize(
    "args, word",
    [
        (["zone", "--lat", "95", "--lon", "0", "--level", "3"], "lat"),
        (["zone", "--lat", "0", "--lon", "nan", "--level", "3"], "lon"),
        (["zone", "--lat", "0", "--lon", "0", "--level", "25"], "level"),
    ],
)
def test_bad_input_is_a_clear_error(args, word):
    out = run(*args)
    assert out.returncode == 2
    assert word in out.stderr
    assert "Traceback" not in out.stderr
