"""Map pictures, legends and vector tiles, judged outside the code: pixel centres from
PROJ (EPSG:3857 -> EPSG:4326), the zone under each through grid.point_to_zone, an analytic
field computed here at that zone's centre; PNG decoded by Pillow; CIELAB from LittleCMS
(Pillow's ImageCms); SVG parsed by xml.etree; vector tiles decoded by mapbox-vector-tile's
own decoder and compared with zone outlines reprojected by PROJ."""

from __future__ import annotations

import io
import math
import xml.etree.ElementTree as ET

import mapbox_vector_tile
import numpy as np
import pyproj
import pytest
import shapely
import shapely.affinity
import shapely.geometry
from PIL import Image, ImageCms

from alveary import grid
from alveary._errors import InvalidInput
from alveary.api._colours import (
    DEFAULT_SCALE,
    SCALES,
    apply_scale,
    colour_scale,
    parse_range,
    scale_positions,
)
from alveary.api._legend import legend_png, legend_svg, legend_ticks
from alveary.api._mvt import MVT_EXTENT, zone_tile_mvt
from alveary.api._render import encode_png, render_tile, transparent_png
from alveary.api._tileset import map_tiles_document, vector_tiles_document
from alveary.query._tiles import (
    EDGE_PIXELS,
    TARGET_PIXELS,
    default_level,
    pixel_size,
    tile_bounds,
    tile_zone_candidates,
    tile_zones,
    zone_pixels,
)

HALF = math.pi * 6378137.0  # EPSG:3857's square spans ±πR
TO_LONLAT = pyproj.Transformer.from_crs("EPSG:3857", "EPSG:4326", always_xy=True)
TO_MERC = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:3857", always_xy=True)
LEVELS = tuple(range(0, 14))
VMIN, VMAX = 268.0, 296.0


def field(lat, lon):
    """An analytic field: smooth, different in every zone, no data south of 60° S."""
    lat, lon = np.asarray(lat, float), np.asarray(lon, float)
    value = 280.0 + 12.0 * np.cos(np.radians(lat)) + 3.5 * np.sin(np.radians(2.0 * lon))
    return np.where(lat < -60.0, np.nan, value + 0.002 * lat)


def proj_pixel_centres(z, y, x, size=256, pad=0):
    """Pixel-centre lat/lon from EPSG:3857 metres through PROJ (``pad`` more past the edges)."""
    step = 2.0 * HALF / (size * 2**z)
    idx = np.arange(size + pad) + 0.5
    mx, my = np.meshgrid(-HALF + (x * size + idx) * step, HALF - (y * size + idx) * step)
    lon, lat = TO_LONLAT.transform(mx, my)
    return np.asarray(lat), np.asarray(lon)


def render_png(tile, level, scale, *, edges=False, values_of=field):
    """What a tile route does: the pixel-to-zone map, one value per zone, colour, PNG."""
    tz = tile_zones(*tile, level)
    lat, lon = grid.zone_to_point(tz.zones)  # the stand-in for the cube's read
    values = values_of(lat, lon)
    rgba = render_tile(tz.index, values, scale, VMIN, VMAX, edges=tz.edges if edges else None)
    return encode_png(rgba), tz


def decode(png):
    image = Image.open(io.BytesIO(png))  # Pillow decodes the PNG
    image.load()
    assert image.size == (256, 256)
    return np.asarray(image.convert("RGBA"))


def expected_from_field(tile, level, scale):
    """Colours computed in the test: pixel -> PROJ lat/lon -> zone -> centre -> field."""
    lat, lon = proj_pixel_centres(*tile)
    zones = grid.point_to_zone(lat, lon, level)
    clat, clon = grid.zone_to_point(zones)
    f = field(clat, clon)
    pos = np.rint(np.clip(np.nan_to_num((f - VMIN) / (VMAX - VMIN)), 0, 1) * 255).astype(int)
    colours = np.where(np.isnan(f)[..., None], 0, scale.lut[pos])
    return f, colours.astype(np.uint8), zones


# Tiles touching -180° and +180°, the whole world, the top and bottom rows by the pole
# limit (85.05°), and an ordinary tile.
RENDER_TILES = [(0, 0, 0), (2, 1, 0), (3, 3, 7), (3, 0, 2), (4, 15, 9), (7, 47, 70)]


@pytest.mark.parametrize("tile", RENDER_TILES)
@pytest.mark.parametrize("name", ["nectar", "drift"])
def test_pixels_map_back_to_the_field_at_the_zone_centre(tile, name):
    scale = colour_scale(name)
    level = default_level(tile[0], tile[1], LEVELS)
    png, _ = render_png(tile, level, scale)
    px = decode(png)
    f, expected, _ = expected_from_field(tile, level, scale)
    np.testing.assert_array_equal(px, expected)
    # and back through the colour scale: each coloured pixel's colour names the scale
    # entries it can be, whose value interval holds the field value
    have = ~np.isnan(f)
    lut = scale.lut[:, :3].astype(int)
    step = (VMAX - VMIN) / 255
    rng = np.random.default_rng(3)
    rows, cols = np.nonzero(have)
    for k in rng.choice(rows.size, size=min(400, rows.size), replace=False):
        r, c = rows[k], cols[k]
        entries = np.nonzero((lut == px[r, c, :3].astype(int)).all(axis=1))[0]
        lo = VMIN + (entries.min() - 0.5) * step
        hi = VMIN + (entries.max() + 0.5) * step
        value = min(max(f[r, c], VMIN), VMAX)
        assert lo - 1e-9 <= value <= hi + 1e-9
    assert (px[~have, 3] == 0).all() and (px[have, 3] == 255).all()


def test_antimeridian_zones_match_on_both_sides():
    # the same zones seen from the tiles left and right of 180° take the same colour
    scale = colour_scale(DEFAULT_SCALE)
    level = 5
    west, _ = render_png((3, 3, 0), level, scale)
    east, _ = render_png((3, 3, 7), level, scale)
    w, e = decode(west), decode(east)
    _, _, zw = expected_from_field((3, 3, 0), level, scale)
    _, _, ze = expected_from_field((3, 3, 7), level, scale)
    across = zw[:, 0] == ze[:, -1]  # pixel rows where one zone spans 180°
    assert across.sum() > 50
    np.testing.assert_array_equal(w[across, 0], e[across, -1])


def test_edges_take_the_outline_colour():
    tile = (8, 90, 140)
    level = default_level(8, 90, LEVELS) - 2  # zones about 4x wider: outlines on
    scale = colour_scale("clover")
    tz = tile_zones(*tile, level)
    assert tz.draw_edges
    png, _ = render_png(tile, level, scale, edges=True)
    px = decode(png)
    f, fill, _ = expected_from_field(tile, level, scale)
    pos = np.rint(np.clip((f - VMIN) / (VMAX - VMIN), 0, 1) * 255).astype(int)
    # an edge pixel: its right or lower neighbour's centre (PROJ) lies in another zone
    lat, lon = proj_pixel_centres(*tile, pad=1)  # one pixel into the next tiles
    big = grid.point_to_zone(lat, lon, level)
    edge = (big[:-1, :-1] != big[:-1, 1:]) | (big[:-1, :-1] != big[1:, :-1])
    np.testing.assert_array_equal(px[~edge], fill[~edge])
    np.testing.assert_array_equal(px[edge], scale.edge_lut[pos[edge]])
    assert 0.02 < edge.mean() < 0.4


def test_empty_tile_is_fully_transparent():
    png, _ = render_png((5, 10, 10), 6, colour_scale("honey"), values_of=lambda a, b: a * np.nan)
    assert (decode(png)[..., 3] == 0).all()
    assert (decode(transparent_png())[..., 3] == 0).all()


def test_opaque_tiles_are_written_without_alpha():
    png, _ = render_png((4, 5, 6), 5, colour_scale("wax"))
    assert Image.open(io.BytesIO(png)).mode == "RGB"  # Pillow reads the colour type


def _cielab(rgb):
    """CIELAB (D65) of sRGB colours through LittleCMS (Pillow's ImageCms), 8-bit."""
    transform = ImageCms.buildTransformFromOpenProfiles(
        ImageCms.createProfile("sRGB"), ImageCms.createProfile("LAB", colorTemp=6500), "RGB", "LAB"
    )
    image = Image.fromarray(np.ascontiguousarray(rgb[None, :, :3]), "RGB")
    raw = np.asarray(ImageCms.applyTransform(image, transform))[0]
    lightness = raw[:, 0].astype(float) * 100.0 / 255.0
    return np.column_stack([lightness, raw[:, 1:].view(np.int8).astype(float)])


@pytest.mark.parametrize("name", sorted(SCALES))
def test_scales_are_perceptually_ordered_and_even(name):
    scale = SCALES[name]
    lab = _cielab(scale.lut)
    lightness = lab[:, 0]
    if scale.kind == "sequential":
        assert (np.diff(lightness[::8]) > 0).all()  # rising lightness, end to end
        assert lightness[-1] - lightness[0] > 70
    else:
        assert (np.diff(lightness[:129:8]) > 0).all() and (np.diff(lightness[128::8]) < 0).all()
        assert abs(lightness[0] - lightness[-1]) < 3  # both ends equally dark
    # CIE76 differences over equal steps of the scale stay within a factor of 1.8
    d = np.linalg.norm(lab[32::32] - lab[:-32:32], axis=1)
    assert d.max() / d.min() < 1.8
    assert scale.lut.shape == (256, 4) and (scale.lut[:, 3] == 255).all()


def test_scale_names_and_errors():
    assert set(SCALES) == {"nectar", "clover", "honey", "wax", "drift"}
    assert all(s.description for s in SCALES.values())
    with pytest.raises(InvalidInput) as err:
        colour_scale("jet")
    assert err.value.parameter == "colormap" and "clover, drift" in str(err.value)
    for bad in ["1", "a,b", "2,1", "nan,3", "1,2,3"]:
        with pytest.raises(InvalidInput) as err:
            parse_range(bad)
        assert err.value.parameter == "range"
    assert parse_range(" -2.5 , 1e3 ") == (-2.5, 1000.0)
    assert parse_range(None) is None
    with pytest.raises(InvalidInput):
        scale_positions(np.zeros(2), 1.0, 1.0)


def test_values_outside_the_range_take_the_end_colours():
    scale = colour_scale("honey")
    out = apply_scale(np.array([-1e9, VMIN, VMAX, 1e9, np.nan]), scale, VMIN, VMAX)
    assert out[0].tolist() == out[1].tolist() == scale.lut[0].tolist()
    assert out[2].tolist() == out[3].tolist() == scale.lut[-1].tolist()
    assert out[4].tolist() == [0, 0, 0, 0]


def test_render_checks_its_arguments():
    scale = colour_scale(None)
    with pytest.raises(InvalidInput):
        render_tile(np.array([0, 1]), np.zeros(2), scale, 0.0, 1.0)
    with pytest.raises(InvalidInput):
        render_tile(np.array([[0, 2]]), np.zeros(2), scale, 0.0, 1.0)
    with pytest.raises(InvalidInput):
        render_tile(np.zeros((2, 2), int), np.zeros(1), scale, 0, 1, edges=np.zeros((3, 3), bool))
    with pytest.raises(InvalidInput):
        encode_png(np.zeros((4, 4, 3), np.uint8))


def test_legend_png_decodes_with_the_bar_in_place():
    scale = colour_scale("clover")
    png = legend_png(scale, 0.05, 0.42, title="soil moisture", units="m3 m-3", width=300)
    image = Image.open(io.BytesIO(png))  # Pillow
    image.load()
    assert image.size == (300, 64)
    px = np.asarray(image.convert("RGBA"))
    bar_row = px[24 + 7]
    # the bar runs from the scale's first colour (left) to its last (right)
    assert np.abs(bar_row[13, :3].astype(int) - scale.lut[0, :3]).max() <= 3
    assert np.abs(bar_row[286, :3].astype(int) - scale.lut[-1, :3]).max() <= 3
    # text was drawn above and below the bar (dark pixels)
    assert (px[2:20, :, :3].max(axis=2) < 100).sum() > 40
    assert (px[44:64, :, :3].max(axis=2) < 100).sum() > 40


def test_legend_svg_parses_with_units_range_and_gradient():
    scale = colour_scale("drift")
    svg = legend_svg(scale, -3.0, 3.0, title="temperature anomaly", units="K")
    root = ET.fromstring(svg)  # xml.etree parses it
    ns = {"s": "http://www.w3.org/2000/svg"}
    texts = [t.text for t in root.findall(".//s:text", ns)]
    assert "temperature anomaly (K)" in texts
    assert "-3.00" in texts and "3.00" in texts  # the range's ends
    assert "0.00" in texts  # a round value between them
    stops = root.findall(".//s:linearGradient/s:stop", ns)
    assert len(stops) == 33
    first, last = stops[0].get("stop-color"), stops[-1].get("stop-color")
    assert first == "#{:02x}{:02x}{:02x}".format(*scale.lut[0, :3].tolist())
    assert last == "#{:02x}{:02x}{:02x}".format(*scale.lut[-1, :3].tolist())
    # titles with markup characters stay well-formed
    ET.fromstring(legend_svg(scale, 0, 1, title="a < b & c", units="%"))


def test_legend_ticks_are_round_and_inside():
    for lo, hi in [(0.05, 0.42), (271.3, 308.9), (-3, 3), (0, 1e6), (1e-5, 3e-5)]:
        ticks = legend_ticks(lo, hi)
        assert 2 <= len(ticks) <= 6
        assert all(lo - 1e-12 <= t <= hi + 1e-12 for t in ticks)
        steps = np.diff(ticks)
        assert np.allclose(steps, steps[0])
        mantissa = steps[0] / 10 ** math.floor(math.log10(steps[0]))
        assert any(math.isclose(mantissa, m) for m in (1, 2, 2.5, 5))


# ---------------------------------------------------------------- vector tiles


def _tile_units(lat, lon, z, y, x):
    """PROJ: lat/lon -> EPSG:3857 metres -> tile coordinates (y down)."""
    mx, my = TO_MERC.transform(lon, lat)
    mx = np.asarray(mx)
    # unwrap across 180° so one ring stays in one piece
    mx = mx[0] + np.concatenate([[0.0], np.cumsum((np.diff(mx) + HALF) % (2 * HALF) - HALF)])
    n = 2**z
    u = ((mx + HALF) / (2 * HALF) * n - x) * MVT_EXTENT
    v = ((HALF - np.asarray(my)) / (2 * HALF) * n - y) * MVT_EXTENT
    return u, v


def _mvt_features(z, y, x, level, values=None):
    zones = tile_zone_candidates(z, y, x, level)
    if values is None:
        lat, lon = grid.zone_to_point(zones)
        values = {"temp": field(lat, lon)}
    data = zone_tile_mvt(z, y, x, zones, values)
    decoded = mapbox_vector_tile.decode(data, default_options={"y_coord_down": True})
    return zones, decoded["zones"]


@pytest.mark.parametrize(("tile", "level"), [((9, 190, 270), 10), ((3, 3, 0), 4), ((3, 4, 7), 4)])
def test_vector_tile_polygons_match_reprojected_outlines(tile, level):
    z, y, x = tile
    zones, layer = _mvt_features(z, y, x, level)
    assert layer["extent"] == MVT_EXTENT
    features = layer["features"]
    assert len(features) > 10
    clip = shapely.box(-64, -64, MVT_EXTENT + 64, MVT_EXTENT + 64)
    lat_c, lon_c = grid.zone_to_point(zones)
    checked = 0
    for feature in features:
        zone = feature["id"]
        props = feature["properties"]
        assert props["zone"] == zone and props["zone_text"] == str(grid.zone_to_text(zone))
        k = int(np.nonzero(zones == zone)[0][0])
        assert props["temp"] == pytest.approx(float(field(lat_c[k], lon_c[k])))
        got = shapely.geometry.shape(feature["geometry"])
        outline = grid.zone_boundary(np.uint64(zone), face_edges=True)
        u, v = _tile_units(outline[:, 0], outline[:, 1], z, y, x)
        ring = shapely.Polygon(np.column_stack([u, v]))
        world = 2**z * MVT_EXTENT
        ref = shapely.union_all(
            [shapely.affinity.translate(ring, k * world).intersection(clip) for k in (-1, 0, 1)]
        )
        # integer tile coordinates move each vertex by at most half a unit
        assert abs(got.area - ref.area) <= 0.5 * ref.length + 2, (zone, got.area, ref.area)
        checked += 1
    # every zone that reaches into the tile is there
    assert checked == len(features)
    tile_box = shapely.box(0, 0, MVT_EXTENT, MVT_EXTENT)
    covered = shapely.union_all([shapely.geometry.shape(f["geometry"]) for f in features])
    assert covered.intersection(tile_box).area == pytest.approx(tile_box.area, rel=1e-3)


def test_vector_tile_pole_zone_is_a_band_over_every_tile_of_the_top_row():
    # the zone centred on the north pole at level 2 (down to about 80° N), seen on the
    # four top tiles at z = 2
    level = 2
    pole = int(grid.point_to_zone(90.0, 0.0, level))
    areas = []
    for x in range(4):
        _, layer = _mvt_features(2, 0, x, level)
        hits = [f for f in layer["features"] if f["id"] == pole]
        assert len(hits) == 1
        got = shapely.geometry.shape(hits[0]["geometry"]).intersection(
            shapely.box(0, 0, MVT_EXTENT, MVT_EXTENT)
        )
        # independent area: pixel centres (PROJ) whose zone is the pole zone
        lat, lon = proj_pixel_centres(2, 0, x)
        share = float((grid.point_to_zone(lat, lon, level) == pole).mean())
        assert got.area / MVT_EXTENT**2 == pytest.approx(share, abs=0.003)
        areas.append(got.area)
    assert min(areas) > 0.02 * MVT_EXTENT**2


def test_vector_tile_leaves_missing_values_out():
    z, y, x, level = 6, 50, 20, 7  # south of 60° S: no data in the field
    zones = tile_zone_candidates(z, y, x, level)
    lat, lon = grid.zone_to_point(zones)
    _, layer = _mvt_features(z, y, x, level, {"temp": field(lat, lon), "g": np.ones(zones.size)})
    north = tile_bounds(z, y, x)[3]
    assert north < -60.0
    for feature in layer["features"]:
        assert "temp" not in feature["properties"] and feature["properties"]["g"] == 1.0
    with pytest.raises(InvalidInput):
        zone_tile_mvt(z, y, x, zones, {"temp": np.zeros(3)})


def test_empty_vector_tile_decodes():
    data = zone_tile_mvt(4, 3, 3, np.zeros(0, np.uint64))
    decoded = mapbox_vector_tile.decode(data)
    assert decoded.get("zones", {"features": []})["features"] == []


# ---------------------------------------------------------------- tile set descriptions


def test_map_tiles_document_templates_and_zoom_range():
    doc = map_tiles_document(
        "demo cube",
        title="Demo",
        levels=[3, 7],
        bounds=(-36.2, 30.5, -36.0, 30.6),
        base="http://127.0.0.1:8000",
        query={"vars": "temp", "colormap": "honey", "range": ""},
    )
    root = "http://127.0.0.1:8000/collections/demo%20cube/map/tiles/WebMercatorQuad"
    assert doc["tiles"] == [f"{root}/{{z}}/{{y}}/{{x}}?vars=temp&colormap=honey"]
    (tileset,) = doc["tilesets"]
    item = next(link for link in tileset["links"] if link["rel"] == "item")
    assert item["templated"] and item["type"] == "image/png"
    assert item["href"] == f"{root}/{{tileMatrix}}/{{tileRow}}/{{tileCol}}?vars=temp&colormap=honey"
    assert tileset["tileMatrixSetURI"].endswith("/WebMercatorQuad")
    assert doc["tilejson"] == "3.0.0" and doc["bounds"] == [-36.2, 30.5, -36.0, 30.6]
    assert set(doc["colormaps"]) == set(SCALES) and doc["defaultColormap"] == DEFAULT_SCALE
    # past maxzoom the finest zones are over 128 pixels wide at the equator, before it not
    z = doc["maxzoom"]
    assert zone_pixels(z, 2 ** (z - 1), 7) >= 128 > zone_pixels(z - 1, 2 ** (z - 2), 7)
    # the page's level rule carries the tile module's constants
    levels = doc["levels"]
    assert levels["targetPixels"] == TARGET_PIXELS and levels["edgePixels"] == EDGE_PIXELS
    assert levels["levels"] == [3, 7]
    assert levels["zoneWidths"]["7"] == pytest.approx(zone_pixels(0, 0, 7) * pixel_size(0, 0))


def test_vector_tiles_document_lists_the_layer_fields():
    doc = vector_tiles_document(
        "demo", title="Demo", levels=[5, 9], variables={"temp": "K", "ndvi": ""}
    )
    assert doc["tilesets"][0]["dataType"] == "vector"
    assert doc["tiles"][0] == "/collections/demo/tiles/WebMercatorQuad/{z}/{y}/{x}"
    (layer,) = doc["vector_layers"]
    assert layer["id"] == "zones"
    assert set(layer["fields"]) == {"zone", "zone_text", "temp", "ndvi"}
    assert doc["levels"]["targetPixels"] > TARGET_PIXELS
