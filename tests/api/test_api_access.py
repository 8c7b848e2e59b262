"""Private cubes end to end: every route of the app, with and without API keys, against a
real ``alveary serve`` serving a public and a private cube of the same stored data.

Judges: a private cube without a valid key must be answered byte for byte like a cube id
that is not configured at all (the same status, the same problem document with the id
swapped), and with a valid key like the public cube (both are the same store, so the same
answer with the id swapped). The route list comes from the application itself
(``app.routes``): a route added without a sample request here fails
``test_every_route_has_a_sample``, and one that reaches a cube around the access check
fails the comparisons.
"""

from __future__ import annotations

import re

import httpx
import pytest

from alveary.api import Settings, create_app
from alveary.api._access import hash_key, new_key

pytestmark = pytest.mark.server

PUBLIC, PRIVATE, UNKNOWN = "open-field", "hidden-field", "never-configured"

# One sample request per route with a cube in its path: method, query, JSON body.
POLYGON = {
    "type": "Polygon",
    "coordinates": [[[10.0, 10.0], [11.5, 10.0], [11.5, 11.5], [10.0, 11.5], [10.0, 10.0]]],
}
WKT_SQUARE = "POLYGON((10 10, 11.5 10, 11.5 11.5, 10 11.5, 10 10))"
CUBE_ROUTES: dict[tuple[str, str], tuple[dict[str, str], object]] = {
    ("GET", "/cubes/{cube}"): ({}, None),
    ("GET", "/cubes/{cube}/point"): ({"lat": "10.2", "lon": "20.3"}, None),
    ("GET", "/cubes/{cube}/disk"): ({"lat": "10.2", "lon": "20.3", "k": "1"}, None),
    ("GET", "/cubes/{cube}/radius"): ({"lat": "10.2", "lon": "20.3", "meters": "300000"}, None),
    ("GET", "/cubes/{cube}/bbox"): ({"bbox": "10,10,11.5,11.5", "stats": "mean"}, None),
    ("POST", "/cubes/{cube}/polygon"): ({"stats": "mean"}, POLYGON),
    ("POST", "/cubes/{cube}/points"): ({}, {"lat": [10.2, -5.0], "lon": [20.3, 7.0]}),
    # OGC API - EDR
    ("GET", "/collections/{cube}"): ({}, None),
    ("GET", "/collections/{cube}/position"): ({"coords": "POINT(20.3 10.2)"}, None),
    ("POST", "/collections/{cube}/position"): ({}, {"coords": "MULTIPOINT((20.3 10.2), (7 -5))"}),
    ("GET", "/collections/{cube}/radius"): (
        {"coords": "POINT(20.3 10.2)", "within": "300", "within-units": "km"},
        None,
    ),
    ("GET", "/collections/{cube}/area"): ({"coords": WKT_SQUARE, "stats": "mean"}, None),
    ("POST", "/collections/{cube}/area"): ({}, {"coords": WKT_SQUARE}),
    ("GET", "/collections/{cube}/cube"): ({"bbox": "10,10,11.5,11.5"}, None),
    ("GET", "/collections/{cube}/map/tiles"): ({"vars": "temp"}, None),
    ("GET", "/collections/{cube}/map/tiles/WebMercatorQuad"): ({}, None),
    ("GET", "/collections/{cube}/map/tiles/WebMercatorQuad/{z}/{y}/{x}"): ({"vars": "temp"}, None),
    ("GET", "/collections/{cube}/tiles"): ({}, None),
    ("GET", "/collections/{cube}/tiles/WebMercatorQuad/{z}/{y}/{x}"): ({"level": "3"}, None),
    ("GET", "/collections/{cube}/legend"): ({"vars": "temp", "f": "svg"}, None),
}
# Routes that name no cube: answered to anyone, and must not name the private cube.
OTHER_ROUTES: dict[tuple[str, str], dict[str, str]] = {
    ("GET", "/"): {},
    ("GET", "/healthz"): {},
    ("GET", "/readyz"): {},
    ("GET", "/metrics"): {},
    ("GET", "/cubes"): {},
    ("GET", "/openapi.json"): {},
    ("GET", "/docs"): {},
    ("GET", "/docs/assets/{name}"): {},
    ("GET", "/zones/{zone}"): {},
    ("GET", "/zones"): {"lat": "10", "lon": "20", "level": "4"},
    ("GET", "/conformance"): {},
    ("GET", "/collections"): {},
    ("GET", "/openapi-3.0.json"): {},
    ("GET", "/map"): {},
    ("GET", "/static/{path:path}"): {},
}
ZONE = "4a-3-5"
TILE = "3/2/4"  # z/y/x: 41-66° N, 0-45° E


def flat_routes(routes, prefix=""):
    """(method, path) of routes, through included routers and mounts (HEAD aside)."""
    out = set()
    for route in routes:
        inner = getattr(route, "original_router", None)  # a router included in the app
        if inner is not None:
            out |= flat_routes(inner.routes, prefix + route.include_context.prefix)
        elif getattr(route, "methods", None):
            out |= {(m, prefix + route.path) for m in route.methods - {"HEAD"}}
        else:  # a mount (static files, a sub-application): any GET below it
            out.add(("GET", prefix + route.path + "/{path}"))
    return out


def app_routes() -> set[tuple[str, str]]:
    return flat_routes(create_app(Settings(cubes=[])).routes)


def test_every_route_has_a_sample():
    # A new route must be listed here, so that the tests below try it with and without keys.
    assert app_routes() == set(CUBE_ROUTES) | set(OTHER_ROUTES)


@pytest.fixture(scope="module")
def keys(tmp_path_factory):
    """Two keys of the private cube (one in the cube list, one in the keys file) and one
    key of nothing."""
    config_key, config_id = new_key()
    file_key, file_id = new_key()
    stray_key, stray_id = new_key()
    keys_file = tmp_path_factory.mktemp("keys") / "api-keys.toml"
    keys_file.write_text(
        f'{PRIVATE}.{file_id} = "{hash_key(file_key)}"\n'
        f'not-served.{stray_id} = "{hash_key(stray_key)}"\n'
    )
    return {
        "config": (config_key, config_id),
        "file": (file_key, file_id),
        "stray": stray_key,
        "file_path": keys_file,
        "config_hash": hash_key(config_key),
    }


@pytest.fixture(scope="module")
def server(analytic_store, keys):
    from support.server import ServiceProcess

    url, options = analytic_store
    cubes = [
        {"id": PUBLIC, "url": url, "storage_options": options},
        {
            "id": PRIVATE,
            "url": url,
            "storage_options": options,
            "public": False,
            "keys": {keys["config"][1]: keys["config_hash"]},
        },
    ]
    proc = ServiceProcess(cubes, env={"ALVEARY_API_KEYS_FILE": str(keys["file_path"])})
    proc.start()
    try:
        yield proc
    finally:
        proc.stop()


@pytest.fixture(scope="module")
def http(server):
    with httpx.Client(base_url=server.url, timeout=60) as client:
        yield client


def call(http, route, cube, headers=None, params=None):
    method, path = route
    query, body = CUBE_ROUTES.get(route, (params or {}, None))
    target = path.replace("{cube}", cube).replace("{zone}", ZONE)
    target = target.replace("{name}", "swagger-ui.css")
    target = target.replace("{z}/{y}/{x}", TILE).replace("{path:path}", "map.css")
    return http.request(method, target, params=query, json=body, headers=headers or {})


def swapped(response, old, new):
    """The response body with one cube id written as another (ids are quoted in JSON,
    plain in CSV; both are distinct words), and without the per-request id of problem
    documents."""
    text = re.sub(rf"\b{re.escape(old)}\b", new, response.text)
    return re.sub(r',"request_id":"[0-9a-f]{32}"', "", text)


def bearer(key):
    return {"Authorization": f"Bearer {key}"}


@pytest.mark.parametrize("route", sorted(CUBE_ROUTES))
def test_private_cube_is_unknown_without_a_key(http, keys, route):
    unknown = call(http, route, UNKNOWN)
    assert unknown.status_code == 404, unknown.text
    wrong_secret = keys["config"][1] + "." + "x" * 43  # a real key id, a wrong secret
    for headers in (
        {},
        bearer(keys["stray"]),
        bearer(wrong_secret),
        {"X-API-Key": "not-a-key"},
        {"Authorization": f"Basic {keys['config'][0]}"},  # not the Bearer scheme
    ):
        hidden = call(http, route, PRIVATE, headers)
        assert hidden.status_code == unknown.status_code, (headers, hidden.text)
        assert swapped(hidden, PRIVATE, UNKNOWN) == swapped(unknown, UNKNOWN, UNKNOWN)
        assert dict_without_date(hidden.headers) == dict_without_date(unknown.headers)


def dict_without_date(headers):
    skip = {"date", "content-length", "x-request-id"}
    return {k: v for k, v in headers.items() if k not in skip}


@pytest.mark.parametrize("route", sorted(CUBE_ROUTES))
def test_private_cube_with_a_key_answers_like_the_public_one(http, keys, route):
    public = call(http, route, PUBLIC)
    assert public.status_code == 200, public.text
    for headers in (bearer(keys["config"][0]), {"X-API-Key": keys["file"][0]}):
        private = call(http, route, PRIVATE, headers)
        assert private.status_code == 200, (headers, private.text)
        assert swapped(private, PRIVATE, PUBLIC) == public.text
        if "etag" in public.headers:
            # A private answer must not be kept by shared caches, nor served across keys.
            assert private.headers["cache-control"].startswith("private")
            assert "Authorization" in private.headers["vary"]
            assert public.headers["cache-control"].startswith("public")


@pytest.mark.parametrize("route", sorted(OTHER_ROUTES))
def test_other_routes_never_name_the_private_cube(http, keys, route):
    anonymous = call(http, route, "", params=OTHER_ROUTES[route])
    assert anonymous.status_code == 200, anonymous.text
    assert PRIVATE not in anonymous.text
    with_key = call(http, route, "", bearer(keys["config"][0]), OTHER_ROUTES[route])
    assert with_key.status_code == 200


def test_listing_and_metrics_with_a_key(http, keys):
    anonymous = [c["id"] for c in http.get("/cubes").json()["cubes"]]
    assert anonymous == [PUBLIC]
    listed = [c["id"] for c in http.get("/cubes", headers=bearer(keys["file"][0])).json()["cubes"]]
    assert listed == [PUBLIC, PRIVATE]
    # The EDR collections: the same cubes as the native listing.
    anonymous = [c["id"] for c in http.get("/collections").json()["collections"]]
    assert anonymous == [PUBLIC]
    keyed = http.get("/collections", headers={"X-API-Key": keys["file"][0]}).json()
    assert [c["id"] for c in keyed["collections"]] == [PUBLIC, PRIVATE]
    call(http, ("GET", "/cubes/{cube}/point"), PRIVATE, bearer(keys["file"][0]))
    text = http.get("/metrics", headers={"X-API-Key": keys["file"][0]}).text
    assert f'cube="{PRIVATE}"' in text and f'cube="{PUBLIC}"' in text
    ready = http.get("/readyz", headers=bearer(keys["config"][0])).json()
    assert set(ready["cubes"]) == {PUBLIC, PRIVATE}
    assert set(http.get("/readyz").json()["cubes"]) == {PUBLIC}


def cache_hits(http):
    text = http.get("/metrics").text
    return float(re.search(r"^alveary_answer_cache_hits_total (\S+)$", text, re.M).group(1))


def test_cached_private_answer_is_not_served_without_a_key(http, keys):
    route = ("GET", "/cubes/{cube}/point")
    params = {"lat": "-33.3", "lon": "151.1"}
    path = f"/cubes/{PRIVATE}/point"
    first = http.get(path, params=params, headers=bearer(keys["config"][0]))
    assert first.status_code == 200
    before = cache_hits(http)
    again = http.get(path, params=params, headers=bearer(keys["config"][0]))
    assert again.status_code == 200 and again.content == first.content
    assert cache_hits(http) == before + 1  # the repeat came from the answer cache
    unknown = http.get(f"/cubes/{UNKNOWN}/point", params=params)
    for headers in ({}, {"If-None-Match": first.headers["etag"]}, bearer(keys["stray"])):
        hidden = http.get(path, params=params, headers=headers)
        assert hidden.status_code == 404, hidden.text
        assert swapped(hidden, PRIVATE, UNKNOWN) == swapped(unknown, UNKNOWN, UNKNOWN)
    assert cache_hits(http) == before + 1
    # revalidation with the key still works, from the cache
    revalidated = http.get(
        path,
        params=params,
        headers={**bearer(keys["config"][0]), "If-None-Match": first.headers["etag"]},
    )
    assert revalidated.status_code == 304
    assert route in CUBE_ROUTES
