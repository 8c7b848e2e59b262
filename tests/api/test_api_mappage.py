"""The map page in a real browser: Playwright drives Debian's chromium (never a downloaded
browser) against a real ``alveary serve`` (uvicorn) process serving an invented cube of an
analytic field (``tests/support/mapcube.py``) from the S3-protocol test server.

Judges: screen pixels are turned into lat/lon with Web Mercator arithmetic written here
(the map library's 512-pixel world), the zone under a point comes from
grid.point_to_zone, values from the analytic field at the zone centre, the level rule and
row arithmetic from the Python tile module, and the tile zoom the library really requests
from its own network traffic. Every request the page makes must stay on the loopback
interface.
"""

from __future__ import annotations

import io
import math
import re
from pathlib import Path
from urllib.parse import parse_qs, urlsplit

import numpy as np
import pytest
from PIL import Image

from alveary import grid
from alveary.api._colours import colour_scale
from alveary.api._tileset import map_tiles_document
from alveary.query import format_time, parse_datetime, select_times
from alveary.query._tiles import default_level, pixel_size, tile_bounds
from support.mapcube import COVERAGE, CUBE_ID, LEVELS, TIMES, VARIABLES, build_map_cube, field
from support.server import ServiceProcess

pytestmark = pytest.mark.server

CHROMIUM = Path("/usr/bin/chromium")
FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]
ROOT = Path(__file__).resolve().parents[2]
VIEWPORT = {"width": 1200, "height": 760}

NO_CHROMIUM = (
    "Debian's chromium is not installed: run `apt-get update && apt-get install -y chromium` "
    "(the test drives /usr/bin/chromium and never downloads a browser)"
)
STATIC = ROOT / "service" / "alveary" / "api" / "static"


def recorded_range(variable, level):
    """min, max of the values stored at a level: the field at the centres of the zones the
    cube holds, over every step (what the service records when the cube is built)."""
    west, south, east, north = COVERAGE
    lat, lon = grid.zone_to_point(grid.zones_in_bbox(west, south, east, north, level))
    steps = np.arange(TIMES.size, dtype=float)[:, None]
    values = field(variable, lat[None, :], lon[None, :], steps)
    return float(np.nanmin(values)), float(np.nanmax(values))


@pytest.fixture(scope="module")
def served(s3_server):
    """A real service serving the invented cube."""
    if not CHROMIUM.exists():
        pytest.skip(NO_CHROMIUM)
    bucket = s3_server.create_bucket()
    url = f"s3://{bucket}/field"
    options = s3_server.storage_options()
    build_map_cube(url, options)
    cubes = [
        {"id": CUBE_ID, "url": url, "title": "Invented test field", "storage_options": options}
    ]
    proc = ServiceProcess(cubes)
    proc.start()
    try:
        yield proc
    finally:
        proc.stop()


@pytest.fixture(scope="module")
def browser():
    if not CHROMIUM.exists():
        pytest.skip(NO_CHROMIUM)
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=str(CHROMIUM), args=FLAGS, headless=True)
        yield b
        b.close()


@pytest.fixture
def page(browser, served):
    """A page whose every request is logged; anything not on loopback is refused."""
    context = browser.new_context(viewport=VIEWPORT)
    page = context.new_page()
    page.requested = []
    page.outside = []
    page.problems = []

    def route(r):
        host = urlsplit(r.request.url).hostname
        if r.request.url.startswith(("data:", "blob:")) or host in (
            "127.0.0.1",
            "localhost",
            "::1",
        ):
            page.requested.append(r.request.url)
            r.continue_()
        else:
            page.outside.append(r.request.url)
            r.abort()

    page.route("**/*", route)
    page.on("pageerror", lambda e: page.problems.append(str(e)))
    yield page
    assert page.outside == [], f"the page asked other hosts: {page.outside[:5]}"
    assert page.problems == [], page.problems
    context.close()


def open_map(page, served, query="", view=""):
    page.goto(f"{served.url}/map{query}{view}")
    page.wait_for_selector("body[data-tiles='loaded']", timeout=90_000)


def wait_tiles(page):
    page.wait_for_function("document.body.dataset.tiles === 'loaded'", timeout=90_000)


def hide_cube_layer(page):
    """Hide the tiles and wait until the map has drawn a frame without them."""
    page.evaluate(
        """() => new Promise((done) => { const m = window.alveary.state.map;
             m.once('render', () => { m.once('render', done); m.triggerRepaint(); });
             m.setLayoutProperty('cube', 'visibility', 'none'); })"""
    )


def view_state(page):
    return page.evaluate(
        """() => { const m = window.alveary.state.map; const c = m.getCenter();
                   const r = document.getElementById('map').getBoundingClientRect();
                   return {lng: c.lng, lat: c.lat, zoom: m.getZoom(),
                           left: r.left, top: r.top, width: r.width, height: r.height}; }"""
    )


def screen_to_lonlat(view, sx, sy):
    """Web Mercator on the map library's world of 512·2^zoom pixels (written here)."""
    world = 512.0 * 2.0 ** view["zoom"]
    cx = (view["lng"] + 180.0) / 360.0 * world
    phi = math.radians(view["lat"])
    cy = (1.0 - math.log(math.tan(phi) + 1.0 / math.cos(phi)) / math.pi) / 2.0 * world
    wx = cx + (np.asarray(sx, float) - view["width"] / 2.0)
    wy = cy + (np.asarray(sy, float) - view["height"] / 2.0)
    lon = wx / world * 360.0 - 180.0
    lat = np.degrees(np.arctan(np.sinh(np.pi * (1.0 - 2.0 * wy / world))))
    return lon, lat


def lonlat_to_screen(view, lon, lat):
    world = 512.0 * 2.0 ** view["zoom"]

    def merc(lo, la):
        la = np.radians(la)
        return (np.asarray(lo) + 180.0) / 360.0 * world, (
            1.0 - np.log(np.tan(la) + 1.0 / np.cos(la)) / np.pi
        ) / 2.0 * world

    cx, cy = merc(view["lng"], view["lat"])
    wx, wy = merc(lon, lat)
    return wx - cx + view["width"] / 2.0, wy - cy + view["height"] / 2.0


def canvas_pixels(page):
    png = page.locator("#map canvas").screenshot()
    return np.asarray(Image.open(io.BytesIO(png)).convert("RGB")).astype(int)


def test_page_logic_agrees_with_the_service(page, served):
    open_map(page, served)
    logic = "window.alveary.logic"
    # the level rule, on a cube's levels and on every level (tile module's Python)
    wide = map_tiles_document("x", title="x", levels=range(0, 25))["levels"]
    narrow = map_tiles_document("x", title="x", levels=LEVELS)["levels"]
    cases = [(z, y) for z in range(0, 21) for y in {0, (2**z) // 3, (2**z) // 2, 2**z - 1}]
    got = page.evaluate(
        f"([cases, a, b]) => cases.map(([z, y]) => [{logic}.defaultLevel(z, y, a),"
        f" {logic}.defaultLevel(z, y, b), {logic}.pixelSize(z, y)])",
        [cases, wide, narrow],
    )
    for (z, y), (lw, ln, px) in zip(cases, got, strict=True):
        assert lw == default_level(z, y, range(0, 25)), (z, y)
        assert ln == default_level(z, y, LEVELS), (z, y)
        assert px == pytest.approx(pixel_size(z, y), rel=1e-12)
    # the tile row holding a latitude: inside that row's bounds
    lats = [-85.0, -60.5, -12.25, 0.0, 0.1, 33.3, 71.9, 85.0]
    rows = page.evaluate(
        f"(lats) => [3, 9, 15].map(z => lats.map(lat => {logic}.tileRow(lat, z)))", lats
    )
    for z, row in zip([3, 9, 15], rows, strict=True):
        for lat, y in zip(lats, row, strict=True):
            _, south, _, north = tile_bounds(z, y, 0)
            assert south - 1e-9 <= lat <= north + 1e-9
    # the time step an instant selects: as the query layer's select_times
    axis = format_time(TIMES)
    for instant in ["2025-03-01T00:00:00Z", "2025-03-04T12:00:00Z", "2025-03-08T00:00:00Z"]:
        step = page.evaluate(f"([t, i]) => {logic}.stepIndex(t, i)", [axis, instant])
        assert step == select_times(parse_datetime(instant), TIMES)[0]
    # tile templates: braces survive, the page's base is kept, parameters are merged
    out = page.evaluate(
        f"""() => [
          {logic}.absoluteTemplate('/collections/c/map/tiles/WebMercatorQuad/{{z}}/{{y}}/{{x}}?vars=a',
                                   'http://h:1/svc/'),
          {logic}.absoluteTemplate('collections/c/map/tiles/WebMercatorQuad/{{z}}/{{y}}/{{x}}',
                                   'http://h:1/svc/'),
          {logic}.withQuery('http://h/t/{{z}}/{{y}}/{{x}}?vars=a&range=1,2',
                            {{vars: 'b', datetime: '2025-03-01T00:00:00Z', colormap: ''}})]"""
    )
    assert out[0] == "http://h:1/collections/c/map/tiles/WebMercatorQuad/{z}/{y}/{x}?vars=a"
    assert out[1] == "http://h:1/svc/collections/c/map/tiles/WebMercatorQuad/{z}/{y}/{x}"
    query = parse_qs(urlsplit(out[2]).query)
    assert out[2].startswith("http://h/t/{z}/{y}/{x}?")
    assert query == {"vars": ["b"], "range": ["1,2"], "datetime": ["2025-03-01T00:00:00Z"]}


def test_tile_zoom_is_the_one_the_map_library_requests(page, served):
    for view in ["#2.4/20/10", "#3.6/30/5", "#5/40/12"]:
        open_map(page, served, view=view)
        state = view_state(page)
        expected = page.evaluate(
            "(z) => window.alveary.logic.tileZoom(z, 256, 0, window.alveary.state.doc.maxzoom)",
            state["zoom"],
        )
        tiles = [u for u in page.requested if "/map/tiles/WebMercatorQuad/" in u]
        zooms = {int(re.search(r"WebMercatorQuad/(\d+)/", u).group(1)) for u in tiles}
        assert expected in zooms  # the library asked for tiles of the zoom the page expects
        page.requested.clear()


def test_tiles_are_coloured_where_the_cube_has_data(page, served):
    open_map(page, served, query=f"?cube={CUBE_ID}&vars=moisture", view="#1.6/10/10")
    view = view_state(page)
    with_cube = canvas_pixels(page)
    hide_cube_layer(page)
    without = canvas_pixels(page)
    h, w = with_cube.shape[:2]
    sy, sx = np.mgrid[0:h, 0:w]
    lon, lat = screen_to_lonlat(view, sx + 0.5, sy + 0.5)
    west, south, east, north = COVERAGE
    margin = 1.5  # degrees: zones straddling the coverage's edge may go either way
    inside = (lon > west + margin) & (lon < east - margin) & (lat > south + margin)
    inside &= lat < north - margin
    outside = (lon < west - margin) | (lon > east + margin) | (lat < south - margin)
    outside |= lat > north + margin
    drawn = np.abs(with_cube - without).max(axis=2) > 8
    assert inside.sum() > 50_000 and outside.sum() > 50_000
    assert drawn[inside].mean() > 0.97
    assert drawn[outside].mean() < 0.005


def test_zone_centres_show_the_field_through_the_colour_scale(page, served):
    open_map(page, served, query=f"?cube={CUBE_ID}&vars=moisture&colormap=honey", view="#6/30/10")
    view = view_state(page)
    shown = canvas_pixels(page)
    hide_cube_layer(page)
    bare = canvas_pixels(page)
    background = np.array([0xF3, 0xEF, 0xE6])
    # the tiles at this view: zoom 7, level 7 (the cube's finest), latest time step
    level = default_level(7, 50, LEVELS)
    assert level == 7
    h, w = shown.shape[:2]
    lon, lat = screen_to_lonlat(view, np.array([0, w]), np.array([h, 0]))
    zones = grid.zones_in_bbox(lon[0], lat[0], lon[1], lat[1], level)
    clat, clon = grid.zone_to_point(zones)
    sx, sy = lonlat_to_screen(view, clon, clat)
    keep = (sx > 3) & (sx < w - 3) & (sy > 3) & (sy < h - 3)
    scale = colour_scale("honey")
    vmin, vmax = recorded_range("moisture", level)
    checked = good = 0
    for x, y, la, lo in zip(sx[keep], sy[keep], clat[keep], clon[keep], strict=True):
        px, py = int(x), int(y)
        if np.abs(bare[py - 1 : py + 2, px - 1 : px + 2] - background).max() > 3:
            continue  # a coastline or graticule line is drawn over this centre
        value = float(field("moisture", la, lo, len(TIMES) - 1))
        pos = round(min(max((value - vmin) / (vmax - vmin), 0), 1) * 255)
        checked += 1
        good += np.abs(shown[py, px] - scale.lut[pos, :3]).max() <= 2
    assert checked > 50
    assert good / checked > 0.97


def test_click_gives_zone_value_and_series(page, served):
    open_map(page, served, query=f"?cube={CUBE_ID}&vars=canopy_temp", view="#6/30/10")
    view = view_state(page)
    sx, sy = 0.5 * view["width"] + 37.0, 0.5 * view["height"] - 23.0
    page.mouse.click(view["left"] + sx, view["top"] + sy)
    page.wait_for_selector("#zone[data-zone]", timeout=30_000)
    page.wait_for_function("document.getElementById('chart').dataset.points !== undefined")
    panel = page.locator("#zone")
    # the page reports where the click landed: within a pixel of where it was made (mouse
    # events carry whole pixels; a pixel is about 0.011° here)
    lat = float(panel.get_attribute("data-lat"))
    lon = float(panel.get_attribute("data-lon"))
    assert lat == pytest.approx(float(screen_to_lonlat(view, sx, sy)[1]), abs=0.012)
    assert lon == pytest.approx(float(screen_to_lonlat(view, sx, sy)[0]), abs=0.012)
    row = int((1 - math.asinh(math.tan(math.radians(lat))) / math.pi) / 2 * 2**7)
    level = default_level(7, row, LEVELS)  # tiles of zoom 7 at map zoom 6
    assert panel.get_attribute("data-level") == str(level)
    zone = grid.point_to_zone(lat, lon, level)
    assert page.inner_text("#zone-id") == str(grid.zone_to_text(zone))
    assert panel.get_attribute("data-zone") == str(grid.zone_to_text(zone))
    assert page.inner_text("#zone-number") == str(int(zone))
    # the value of the shown (latest) step at the zone's centre, four significant digits
    clat, clon = grid.zone_to_point(zone)
    expected = float(field("canopy_temp", clat, clon, len(TIMES) - 1))
    shown = page.inner_text("#zone-value")
    assert shown.endswith(VARIABLES["canopy_temp"]["units"])
    assert float(shown.split()[0]) == pytest.approx(expected, rel=6e-4)
    # a chart with one point per time step
    assert page.locator("#chart circle.point").count() == len(TIMES)
    assert page.get_attribute("#chart", "data-points") == str(len(TIMES))
    assert page.locator("#chart circle.point.selected").count() == 1
    # the caveat is on the page
    assert "local authorities and licensed" in page.inner_text("footer")
    out = ROOT / "var"
    out.mkdir(exist_ok=True)
    page.screenshot(path=str(out / "map-page.png"))


def test_pickers_change_tiles_and_legend(page, served):
    open_map(page, served, view="#3/20/10")
    page.requested.clear()
    page.select_option("#variable", "canopy_temp")
    page.select_option("#colormap", "drift")
    page.wait_for_timeout(300)
    wait_tiles(page)
    tiles = [u for u in page.requested if "/map/tiles/WebMercatorQuad/" in u]
    assert tiles
    last = parse_qs(urlsplit(tiles[-1]).query)
    assert last["vars"] == ["canopy_temp"] and last["colormap"] == ["drift"]
    page.wait_for_function("document.getElementById('legend').complete")
    legend = page.locator("#legend")
    assert "vars=canopy_temp" in legend.get_attribute("src")
    assert "colormap=drift" in legend.get_attribute("src")
    assert page.evaluate("document.getElementById('legend').naturalWidth") > 0
    assert "canopy temperature" in legend.get_attribute("alt")
    # a new time step asks for tiles of that step
    page.requested.clear()
    page.locator("#step").fill("2")
    page.wait_for_timeout(400)
    wait_tiles(page)
    steps = {
        parse_qs(urlsplit(u).query)["datetime"][0]
        for u in page.requested
        if "/map/tiles/WebMercatorQuad/" in u
    }
    assert steps == {"2025-03-03T00:00:00Z"}


def test_page_loads_nothing_from_elsewhere_and_carries_the_caveat():
    # html.parser: every src and href of the page is a file shipped beside it
    from html.parser import HTMLParser

    class Links(HTMLParser):
        def __init__(self):
            super().__init__()
            self.found = []

        def handle_starttag(self, tag, attrs):
            for name, value in attrs:
                if name in ("src", "href") and value:
                    self.found.append(value)

    html = (STATIC / "map.html").read_text()
    links = Links()
    links.feed(html)
    assets = [v for v in links.found if v.startswith("static/")]
    assert len(assets) >= 4
    for value in assets:
        assert (STATIC / value.removeprefix("static/")).is_file(), value
    assert all(not v.startswith(("http:", "https:", "//")) for v in links.found)
    for script in STATIC.glob("*.js"):
        text = script.read_text()
        # no URL of another host (the SVG namespace name is not fetched)
        assert not re.search(r"""(["'`])(https?:)?//(?!www\.w3\.org/2000/svg)""", text), script.name
        for module in re.findall(r'from "(\./[^"]+)"', text):
            assert (STATIC / module).is_file()
    # vendored code and data keep their licences beside them
    assert (STATIC / "vendor" / "maplibre-gl" / "LICENSE.txt").is_file()
    assert (STATIC / "data" / "LICENSE-world-atlas.txt").is_file()
    text = " ".join(html.split())
    assert "only as good as the data" in text and "local authorities and licensed practice" in text


def test_coastlines_are_valid_geojson_lines():
    import json

    import shapely.geometry

    data = json.loads((STATIC / "data" / "coastlines.geojson").read_text())
    (feature,) = data["features"]
    shape = shapely.geometry.shape(feature["geometry"])  # shapely reads the GeoJSON
    assert shape.geom_type == "MultiLineString" and len(shape.geoms) > 1000
    west, south, east, north = shape.bounds
    assert west >= -180 and east <= 180 and south >= -90 and north <= 90
    # no segment jumps across the antimeridian (it would be drawn across the world)
    for line in shape.geoms:
        lon = np.asarray(line.coords)[:, 0]
        assert np.abs(np.diff(lon)).max(initial=0) < 180


def test_show_picker_draws_a_neighbourhood_statistic_everywhere(page, served):
    # "spread (std) over 1 ring": the tiles, the legend and the clicked zone's value ask
    # for the same focal statistic; the value is judged against numpy's population
    # standard deviation of the field at the centres of the zone and its six neighbours
    # (grid.zone_disk). A spread, unlike a mean of a smooth field, is far from the value.
    open_map(page, served, query=f"?cube={CUBE_ID}&vars=canopy_temp", view="#6/30/10")
    page.requested.clear()
    page.select_option("#analysis", "std1")
    page.wait_for_timeout(300)
    wait_tiles(page)
    tiles = [u for u in page.requested if "/map/tiles/WebMercatorQuad/" in u]
    assert tiles
    last = parse_qs(urlsplit(tiles[-1]).query)
    assert last["focal"] == ["std"] and last["focal_k"] == ["1"]
    legend = page.locator("#legend").get_attribute("src")
    assert "focal=std" in legend and "focal_k=1" in legend
    assert "show=std1" in page.url
    view = view_state(page)
    sx, sy = 0.5 * view["width"] - 41.0, 0.5 * view["height"] + 17.0
    page.mouse.click(view["left"] + sx, view["top"] + sy)
    page.wait_for_selector("#zone[data-zone]", timeout=30_000)
    page.wait_for_function("document.getElementById('chart').dataset.points !== undefined")
    panel = page.locator("#zone")
    lat, lon = float(panel.get_attribute("data-lat")), float(panel.get_attribute("data-lon"))
    zone = grid.point_to_zone(lat, lon, int(panel.get_attribute("data-level")))
    disk = grid.zone_disk(zone, 1)
    clat, clon = grid.zone_to_point(np.asarray(disk, dtype=np.uint64))
    expected = float(np.std(field("canopy_temp", clat, clon, len(TIMES) - 1)))
    assert expected > 0.01
    shown = page.inner_text("#zone-value")
    assert float(shown.split()[0]) == pytest.approx(expected, rel=6e-4)
    assert page.get_attribute("#chart", "data-points") == str(len(TIMES))


def test_the_docs_stylesheet_still_styles_third_level_headings(page, served):
    # The vendored swagger-ui.css writes its third-level heading selectors with a CSS
    # escape (CSS Syntax 3 §4.3.7: "\33" is the digit 3). Chromium must match them as the
    # upstream file does: a section heading in #3b4151 and the .h3 utility 4rem high.
    page.set_content(
        f'<link rel="stylesheet" href="{served.url}/docs/assets/swagger-ui.css">'
        '<div class="swagger-ui"><section><h3 id="heading">x</h3></section>'
        '<div id="box" class="h3">y</div><div id="wide" class="h3-ns">z</div></div>',
        wait_until="load",
    )
    style = page.evaluate(
        """() => ['heading', 'box', 'wide'].map((id) => {
             const s = getComputedStyle(document.getElementById(id));
             return [s.color, s.height]; })"""
    )
    assert style[0][0] == "rgb(59, 65, 81)"
    assert style[1][1] == "64px" and style[2][1] == "64px"
