"""Every zone whose centre lies on a source is written: footprints at 180° and the poles.

The judge is a plain count made in the test: every zone of the level, its centre, and
an inequality per side of the raster's box.
"""

from __future__ import annotations

import numpy as np
import pytest
from cube_sources import write_geotiff
from pyproj import Transformer

from alveary import IngestError, grid
from alveary.cube import open_cube
from alveary.ingest import ingest

LEVEL = 5
STEP = 1.0


def _inside(west, south, east, north):
    """Zones whose centres lie strictly inside the box (longitudes taken modulo 360)."""
    zones = grid.all_zones(LEVEL)
    lat, lon = (np.asarray(a) for a in grid.zone_to_point(zones))
    dlon = np.mod(lon - west, 360.0)
    inside = (lat > south) & (lat < north) & (dlon > 0) & (dlon < east - west)
    if north == 90.0:
        inside |= lat == 90.0  # the north apex
    if south == -90.0:
        inside |= lat == -90.0
    return set(zones[inside].tolist())


@pytest.mark.parametrize(
    ("box", "expected"),
    [
        ((-180.0, -60.0, 180.0, 90.0), 9559),  # all longitudes and the north pole
        ((-180.0, -60.0, 180.0, 60.0), 8876),  # all longitudes, no pole
        ((170.0, -20.0, 190.0, 20.0), None),  # across the antimeridian
        ((-30.0, 60.0, 40.0, 90.0), None),  # the north pole only
        ((-60.0, -90.0, 60.0, -70.0), None),  # the south pole only
        ((10.0, 20.0, 30.0, 40.0), None),  # neither
    ],
)
def test_every_zone_centre_on_the_raster_is_written(tmp_path, box, expected):
    west, south, east, north = box
    rows, cols = round((north - south) / STEP), round((east - west) / STEP)
    path = write_geotiff(
        tmp_path / "ones.tif", np.ones((rows, cols), "f4"), west=west, north=north, step_x=STEP
    )
    summary = ingest([path], str(tmp_path / "c"), LEVEL, cube_id="ones", time="2024-01-01")
    zones = grid.all_zones(LEVEL)
    values = open_cube(str(tmp_path / "c")).read("ones", zones)[0]
    written = set(zones[np.isfinite(values)].tolist())
    inside = _inside(*box)
    assert written == inside
    assert summary.zones_written[LEVEL] == len(inside)
    if expected is not None:  # the counts of the original report, made independently
        assert len(inside) == expected


def test_a_wrong_crs_fails_and_publishes_nothing(tmp_path):
    # a raster on a degree grid labelled with a UTM CRS: its "metres" are a few degrees'
    # worth of numbers, so it lands on a speck near the projection's origin
    path = write_geotiff(
        tmp_path / "deg.tif",
        np.ones((40, 60), "f4"),
        west=10.0,
        north=50.0,
        step_x=0.1,
        crs="EPSG:32633",
    )
    out = tmp_path / "c"
    with pytest.raises(IngestError) as err:
        ingest([path], str(out), 6, time="2024-01-01")
    text = str(err.value)
    assert "wrote no zone" in text and "CRS" in text and "Nothing was published" in text
    # PROJ's own view of that footprint: x = 10..16 m, y = 46..50 m in UTM zone 33N
    west = Transformer.from_crs("EPSG:32633", "EPSG:4326", always_xy=True).transform(10, 46)[0]
    assert f"footprint is west {float(f'{west:.8g}')}," in text
    assert not (out / "current.json").exists()
    assert not (out / "versions").exists() or not any(
        p.name != "zarr.json" for p in (out / "versions").iterdir()
    )
