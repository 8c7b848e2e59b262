"""The native routes in process: radius, coverage, formats of the grid routes, HEAD,
unknown parameters, the echoed polygon and the offline /docs page.

A small district cube is written to fsspec's in-process memory store (only the zones
whose centres lie in its footprint, as an ingest writes them) and served by the real
application through Starlette's TestClient. Judges: pyproj.Geod (distances), shapely
(polygon orientation, clipping, centre counts), pyarrow and pandas (formats).
"""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pyarrow as pa
import pyproj
import pytest
import shapely
from fastapi.testclient import TestClient

from alveary import grid
from alveary.api import create_app
from alveary.api._settings import Settings
from alveary.cube import create_cube
from alveary.query import Catalog, CubeSource

COVERAGE = (-36.4, 30.3, -35.8, 30.8)
LEVELS = (6, 8, 10, 12)
MAX_ZONES = 500
NODATA_NORTH_OF = 30.7  # zones with centres north of this have no data
GEOD = pyproj.Geod(ellps="WGS84")
PROBLEM = "application/problem+json"


def _write_district(url: str) -> None:
    times = np.datetime64("2025-01-01", "s") + np.arange(3) * np.timedelta64(1, "D")
    writer = create_cube(
        url,
        cube_id="district",
        title="A district (invented data)",
        times=times,
        levels=list(LEVELS),
        coverage=COVERAGE,
        variables={"moisture": {"units": "1", "long_name": "soil moisture"}},
    )
    for level in LEVELS:
        zones = grid.zones_in_bbox(*COVERAGE, level)
        lat, lon = grid.zone_to_point(zones)
        values = 0.2 + 0.001 * (lat - 30.0) + 0.0001 * np.arange(3)[:, None] + 0 * lon
        values = np.where(lat[None, :] > NODATA_NORTH_OF, np.nan, values)
        writer.write("moisture", level, zones, values)
    writer.publish()


@pytest.fixture(scope="module")
def client():
    url = "memory://native-routes/district"
    _write_district(url)
    settings = Settings(answer_cache_bytes=0, plan_cache_bytes=0, max_zones=MAX_ZONES)
    app = create_app(settings, Catalog([CubeSource("district", url)]))
    with TestClient(app) as c:
        yield c


def problem(r, status):
    assert r.status_code == status, r.text
    assert r.headers["content-type"].startswith(PROBLEM)
    return r.json()


# -- radius -------------------------------------------------------------------------------


def test_radius_readme_example_holds_the_zone_under_the_point(client):
    lat, lon = 30.55, -36.1
    r = client.get(
        "/cubes/district/radius", params={"lat": lat, "lon": lon, "meters": 100, "nearest": "true"}
    )
    assert r.status_code == 200, r.text
    rows = r.json()["zones"]
    here = int(grid.point_to_zone(lat, lon, 12))
    assert [row["zone"] for row in rows] == [here]
    clat, clon = grid.zone_to_point(np.uint64(here))
    _, _, dist = GEOD.inv(lon, lat, float(clon), float(clat))  # pyproj.Geod
    assert dist > 100  # the centre lies outside the radius, the zone still belongs
    assert rows[0]["distance_m"] == pytest.approx(dist, rel=1e-6, abs=1e-3)
    assert rows[0]["values"]["moisture"][0] is not None
    assert "note" not in r.json()


def test_radius_is_the_centres_within_plus_the_zone_under_the_point(client):
    lat, lon, meters = 30.52, -36.05, 4000.0
    r = client.get("/cubes/district/radius", params={"lat": lat, "lon": lon, "meters": meters})
    rows = r.json()["zones"]
    # Independent count: every zone within 3 rings, by its pyproj.Geod distance.
    here = grid.point_to_zone(lat, lon, 12)
    near = grid.zone_disk(np.uint64(here), 6)
    clat, clon = grid.zone_to_point(near)
    _, _, d = GEOD.inv(np.full(near.size, lon), np.full(near.size, lat), clon, clat)
    expected = set(near[d <= meters].tolist()) | {int(here)}
    assert {row["zone"] for row in rows} == expected
    dists = [row["distance_m"] for row in rows]
    assert dists == sorted(dists)
    by_zone = dict(zip(near.tolist(), d.tolist(), strict=True))
    for row in rows:
        assert row["distance_m"] == pytest.approx(by_zone[row["zone"]], rel=1e-6, abs=1e-3)


def test_radius_nearest_with_no_data_says_so(client):
    params = {"lat": 30.77, "lon": -36.1, "meters": 300, "nearest": "true"}
    body = client.get("/cubes/district/radius", params=params).json()
    assert body["zones"] == []
    assert "no zone with data" in body["note"]
    table = pa.ipc.open_stream(
        client.get("/cubes/district/radius", params={**params, "f": "arrow"}).content
    ).read_all()
    assert table.num_rows == 0 and b"no zone with data" in table.schema.metadata[b"note"]


# -- coverage -------------------------------------------------------------------------------


def _centres_in(box, level, candidates):
    """Zones among ``candidates`` whose centres lie in ``box`` (shapely, closed box)."""
    lat, lon = grid.zone_to_point(candidates)
    inside = shapely.intersects_xy(shapely.box(*box), lon, lat)
    return set(np.asarray(candidates)[inside].tolist())


def _candidates(level, k):
    """Every zone within k steps of the district's middle (a superset of the district)."""
    return grid.zone_disk(np.uint64(grid.point_to_zone(30.55, -36.1, level)), k)


def test_world_bbox_is_clipped_to_the_coverage(client):
    r = client.get("/cubes/district/bbox", params={"bbox": "-180,-90,180,90", "level": 10})
    assert r.status_code == 200, r.text
    rows = r.json()["zones"]
    got = {row["zone"]: row for row in rows}
    # Independent: every zone whose centre lies in the coverage box (shapely) is answered.
    written = _centres_in(COVERAGE, 10, _candidates(10, 20))
    assert written <= set(got)
    for zone in set(got) - written:  # the margin: zones just outside, without data
        row = got[zone]
        assert row["values"]["moisture"] == [None]
        assert -36.4 - 0.4 < row["lon"] < -35.8 + 0.4 and 30.3 - 0.3 < row["lat"] < 30.8 + 0.3
    assert len(got) < 2 * len(written)


def test_over_the_limit_names_the_finest_level_that_fits(client):
    params = {"bbox": "-180,-90,180,90"}
    body = problem(client.get("/cubes/district/bbox", params={**params, "level": 12}), 413)
    assert body["limit"] == "zones per request" and body["maximum"] == MAX_ZONES
    assert body["finest_level"] == 10 and "level 10" in body["detail"]
    # That level fits, the next finer (12, the cube's finest) does not; independent count
    # of the zones at level 12 with centres in the coverage (shapely) exceeds the limit.
    assert client.get("/cubes/district/bbox", params={**params, "level": 10}).status_code == 200
    assert len(_centres_in(COVERAGE, 12, _candidates(12, 40))) > MAX_ZONES


def test_polygon_is_clipped_to_the_coverage(client):
    # A triangle reaching far beyond the district in the west and north.
    tri = {
        "type": "Polygon",
        "coordinates": [[[-40, 30.4], [-36.0, 30.4], [-36.0, 35], [-40, 30.4]]],
    }
    r = client.post("/cubes/district/polygon", params={"level": 10}, json=tri)
    assert r.status_code == 200, r.text
    got = {row["zone"]: row for row in r.json()["zones"]}
    shape = shapely.Polygon(tri["coordinates"][0])
    cand = _candidates(10, 20)
    lat, lon = grid.zone_to_point(cand)
    in_tri = shapely.intersects_xy(shape, lon, lat)
    in_cov = shapely.intersects_xy(shapely.box(*COVERAGE), lon, lat)
    expected = set(cand[in_tri & in_cov].tolist())
    assert expected and expected <= set(got)
    tri_zones = set(cand[in_tri].tolist())
    assert set(got) <= tri_zones  # nothing outside the polygon
    for zone in set(got) - expected:
        assert got[zone]["values"]["moisture"] == [None]


@pytest.mark.parametrize(
    ("method", "path", "params", "body"),
    [
        ("GET", "point", {"lat": 45.0, "lon": 7.0}, None),
        ("GET", "bbox", {"bbox": "0,0,1,1"}, None),
        ("GET", "radius", {"lat": 10.0, "lon": 10.0, "meters": 5000}, None),
        ("GET", "disk", {"lat": 10.0, "lon": 10.0, "k": 2}, None),
        (
            "POST",
            "polygon",
            {},
            {"type": "Polygon", "coordinates": [[[0, 0], [1, 0], [1, 1], [0, 0]]]},
        ),
        ("POST", "points", {}, {"lat": [10.0, 11.0], "lon": [10.0, 11.0]}),
    ],
)
def test_selection_outside_the_coverage_is_404_with_the_coverage(
    client, method, path, params, body
):
    r = client.request(method, f"/cubes/district/{path}", params=params, json=body)
    doc = problem(r, 404)
    assert doc["coverage"] == list(COVERAGE)
    assert "outside the coverage" in doc["detail"]


def test_huge_radius_is_clipped_to_the_coverage(client):
    # 3000 km around a point far away at the finest level: refused for billions before.
    params = {"lat": 10.0, "lon": -30.0, "meters": 3_000_000, "level": 10}
    r = client.get("/cubes/district/radius", params=params)
    assert r.status_code == 200, r.text
    rows = r.json()["zones"]
    written = _centres_in(COVERAGE, 10, _candidates(10, 20))
    assert written <= {row["zone"] for row in rows}
    for row in rows:  # pyproj.Geod
        _, _, d = GEOD.inv(-30.0, 10.0, row["lon"], row["lat"])
        assert d <= 3_000_000 and row["distance_m"] == pytest.approx(d, rel=1e-6)


# -- /zones in every format -----------------------------------------------------------------


@pytest.mark.parametrize(
    ("path", "where"),
    [("/zones/12d-1448-1614", {}), ("/zones", {"lat": 30.55, "lon": -36.1, "level": 12})],
)
def test_zone_routes_answer_in_every_listed_format(client, path, where):
    doc = client.get(path, params=where).json()
    zone = doc["zone"]
    assert zone == int(grid.zone_from_text("12d-1448-1614")) if not where else True
    assert zone == int(grid.point_to_zone(30.55, -36.1, 12))
    feature = client.get(path, params={**where, "f": "geojson"}).json()
    assert feature["type"] == "Feature" and feature["id"] == zone
    # Arrow (pyarrow reads the stream) and CSV (pandas reads the text): one row each.
    r = client.get(path, params=where, headers={"Accept": "application/vnd.apache.arrow.stream"})
    assert r.headers["content-type"] == "application/vnd.apache.arrow.stream"
    table = pa.ipc.open_stream(r.content).read_all()
    row = table.to_pylist()[0]
    assert row["zone"] == zone and row["zone_text"] == doc["zone_text"]
    assert row["neighbours"] == [n["zone"] for n in doc["neighbours"]]
    assert row["parent"] == doc["parent"]["zone"]
    # The WKT outline is the JSON outline (shapely).
    outline = shapely.from_wkt(row["geometry"])
    assert outline.equals(shapely.geometry.shape(doc["geometry"]))
    csv = client.get(path, params={**where, "f": "csv"})
    assert csv.headers["content-type"].startswith("text/csv")
    frame = pd.read_csv(io.StringIO(csv.text))
    assert len(frame) == 1 and int(frame["zone"][0]) == zone
    assert frame["lat"][0] == doc["centre"]["lat"] and frame["lon"][0] == doc["centre"]["lon"]
    kids = [int(v) for v in str(frame["children"][0]).split()]
    assert kids == [c["zone"] for c in doc["children"]]


def test_zone_format_error_lists_what_it_serves(client):
    body = problem(client.get("/zones/12d-1448-1614", params={"f": "png"}), 422)
    assert body["parameter"] == "f"
    for name in ("json", "geojson", "arrow", "csv"):
        assert name in body["allowed"]
    spec = client.get("/openapi.json").json()
    for path in ("/zones", "/zones/{zone}"):
        op = spec["paths"][path]["get"]
        f = next(p for p in op["parameters"] if p["name"] == "f")
        enum = f["schema"]["anyOf"][0]["enum"]
        assert set(enum) == {"json", "geojson", "arrow", "csv"}
        assert set(op["responses"]["200"]["content"]) >= {
            "application/json",
            "application/geo+json",
            "application/vnd.apache.arrow.stream",
            "text/csv",
        }


# -- statistics echo the request polygon --------------------------------------------------


def test_statistics_echo_a_counter_clockwise_polygon_and_the_properties(client):
    # Exterior ring clockwise, a hole counter-clockwise: both the "wrong" way round.
    shell = [[-36.3, 30.4], [-36.3, 30.6], [-35.9, 30.6], [-35.9, 30.4], [-36.3, 30.4]]
    hole = [[-36.2, 30.45], [-36.0, 30.45], [-36.0, 30.55], [-36.2, 30.55], [-36.2, 30.45]]
    assert not shapely.LinearRing(shell).is_ccw and shapely.LinearRing(hole).is_ccw
    posted = {
        "type": "Feature",
        "properties": {"field": "north block", "owner": 7},
        "geometry": {"type": "Polygon", "coordinates": [shell, hole]},
    }
    params = {"stats": "mean", "level": 10, "f": "geojson"}
    doc = client.post("/cubes/district/polygon", params=params, json=posted).json()
    assert doc["type"] == "Feature"
    assert doc["properties"]["field"] == "north block" and doc["properties"]["owner"] == 7
    assert doc["properties"]["kind"] == "stats"
    echoed = shapely.geometry.shape(doc["geometry"])
    # RFC 7946 §3.1.6: exterior counter-clockwise, holes clockwise (shapely's is_ccw).
    assert echoed.exterior.is_ccw and not echoed.interiors[0].is_ccw
    assert echoed.equals(shapely.Polygon(shell, [hole]))
    assert shapely.orient_polygons(echoed, exterior_cw=False).equals_exact(echoed, 0)
    # Other properties give another ETag (answers are cached by it).
    other = {**posted, "properties": {"field": "south block"}}
    again = client.post("/cubes/district/polygon", params=params, json=other)
    assert again.json()["properties"]["field"] == "south block"
    first = client.post("/cubes/district/polygon", params=params, json=posted)
    assert first.headers["etag"] != again.headers["etag"]


def test_bbox_statistics_geometry_is_counter_clockwise(client):
    params = {"bbox": "-36.3,30.4,-35.9,30.6", "stats": "mean", "level": 10, "f": "geojson"}
    doc = client.get("/cubes/district/bbox", params=params).json()
    assert shapely.geometry.shape(doc["geometry"]).exterior.is_ccw  # shapely


# -- HEAD, unknown parameters, datetime hint ------------------------------------------------


def _example_get(path):
    """A request URL for a GET route path, from its template."""
    values = {"{cube}": "district", "{zone}": "12d-1448-1614", "{name}": "swagger-ui.css"}
    for k, v in values.items():
        path = path.replace(k, v)
    query = {
        "/cubes/district/point": "lat=30.55&lon=-36.1",
        "/cubes/district/disk": "lat=30.55&lon=-36.1&k=1",
        "/cubes/district/radius": "lat=30.55&lon=-36.1&meters=500",
        "/cubes/district/bbox": "bbox=-36.2,30.5,-36.1,30.6&level=10",
        "/zones": "lat=30.55&lon=-36.1&level=12",
    }.get(path)
    return path + ("?" + query if query else "")


def _all_routes(routes):
    """Every route, those of included routers too (no prefixes are used)."""
    for r in routes:
        inner = getattr(r, "original_router", None)
        if inner is not None:
            yield from _all_routes(inner.routes)
        else:
            yield r


def test_every_get_route_answers_head(client):
    routes = [r for r in _all_routes(client.app.routes) if "GET" in getattr(r, "methods", ())]
    assert len(routes) >= 10
    for route in routes:
        if "{" in route.path.replace("{cube}", "").replace("{zone}", "").replace("{name}", ""):
            continue  # a path this app's fixture has no value for (none today)
        url = _example_get(route.path)
        got = client.get(url)
        head = client.head(url)
        assert head.status_code == got.status_code, url
        assert head.content == b"", url
        names = ("content-type", "content-length", "etag", "cache-control")
        if route.path == "/metrics":  # its body counts the requests just made
            names = ("content-type",)
        for name in names:
            assert head.headers.get(name) == got.headers.get(name), (url, name)


NATIVE = [
    ("/cubes/district/point", {"lat": 30.55, "lon": -36.1}),
    ("/cubes/district/disk", {"lat": 30.55, "lon": -36.1, "k": 1}),
    ("/cubes/district/radius", {"lat": 30.55, "lon": -36.1, "meters": 100}),
    ("/cubes/district/bbox", {"bbox": "-36.2,30.5,-36.1,30.6", "level": 10}),
    ("/cubes/district", {}),
    ("/cubes", {}),
    ("/zones", {"lat": 30.55, "lon": -36.1, "level": 12}),
    ("/zones/12d-1448-1614", {}),
    ("/", {}),
    ("/healthz", {}),
]


@pytest.mark.parametrize(("path", "params"), NATIVE)
def test_unknown_query_parameter_is_named(client, path, params):
    assert client.get(path, params=params).status_code == 200
    body = problem(client.get(path, params={**params, "variables": "moisture"}), 422)
    assert body["parameter"] == "variables" and "variables" in body["detail"]
    for name in params:
        assert name in body["allowed"]


def test_unknown_parameter_on_post_routes(client):
    shape = {
        "type": "Polygon",
        "coordinates": [[[-36.2, 30.5], [-36.1, 30.5], [-36.1, 30.6], [-36.2, 30.5]]],
    }
    r = client.post("/cubes/district/polygon", params={"level": 10, "stat": "mean"}, json=shape)
    assert problem(r, 422)["parameter"] == "stat"


def test_datetime_plus_read_as_space_gets_a_hint(client):
    # What a client sends when it writes '+' unescaped: the server reads a space.
    url = "/cubes/district/point?lat=30.55&lon=-36.1&datetime=2025-01-02T10:00:00+02:00"
    body = problem(client.get(url), 422)
    assert body["parameter"] == "datetime" and "%2B" in body["allowed"]
    ok = client.get(
        "/cubes/district/point?lat=30.55&lon=-36.1&datetime=2025-01-02T10:00:00%2B02:00"
    )
    assert ok.status_code == 200, ok.text


# -- /docs without the internet -------------------------------------------------------------


def test_docs_page_loads_only_same_origin_assets(client):
    import re

    page = client.get("/docs")
    assert page.status_code == 200 and "text/html" in page.headers["content-type"]
    refs = re.findall(r"""(?:src|href)\s*=\s*["']([^"']+)["']""", page.text)
    refs += re.findall(r"""url\s*:\s*['"]([^'"]+)['"]""", page.text)
    assert refs
    for ref in refs:
        assert ref.startswith("/") and not ref.startswith("//"), ref
        r = client.get(ref)
        assert r.status_code == 200 and r.content, ref
    assert "http://" not in page.text and "https://" not in page.text
    assert client.get("/docs/assets/LICENSE.txt").status_code == 200
    assert client.get("/docs/assets/..%2F..%2F_app.py").status_code == 404


@pytest.mark.parametrize(
    ("query", "parameter"),
    [
        ("lat=91&lon=-36.1", "lat"),
        ("lat=x&lon=-36.1", "lat"),
        ("lat=30.55", "lon"),
        ("lat=30.55&lon=-36.1&level=99", "level"),
        ("lat=30.55&lon=-36.1&f=png", "f"),
    ],
)
def test_point_errors_are_the_documented_ones(client, query, parameter):
    # A request the fast point path does not take goes to the route: the same 422.
    body = problem(client.get(f"/cubes/district/point?{query}"), 422)
    assert body["parameter"] == parameter


def test_point_answer_matches_the_written_value(client):
    lat, lon = 30.41, -36.33
    doc = client.get("/cubes/district/point", params={"lat": lat, "lon": lon}).json()
    zone = int(grid.point_to_zone(lat, lon, 12))
    zlat, _ = grid.zone_to_point(np.uint64(zone))
    assert doc["zones"][0]["zone"] == zone and doc["kind"] == "point"
    # What _write_district wrote for that zone at the latest step (float32 storage).
    expected = np.float32(0.2 + 0.001 * (float(zlat) - 30.0) + 0.0002)
    assert doc["zones"][0]["values"]["moisture"][0] == pytest.approx(float(expected), rel=1e-6)
