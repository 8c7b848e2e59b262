"""OGC API - EDR 1.1 documents: landing page, conformance, collections; errors on EDR paths.

Judges: ``edr-pydantic`` (KNMI's models of the EDR 1.1 schemas, which forbid extra
members) validates the landing page, conformance and collection documents; the
requirement texts of OGC 19-086r6 and OGC API - Common (link relations, conformance class
URIs, exception schema) are written out beside each check; PROJ (pyproj) reads the CRS84
WKT; the cube's own metadata, read back from a store, is compared with the collection.
"""

from __future__ import annotations

import jsonschema
import numpy as np
import orjson
import pyproj
import pytest
from edr_pydantic.capabilities import ConformanceModel, LandingPageModel
from edr_pydantic.collections import Collection, Collections
from pydantic import ValidationError

from alveary import (
    ChunkDecodeError,
    InvalidInput,
    LimitExceeded,
    NotFound,
    StoreUnavailable,
)
from alveary.api._edr_docs import (
    CONFORMANCE,
    CRS84_WKT,
    collection_document,
    collections_document,
    conformance_document,
    edr_format,
    landing_page,
    temporal_extent,
)
from alveary.api._edr_problem import edr_error, edr_status_for, exception_body
from alveary.cube import create_cube, open_cube
from support.memcube import memory_cube

BASE = "http://127.0.0.1:8000"


@pytest.fixture(scope="module")
def cube():
    """A small published cube in the in-process memory store, opened as the service does."""
    url = "memory://edr-docs/velmora"
    writer = create_cube(
        url,
        cube_id="velmora-irrigation",
        title="Velmora Flats irrigation district (invented data)",
        times=np.datetime64("2025-01-01", "s") + np.arange(5) * np.timedelta64(1, "D"),
        levels=[5, 7],
        coverage=(-36.4, 30.3, -35.8, 30.8),
        variables={
            "soil_moisture": {
                "units": "m3 m-3",
                "long_name": "Root-zone soil moisture",
                "standard_name": "volume_fraction_of_condensed_water_in_soil",
            },
            "canopy_temperature": {"units": "degC", "long_name": "Midday canopy temperature"},
            "flag": {"units": "", "long_name": ""},
        },
    )
    writer.publish()
    return open_cube(url)


def _json(doc):
    """Documents as clients receive them: JSON text."""
    return orjson.dumps(doc)


def test_landing_page_links_and_schema():
    page = landing_page(BASE, title="alveary", description="Hexagonal, equal-area data cubes")
    LandingPageModel.model_validate_json(_json(page))  # extra members are refused
    rels = {link["rel"]: link for link in page["links"]}
    # OGC 19-086r6 /req/core/root-success B: service-desc or service-doc, conformance, data.
    assert rels["service-desc"]["href"] == f"{BASE}/openapi.json"
    assert rels["service-desc"]["type"] == "application/vnd.oai.openapi+json;version=3.1"
    assert rels["service-doc"]["type"] == "text/html"
    assert rels["conformance"]["href"] == f"{BASE}/conformance"
    assert rels["data"]["href"] == f"{BASE}/collections"
    # OGC API - Common 1.0 /req/landing-page/root-success: the conformance relation URI.
    assert (
        rels["http://www.opengis.net/def/rel/ogc/1.0/conformance"]["href"] == f"{BASE}/conformance"
    )
    assert rels["http://www.opengis.net/def/rel/ogc/1.0/data"]["href"] == f"{BASE}/collections"
    assert rels["self"]["href"] == f"{BASE}/"
    assert all({"href", "rel", "type"} <= set(link) for link in page["links"])


def test_landing_page_extra_links_and_strictness():
    native = {"href": "/cubes", "rel": "alternate", "type": "application/json", "title": "Cubes"}
    page = landing_page(title="t", description="d", extra_links=[native])
    assert page["links"][-1] == native and page["links"][0]["href"] == "/"
    LandingPageModel.model_validate_json(_json(page))
    # The judge is strict: a member outside the schema (the native page's "version") fails.
    with pytest.raises(ValidationError):
        LandingPageModel.model_validate_json(_json({**page, "version": "0.1.0"}))


def test_conformance_lists_exactly_the_claimed_classes():
    doc = conformance_document()
    ConformanceModel.model_validate_json(_json(doc))
    # Identifiers as OGC 19-086r6 Annex A states them (conformance_class "identifier::"),
    # and the two OGC API - Common classes EDR inherits (its example conformance response).
    assert doc["conformsTo"] == [
        "http://www.opengis.net/spec/ogcapi-edr-1/1.1/conf/core",
        "http://www.opengis.net/spec/ogcapi-edr-1/1.1/conf/collections",
        "http://www.opengis.net/spec/ogcapi-edr-1/1.1/conf/queries",
        "http://www.opengis.net/spec/ogcapi-edr-1/1.1/conf/covjson",
        "http://www.opengis.net/spec/ogcapi-edr-1/1.1/conf/geojson",
        "http://www.opengis.net/spec/ogcapi-common-1/1.0/conf/core",
        "http://www.opengis.net/spec/ogcapi-common-2/1.0/conf/collections",
    ]
    assert list(CONFORMANCE) == doc["conformsTo"]


def test_collection_from_a_stored_cube(cube):
    doc = collection_document(cube, BASE)
    Collection.model_validate_json(_json(doc))
    here = f"{BASE}/collections/velmora-irrigation"
    assert doc["id"] == "velmora-irrigation"
    assert doc["title"] == "Velmora Flats irrigation district (invented data)"
    # /req/core/rc-collection-info-links: self, a query link; every link with rel and type.
    assert all({"href", "rel", "type"} <= set(link) for link in doc["links"])
    rels = [(link["rel"], link["href"]) for link in doc["links"]]
    assert ("self", here) in rels
    for query in ("position", "radius", "area", "cube"):
        assert ("data", f"{here}/{query}") in rels
    # Extent from the cube's own metadata.
    spatial = doc["extent"]["spatial"]
    assert spatial["bbox"] == [list(cube.coverage)]
    assert spatial["crs"] == "http://www.opengis.net/def/crs/OGC/1.3/CRS84"
    temporal = doc["extent"]["temporal"]
    assert temporal["interval"] == [["2025-01-01T00:00:00Z", "2025-01-06T00:00:00Z"]]
    assert temporal["values"] == ["R5/2025-01-01T00:00:00Z/P1D"]
    assert temporal["trs"] == "http://www.opengis.net/def/uom/ISO-8601/0/Gregorian"
    assert doc["crs"] == ["http://www.opengis.net/def/crs/OGC/1.3/CRS84"]
    assert doc["output_formats"] == ["CoverageJSON", "GeoJSON", "Arrow", "CSV"]
    assert doc["distanceunits"] == ["m", "km", "mi"]  # /req/edr/rc-collection-info I


def test_collection_parameters(cube):
    params = collection_document(cube)["parameter_names"]
    assert list(params) == list(cube.variables)
    sm = params["soil_moisture"]
    assert sm["type"] == "Parameter" and sm["id"] == "soil_moisture"
    assert sm["label"] == "Root-zone soil moisture"
    assert sm["unit"] == {"label": "m3 m-3", "symbol": "m³/m³"}
    assert sm["observedProperty"] == {
        "id": "http://vocab.nerc.ac.uk/standard_name/volume_fraction_of_condensed_water_in_soil/",
        "label": "Root-zone soil moisture",
    }
    assert params["canopy_temperature"]["unit"]["symbol"] == "°C"
    flag = params["flag"]  # no units, no long name: no unit, the name as label
    assert "unit" not in flag and flag["label"] == "flag"
    assert flag["observedProperty"] == {"id": "flag", "label": "flag"}


def test_data_queries_and_the_vendor_level(cube):
    queries = collection_document(cube, BASE)["data_queries"]
    assert set(queries) == {"position", "radius", "area", "cube"}
    for name, query in queries.items():
        link = query["link"]
        variables = link["variables"]
        assert variables["query_type"] == name  # /req/edr/rc-common-variables A
        assert variables["default_output_format"] in variables["output_formats"]
        assert link["templated"] is True and link["rel"] == "data"
        assert link["href"].startswith(f"{BASE}/collections/velmora-irrigation/{name}{{?")
        assert "level" in link["href"] and "parameter-name" in link["href"]
        assert variables["alveary:levels"] == [5, 7]
        assert variables["alveary:default_level"] == 7
        assert variables["crs_details"][0]["crs"] == "CRS84"
    for name in ("area", "cube"):
        variables = queries[name]["link"]["variables"]
        assert variables["alveary:stats"] == ["mean", "min", "max", "sum", "count", "std"]
        assert "stats" in queries[name]["link"]["href"]
    assert "alveary:stats" not in queries["position"]["link"]["variables"]
    assert queries["radius"]["link"]["variables"]["within_units"] == ["m", "km", "mi"]
    assert "within-units" in queries["radius"]["link"]["href"]
    assert queries["cube"]["link"]["variables"]["height_units"] == []  # no z
    assert "{?bbox," in queries["cube"]["link"]["href"]


def test_collection_from_metadata_objects(cube):
    # The stored metadata itself and a cube opened from the in-memory store.
    Collection.model_validate_json(_json(collection_document(cube.meta)))
    mem = memory_cube().catalog().get("mem")
    doc = collection_document(mem, title="Override", description="A field")
    Collection.model_validate_json(_json(doc))
    assert (doc["title"], doc["description"]) == ("Override", "A field")
    assert doc["parameter_names"]["f"]["unit"]["symbol"] == "K"


def test_collections_document(cube):
    mem = memory_cube().catalog().get("mem")
    doc = collections_document([cube, (mem, "Memory")], BASE)
    Collections.model_validate_json(_json(doc))
    assert [c["id"] for c in doc["collections"]] == ["velmora-irrigation", "mem"]
    assert doc["collections"][1]["title"] == "Memory"
    assert doc["links"] == [
        {
            "href": f"{BASE}/collections",
            "rel": "self",
            "type": "application/json",
            "title": "The collections",
        }
    ]


def test_crs84_wkt_is_crs84_for_proj():
    crs = pyproj.CRS.from_wkt(CRS84_WKT)
    assert crs == pyproj.CRS.from_user_input("OGC:CRS84")
    assert [a.direction for a in crs.axis_info] == ["east", "north"]


@pytest.mark.parametrize(
    ("stamps", "interval", "values"),
    [
        (
            ["2024-11-01", "2024-12-01", "2025-01-01"],
            ["2024-11-01T00:00:00Z", "2025-02-01T00:00:00Z"],
            ["R3/2024-11-01T00:00:00Z/P1M"],
        ),
        (
            ["2024-01-01T00:00", "2024-01-01T06:00"],
            ["2024-01-01T00:00:00Z", "2024-01-01T12:00:00Z"],
            ["R2/2024-01-01T00:00:00Z/PT6H"],
        ),
        (
            ["2024-01-01", "2024-01-02", "2024-01-05"],
            ["2024-01-01T00:00:00Z", "2024-01-08T00:00:00Z"],
            ["2024-01-01T00:00:00Z", "2024-01-02T00:00:00Z", "2024-01-05T00:00:00Z"],
        ),
        (
            ["2024-01-01"],
            ["2024-01-01T00:00:00Z", "2024-01-01T00:00:00Z"],
            ["2024-01-01T00:00:00Z"],
        ),
    ],
)
def test_temporal_extent(stamps, interval, values):
    out = temporal_extent(np.array(stamps, dtype="datetime64[s]"))
    assert out["interval"] == [interval] and out["values"] == values


def test_long_irregular_axis_is_summarised():
    gaps = np.tile([1, 2], 600).astype("timedelta64[h]")
    axis = np.datetime64("2024-01-01T00:00", "s") + np.cumsum(gaps)
    out = temporal_extent(axis)
    assert len(out["values"]) == 1 and "/" in out["values"][0]


def test_output_format_from_f_and_accept():
    assert edr_format(None, None) == "covjson"
    assert edr_format("coveragejson", None) == "covjson"
    assert edr_format("CSV", "application/geo+json") == "csv"  # f wins
    assert edr_format(None, "text/csv;q=0.4, application/geo+json;q=0.6") == "geojson"
    assert edr_format(None, "application/vnd.apache.arrow.stream") == "arrow"
    assert edr_format(None, "image/png") == "covjson"
    with pytest.raises(InvalidInput) as info:
        edr_format("json", None)
    assert info.value.parameter == "f"


# OGC 19-086r6 openapi/schemas/core/exception.yaml, as JSON Schema.
EXCEPTION_SCHEMA = {
    "type": "object",
    "required": ["code"],
    "properties": {"code": {"type": "string"}, "description": {"type": "string"}},
}
# RFC 9457 §3.1 members and their types.
PROBLEM_MEMBERS = {"type": str, "title": str, "status": int, "detail": str}


def _check_error_body(body, status):
    jsonschema.validate(body, EXCEPTION_SCHEMA)
    for name, kind in PROBLEM_MEMBERS.items():
        assert isinstance(body[name], kind)
    assert body["status"] == status and body["description"] == body["detail"]
    orjson.dumps(body)  # plain JSON


@pytest.mark.parametrize(
    ("error", "status", "code", "parameter"),
    [
        (
            InvalidInput("coords", "POINT(", "WKT POINT(lon lat)"),
            400,
            "InvalidParameterValue",
            "coords",
        ),
        (
            InvalidInput("vars", "rain", "variables of this cube: a"),
            400,
            "InvalidParameterValue",
            "parameter-name",
        ),
        (InvalidInput("meters", -1.0, ">= 0"), 400, "InvalidParameterValue", "within"),
        (
            InvalidInput("within-units", None, "m, km or mi"),
            400,
            "MissingParameterValue",
            "within-units",
        ),
        (NotFound("variable", "rain"), 400, "InvalidParameterValue", "parameter-name"),
        (NotFound("cube", "nope"), 404, "NotFound", None),
        (LimitExceeded("zones per request", 300_000, 250_000), 413, "LimitExceeded", None),
    ],
)
def test_errors_on_edr_paths(error, status, code, parameter):
    got, body = edr_error(error)
    assert got == status == edr_status_for(error)[0]
    _check_error_body(body, status)
    assert body["code"] == code
    assert body.get("parameter") == parameter
    if parameter is not None and isinstance(error, InvalidInput):
        assert body["detail"].startswith(parameter)


def test_store_faults_say_no_more_than_their_title():
    for error, status in (
        (StoreUnavailable("s3://secret-bucket/cube: connection refused"), 503),
        (ChunkDecodeError("/var/cubes/x/chunk 0.1.2 corrupt"), 502),
    ):
        got, body = edr_error(error)
        assert got == status
        _check_error_body(body, status)
        assert "secret" not in orjson.dumps(body).decode() and "/var" not in body["detail"]


def test_exception_body_members():
    body = exception_body(400, "Invalid parameter", "z: refused", parameter="z", value=None)
    assert body == {
        "code": "InvalidParameterValue",
        "description": "z: refused",
        "type": "about:blank",
        "title": "Invalid parameter",
        "status": 400,
        "detail": "z: refused",
        "parameter": "z",
    }
    assert exception_body(418, "Teapot", "x")["code"] == "NoApplicableCode"
