"""End to end: map tiles, vector tiles, legends and the map page of a real ``alveary serve``
process on 127.0.0.1 reading cubes from the S3-protocol test server.

Judges, all outside the service: pixel centres from PROJ (EPSG:3857 -> EPSG:4326), the
zone under each from grid.point_to_zone, the analytic field evaluated here at that zone's
centre, placed on the colour scale by the arithmetic written here; PNGs decoded by
Pillow; SVG parsed by xml.etree; vector tiles decoded by mapbox-vector-tile; HTML read by
html.parser; chunk GETs counted in the S3 server's own log against zarr's chunk grid.
"""

from __future__ import annotations

import io
import math
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import httpx
import mapbox_vector_tile
import numpy as np
import pytest
import zarr
from PIL import Image

from alveary import grid
from alveary.api._colours import colour_scale
from support import analytic, mapcube
from support.server import ServiceProcess
from support.tiles import chunk_gets, decode, level_range, proj_pixel_centres

pytestmark = pytest.mark.server


@pytest.fixture(scope="module")
def patch_store(s3_server):
    """The invented patch cube (coverage a box) in a bucket of this module's own."""
    bucket = s3_server.create_bucket()
    url = f"s3://{bucket}/patch"
    options = s3_server.storage_options()
    mapcube.build_map_cube(url, options, levels=(3, 5))
    return url, options


@pytest.fixture(scope="module")
def maps(analytic_store, patch_store):
    """A service of this module's own: the global analytic cube and the patch cube, with
    no chunk cache (every tile reads what it needs)."""
    (a_url, a_opt), (p_url, p_opt) = analytic_store, patch_store
    cubes = [
        {"id": "analytic", "url": a_url, "title": "Analytic", "storage_options": a_opt},
        {"id": "patch", "url": p_url, "title": "Patch", "storage_options": p_opt},
    ]
    proc = ServiceProcess(cubes, options={"cache_bytes": 0})
    proc.start()
    try:
        with httpx.Client(base_url=proc.url, timeout=60) as client:
            yield client
    finally:
        proc.stop()


def positions(values, lo, hi):
    """Entry 0..255 of values on a scale over [lo, hi] (written here from the docs)."""
    t = np.clip((np.asarray(values, float) - lo) / (hi - lo), 0.0, 1.0)
    return np.rint(t * 255).astype(int)


# tiles next to the antimeridian (x = 0 and x = 2^z - 1), at the top row (near the pole,
# where Web Mercator stops at 85.05°), and in between
TILES = [(2, 1, 0), (2, 1, 3), (3, 0, 0), (3, 0, 5), (5, 10, 17), (7, 50, 127), (7, 77, 0)]


@pytest.mark.parametrize("tile", TILES)
def test_tile_pixels_are_the_field_at_the_zone_centre(maps, tile):
    z, y, x = tile
    day, lo, hi, level, scale = 3, 280.0, 293.0, 7, colour_scale("clover")
    when = str(analytic.TIMES[day]) + "Z"
    r = maps.get(
        f"/collections/analytic/map/tiles/WebMercatorQuad/{z}/{y}/{x}",
        params={
            "vars": "temp",
            "datetime": when,
            "range": f"{lo},{hi}",
            "level": level,
            "colormap": "clover",
        },
    )
    assert r.status_code == 200, r.text
    assert r.headers["content-type"] == "image/png"
    px = decode(r.content)
    lat, lon = proj_pixel_centres(z, y, x)
    rows, cols = np.mgrid[0:256:3, 0:256:3]
    zones = grid.point_to_zone(lat[rows, cols], lon[rows, cols], level)
    clat, clon = grid.zone_to_point(zones)
    pos = positions(analytic.field(clat, clon, day), lo, hi)
    got = px[rows, cols]
    fill = np.all(got[..., :3] == scale.lut[pos][..., :3], axis=-1)
    edge = np.all(got[..., :3] == scale.edge_lut[pos][..., :3], axis=-1)  # zone outlines
    assert (got[..., 3] == 255).all()
    assert (fill | edge).mean() > 0.995
    assert fill.mean() > 0.8


def test_gaps_are_transparent_and_the_rest_coloured(maps):
    z, y, x = 4, 6, 8  # 21-41° N: the rain field has no data south of 44.8° N
    lo, hi = 1.0, 2.0
    r = maps.get(
        f"/collections/analytic/map/tiles/WebMercatorQuad/{z}/{y}/{x}",
        params={"vars": "rain", "range": f"{lo},{hi}", "level": 7},
    )
    px = decode(r.content)
    assert (px[..., 3] == 0).all()  # all empty: transparent
    z, y, x = 4, 5, 8  # 41-56° N: data north of 44.8° N only
    r = maps.get(
        f"/collections/analytic/map/tiles/WebMercatorQuad/{z}/{y}/{x}",
        params={"vars": "rain", "range": f"{lo},{hi}", "level": 7},
    )
    px = decode(r.content)
    lat, lon = proj_pixel_centres(z, y, x)
    clat, _ = grid.zone_to_point(grid.point_to_zone(lat, lon, 7))
    has_data = clat >= 44.8
    assert 0.2 < has_data.mean() < 0.9
    assert ((px[..., 3] == 255) == has_data).mean() > 0.999


def test_default_level_and_range(maps):
    # the level: zones of a regular hexagon of the zone's area, 2.5-5 px across at the
    # tile row's latitude (pixel = 2πR·cos(lat)/(256·2^z)), clamped to the levels (3, 7)
    z, y, x = 6, 25, 40
    lat_mid = math.degrees(math.atan(math.sinh(math.pi * (1 - 2 * (y + 0.5) / 2**z))))
    pixel = 2 * math.pi * 6378137.0 * math.cos(math.radians(lat_mid)) / (256 * 2**z)
    widths = {lv: math.sqrt(2 * grid.zone_area(lv) / math.sqrt(3)) / pixel for lv in range(25)}
    wanted = min(widths, key=lambda lv: abs(math.log2(widths[lv] / 3.5)))
    level = min((3, 7), key=lambda lv: (abs(lv - wanted), lv))
    path = f"/collections/analytic/map/tiles/WebMercatorQuad/{z}/{y}/{x}"
    lo, hi = level_range("temp", level)  # recorded when the cube was built
    default = maps.get(path, params={"vars": "temp"})
    explicit = maps.get(path, params={"vars": "temp", "level": level, "range": f"{lo!r},{hi!r}"})
    assert default.status_code == explicit.status_code == 200
    assert np.array_equal(decode(default.content), decode(explicit.content))
    other = maps.get(path, params={"vars": "temp", "level": 10 - level if level == 7 else 7})
    assert not np.array_equal(decode(default.content), decode(other.content))


def test_etag_cache_control_and_not_modified(maps):
    path = "/collections/analytic/map/tiles/WebMercatorQuad/5/11/16"
    first = maps.get(path, params={"vars": "temp"})
    etag = first.headers["etag"]
    assert "max-age" in first.headers["cache-control"]
    again = maps.get(path, params={"vars": "temp"}, headers={"If-None-Match": etag})
    assert again.status_code == 304
    same = maps.get(path, params={"vars": "temp", "datetime": str(analytic.TIMES[-1]) + "Z"})
    assert same.headers["etag"] == etag  # the same step, named: the same normalised query
    other = maps.get(path, params={"vars": "temp", "datetime": str(analytic.TIMES[0]) + "Z"})
    assert other.headers["etag"] != etag
    assert not np.array_equal(decode(other.content), decode(first.content))


def test_chunk_gets_equal_the_tile_cover(maps, s3_server, patch_store):
    url, options = patch_store
    z, y, x, level, step = 4, 5, 8, 5, 2
    # the chunks holding the zones under the pixels, by zarr's own chunk grid
    lat, lon = proj_pixel_centres(z, y, x)
    zones = np.unique(grid.point_to_zone(lat, lon, level))
    version = maps.get("/cubes/patch").json()["version"]
    root = zarr.open_group(
        url.replace("s3://", "s3://"),
        mode="r",
        storage_options=options,
        path=f"versions/{version}",
        zarr_format=3,
    )
    strips = root[f"moisture/{level}/strips"]
    _, region, i, j = grid.zone_to_index(zones)
    ct, _, cr, cc = strips.chunks
    in_strips = region < 5
    cover = {
        (step // ct, int(g), int(a) // cr, int(b) // cc)
        for g, a, b in zip(region[in_strips], i[in_strips], j[in_strips], strict=True)
    }
    expected = len(cover) + (1 if (~in_strips).any() else 0)
    mark = s3_server.mark()
    r = maps.get(
        f"/collections/patch/map/tiles/WebMercatorQuad/{z}/{y}/{x}",
        params={"vars": "moisture", "level": level, "datetime": str(mapcube.TIMES[step]) + "Z"},
    )
    assert r.status_code == 200
    gets = chunk_gets(s3_server, mark, url)
    assert len(gets) == expected
    assert len({g.path for g in gets}) == expected  # each chunk once


def test_a_tile_outside_the_coverage_reads_nothing(maps, s3_server, patch_store):
    url, _ = patch_store
    mark = s3_server.mark()
    r = maps.get("/collections/patch/map/tiles/WebMercatorQuad/3/5/7", params={"vars": "moisture"})
    assert r.status_code == 200
    assert (decode(r.content)[..., 3] == 0).all()
    assert chunk_gets(s3_server, mark, url) == []
    mvt = maps.get("/collections/patch/tiles/WebMercatorQuad/3/5/7")
    assert mvt.status_code == 200
    layers = mapbox_vector_tile.decode(mvt.content)
    assert all(not layer["features"] for layer in layers.values())
    assert chunk_gets(s3_server, mark, url) == []


def test_tiles_description_and_template(maps):
    r = maps.get("/collections/analytic/map/tiles", params={"vars": "temp", "colormap": "honey"})
    assert r.status_code == 200
    doc = r.json()
    assert doc["tilejson"] == "3.0.0" and doc["minzoom"] == 0
    template = doc["tiles"][0]
    assert "{z}/{y}/{x}" in template and "vars=temp" in template and "colormap=honey" in template
    tile = maps.get(template.replace("{z}", "3").replace("{y}", "2").replace("{x}", "4"))
    assert tile.status_code == 200 and tile.headers["content-type"] == "image/png"
    item = next(lk["href"] for lk in doc["tilesets"][0]["links"] if lk["rel"] == "item")
    assert "{tileMatrix}/{tileRow}/{tileCol}" in item
    meta = maps.get("/cubes/analytic").json()
    hrefs = {lk["href"] for lk in meta["links"]}
    assert "/map?cube=analytic" in hrefs and "/collections/analytic/map/tiles" in hrefs


def test_vector_tile_holds_the_zones_with_their_values(maps):
    z, y, x, step = 6, 23, 33, 1
    r = maps.get(
        f"/collections/analytic/tiles/WebMercatorQuad/{z}/{y}/{x}",
        params={"level": 7, "datetime": str(analytic.TIMES[step]) + "Z"},
    )
    assert r.status_code == 200, r.text
    assert r.headers["content-type"] == "application/vnd.mapbox-vector-tile"
    layer = mapbox_vector_tile.decode(r.content)["zones"]  # the registry package's decoder
    got = {f["properties"]["zone"]: f["properties"] for f in layer["features"]}
    # every zone whose centre lies in the tile is there (and only zones near the tile)
    lat, lon = proj_pixel_centres(z, y, x)
    inside = np.unique(grid.point_to_zone(lat[8:-8:4, 8:-8:4], lon[8:-8:4, 8:-8:4], 7))
    assert set(inside.tolist()) <= set(got)
    ids = np.array(sorted(got), dtype=np.uint64)
    clat, clon = grid.zone_to_point(ids)
    expected = analytic.field(clat, clon, step)
    temp = np.array([got[int(z_)]["temp"] for z_ in ids])
    np.testing.assert_allclose(temp, expected, rtol=1e-12)
    assert all(
        got[int(z_)]["zone_text"] == t for z_, t in zip(ids, grid.zone_to_text(ids), strict=True)
    )
    for f in layer["features"]:
        assert f["geometry"]["type"] in ("Polygon", "MultiPolygon")


def test_legend_png_and_svg(maps):
    png = maps.get("/collections/analytic/legend", params={"vars": "temp", "colormap": "honey"})
    assert png.status_code == 200 and png.headers["content-type"] == "image/png"
    image = Image.open(io.BytesIO(png.content))
    assert image.size[0] >= 200
    svg = maps.get("/collections/analytic/legend", params={"vars": "temp", "f": "svg"})
    assert svg.headers["content-type"].startswith("image/svg+xml")
    root = ET.fromstring(svg.content)  # xml.etree parses it
    text = " ".join(t.text or "" for t in root.iter("{http://www.w3.org/2000/svg}text"))
    assert "analytic temperature (K)" in text
    lo, hi = level_range("temp", 7)  # the default range: the finest level's
    assert f"{lo:.1f}" in text and f"{hi:.1f}" in text


@pytest.mark.parametrize(
    ("path", "params", "name"),
    [
        ("/collections/analytic/map/tiles/WebMercatorQuad/3/8/0", {}, "y"),
        ("/collections/analytic/map/tiles/WebMercatorQuad/25/0/0", {}, "z"),
        ("/collections/analytic/map/tiles/WebMercatorQuad/3/1/1", {"vars": "temp,rain"}, "vars"),
        (
            "/collections/analytic/map/tiles/WebMercatorQuad/3/1/1",
            {"colormap": "rainbow"},
            "colormap",
        ),
        ("/collections/analytic/map/tiles/WebMercatorQuad/3/1/1", {"range": "5,1"}, "range"),
        ("/collections/analytic/map/tiles/WebMercatorQuad/3/1/1", {"level": 5}, "level"),
        (
            "/collections/analytic/map/tiles/WebMercatorQuad/3/1/1",
            {"datetime": "../.."},
            "datetime",
        ),
        ("/collections/analytic/legend", {"f": "gif"}, "f"),
        (
            "/collections/analytic/map/tiles/WebMercatorQuad/3/1/1",
            {"variables": "temp"},
            "variables",
        ),
    ],
)
def test_bad_parameters_are_named(maps, path, params, name):
    r = maps.get(path, params=params)
    assert r.status_code == 422, r.text  # the service answers bad input with 422
    assert r.headers["content-type"].startswith("application/problem+json")
    assert name in r.text


def test_unknown_cube_is_not_found(maps):
    for path in [
        "/collections/nope/map/tiles/WebMercatorQuad/1/0/0",
        "/collections/nope/legend",
        "/collections/nope/tiles/WebMercatorQuad/1/0/0",
        "/collections/nope/map/tiles",
    ]:
        assert maps.get(path).status_code == 404


class Links(HTMLParser):
    def __init__(self):
        super().__init__()
        self.hrefs = []

    def handle_starttag(self, tag, attrs):
        self.hrefs += [v for k, v in attrs if k in ("href", "src") and v]


def test_landing_page_for_browsers_and_json_otherwise(maps):
    page = maps.get("/", headers={"Accept": "text/html,application/xhtml+xml,*/*;q=0.8"})
    assert page.headers["content-type"].startswith("text/html")
    links = Links()
    links.feed(page.text)
    assert "map" in links.hrefs and "docs" in links.hrefs
    assert "map?cube=patch" in links.hrefs
    body = maps.get("/", headers={"Accept": "application/json"}).json()
    assert any(lk["href"].endswith("/map") for lk in body["links"])
    assert maps.get("/").headers["content-type"] == "application/json"


def test_map_page_and_its_files_are_served(maps):
    page = maps.get("/map")
    assert page.status_code == 200 and page.headers["content-type"].startswith("text/html")
    assert "local authorities and licensed practice" in " ".join(page.text.split())
    links = Links()
    links.feed(page.text)
    files = [h for h in links.hrefs if h.startswith("static/")]
    assert len(files) >= 4
    for href in files:
        r = maps.get("/" + href)
        assert r.status_code == 200, href
    assert maps.get("/static/../_app.py").status_code == 404
    assert maps.get("/static/vendor/maplibre-gl/LICENSE.txt").status_code == 200
