"""OGC API - EDR 1.1 (OGC 19-086r6) metadata documents: landing page, conformance, collections.

Every document is a plain dict built from a cube's metadata, with no I/O. Members follow
the standard's schemas (landingPage.yaml, confClasses.yaml, collections.yaml,
collection.yaml); alveary's own fields go only where those schemas admit extra members,
the ``variables`` of a ``data_queries`` link:

- ``alveary:levels`` (the grid levels of the cube) and ``alveary:default_level`` (its
  finest) describe the vendor query parameter ``level``, which picks the grid level of an
  answer;
- ``alveary:stats`` (area and cube queries) lists the statistics the vendor parameter
  ``stats`` may ask for, which turns an answer into statistics per time step over the
  area.

One collection per cube, ``id`` the cube's id. Coordinates are CRS84 everywhere. The
temporal extent runs from the first step to the end of the last step's interval (see
:mod:`alveary.query._steps`), ``values`` states the steps as an ISO 8601 repeating
interval when they are evenly spaced.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from typing import Any, Protocol

import numpy as np

from alveary._errors import InvalidInput
from alveary.api._covjson import COVJSON, COVJSON_LEGACY, observed_property, unit_object
from alveary.query import CRS84, STATISTICS, WITHIN_UNITS, format_time, step_bounds

__all__ = [
    "COMMON_COLLECTIONS",
    "COMMON_CORE",
    "CONFORMANCE",
    "CONF_COLLECTIONS",
    "CONF_CORE",
    "CONF_COVJSON",
    "CONF_GEOJSON",
    "CONF_QUERIES",
    "CRS84_WKT",
    "OUTPUT_FORMATS",
    "QUERY_TYPES",
    "REL_CONFORMANCE",
    "REL_DATA",
    "TRS_GREGORIAN",
    "CubeLike",
    "collection_document",
    "collections_document",
    "conformance_document",
    "edr_format",
    "landing_page",
    "temporal_extent",
]

_EDR = "http://www.opengis.net/spec/ogcapi-edr-1/1.1/conf"
#: EDR Core (Annex A "Core"): landing page, API definition, conformance.
CONF_CORE = f"{_EDR}/core"
#: EDR Collections: ``/collections`` and ``/collections/{collectionId}``.
CONF_COLLECTIONS = f"{_EDR}/collections"
#: EDR Queries: the one class that covers every query type (EDR 1.1 has no class per
#: type; its abstract tests come in groups /conf/position, /conf/radius, /conf/area,
#: /conf/cube, ...). alveary implements position, radius, area and cube.
CONF_QUERIES = f"{_EDR}/queries"
#: EDR CoverageJSON encoding.
CONF_COVJSON = f"{_EDR}/covjson"
#: EDR GeoJSON encoding.
CONF_GEOJSON = f"{_EDR}/geojson"
#: OGC API - Common Part 1 Core, which EDR Core inherits.
COMMON_CORE = "http://www.opengis.net/spec/ogcapi-common-1/1.0/conf/core"
#: OGC API - Common Part 2 Collections, which EDR Collections inherits.
COMMON_COLLECTIONS = "http://www.opengis.net/spec/ogcapi-common-2/1.0/conf/collections"
#: Exactly the classes alveary claims, in the order served.
CONFORMANCE: tuple[str, ...] = (
    CONF_CORE,
    CONF_COLLECTIONS,
    CONF_QUERIES,
    CONF_COVJSON,
    CONF_GEOJSON,
    COMMON_CORE,
    COMMON_COLLECTIONS,
)
#: The query types served under ``/collections/{cube}/``.
QUERY_TYPES: tuple[str, ...] = ("position", "radius", "area", "cube")
#: OGC API - Common 1.0 link relations (EDR 1.1 uses the short ``conformance``/``data``).
REL_CONFORMANCE = "http://www.opengis.net/def/rel/ogc/1.0/conformance"
REL_DATA = "http://www.opengis.net/def/rel/ogc/1.0/data"
#: The Gregorian calendar in UTC, the temporal reference system of every cube.
TRS_GREGORIAN = "http://www.opengis.net/def/uom/ISO-8601/0/Gregorian"
#: CRS84 in WKT 2 (ISO 19162): WGS 84, longitude then latitude in degrees.
CRS84_WKT = (
    'GEOGCRS["WGS 84 (CRS84)",DATUM["World Geodetic System 1984",'
    'ELLIPSOID["WGS 84",6378137,298.257223563,LENGTHUNIT["metre",1]]],'
    'PRIMEM["Greenwich",0,ANGLEUNIT["degree",0.0174532925199433]],CS[ellipsoidal,2],'
    'AXIS["geodetic longitude (Lon)",east,ORDER[1],ANGLEUNIT["degree",0.0174532925199433]],'
    'AXIS["geodetic latitude (Lat)",north,ORDER[2],ANGLEUNIT["degree",0.0174532925199433]],'
    'ID["OGC","CRS84"]]'
)
#: Output format names (as listed in collections and accepted by ``f``) -> encoder name.
OUTPUT_FORMATS: dict[str, str] = {
    "CoverageJSON": "covjson",
    "GeoJSON": "geojson",
    "Arrow": "arrow",
    "CSV": "csv",
}
_FORMAT_NAMES = {k.lower(): v for k, v in OUTPUT_FORMATS.items()} | {"covjson": "covjson"}
_FORMAT_MEDIA = {
    COVJSON: "covjson",
    COVJSON_LEGACY: "covjson",
    "application/geo+json": "geojson",
    "application/vnd.apache.arrow.stream": "arrow",
    "text/csv": "csv",
    "*/*": "covjson",
    "application/*": "covjson",
}
_JSON = "application/json"
_QUERY_PARAMETERS = {
    "position": "coords,datetime,parameter-name,crs,f,level",
    "radius": "coords,within,within-units,datetime,parameter-name,crs,f,level",
    "area": "coords,datetime,parameter-name,crs,f,level,stats",
    "cube": "bbox,datetime,parameter-name,crs,f,level,stats",
}
_QUERY_TEXT = {
    "position": (
        "Position query",
        "Time series at the zone under a WKT POINT(lon lat), or under each point of a "
        "MULTIPOINT; values at zone centres.",
    ),
    "radius": (
        "Radius query",
        "Zones whose centres lie within a geodesic distance of a WKT POINT(lon lat).",
    ),
    "area": (
        "Area query",
        "Zones whose centres lie in a WKT POLYGON or MULTIPOLYGON.",
    ),
    "cube": (
        "Cube query",
        "Zones whose centres lie in bbox=west,south,east,north (no z: surface fields).",
    ),
}


class CubeLike(Protocol):
    """What the documents read from a cube (``alveary.cube.Cube`` or ``CubeMeta``)."""

    @property
    def id(self) -> str: ...
    @property
    def title(self) -> str: ...
    @property
    def levels(self) -> tuple[int, ...]: ...
    @property
    def times(self) -> np.ndarray: ...
    @property
    def variables(self) -> Mapping[str, Any]: ...
    @property
    def coverage(self) -> tuple[float, float, float, float]: ...


def _link(href: str, rel: str, media: str, title: str | None = None) -> dict[str, Any]:
    out: dict[str, Any] = {"href": href, "rel": rel, "type": media}
    if title:
        out["title"] = title
    return out


def landing_page(
    base_url: str = "",
    *,
    title: str,
    description: str,
    openapi_path: str = "/openapi.json",
    docs_path: str = "/docs",
    openapi_version: str = "3.1",
    extra_links: Iterable[dict[str, Any]] = (),
) -> dict[str, Any]:
    """The landing page: links to itself, the API definition (``service-desc``) and its
    documentation (``service-doc``), the conformance declaration and the collections
    (``data``), each relation given both in EDR 1.1's short form and as the
    OGC API - Common 1.0 URI.

    ``base_url`` prefixes every link (no trailing slash; empty: links from the root).
    ``extra_links`` are appended as given (e.g. the native API's ``/cubes``).

    >>> page = landing_page(title="alveary", description="Hexagonal data cubes")
    >>> sorted(link["rel"] for link in page["links"])[:4]
    ['conformance', 'data', 'http://www.opengis.net/def/rel/ogc/1.0/conformance', 'http://www.opengis.net/def/rel/ogc/1.0/data']
    """
    base = base_url.rstrip("/")
    links = [
        _link(f"{base}/", "self", _JSON, "This document"),
        _link(
            f"{base}{openapi_path}",
            "service-desc",
            f"application/vnd.oai.openapi+json;version={openapi_version}",
            "The API definition (OpenAPI)",
        ),
        _link(f"{base}{docs_path}", "service-doc", "text/html", "The API documentation"),
    ]
    for rel in ("conformance", REL_CONFORMANCE):
        links.append(_link(f"{base}/conformance", rel, _JSON, "Conformance classes"))
    for rel in ("data", REL_DATA):
        links.append(_link(f"{base}/collections", rel, _JSON, "Collections: one per cube"))
    links.extend(extra_links)
    return {"title": title, "description": description, "links": links}


def conformance_document() -> dict[str, Any]:
    """``/conformance``: exactly the classes of :data:`CONFORMANCE`.

    >>> len(conformance_document()["conformsTo"])
    7
    """
    return {"conformsTo": list(CONFORMANCE)}


def _iso_duration(seconds: int) -> str:
    """An ISO 8601 duration of a positive number of seconds.

    >>> _iso_duration(86400), _iso_duration(6 * 3600), _iso_duration(129600), _iso_duration(90)
    ('P1D', 'PT6H', 'P1DT12H', 'PT1M30S')
    """
    days, rest = divmod(seconds, 86400)
    hours, rest = divmod(rest, 3600)
    minutes, secs = divmod(rest, 60)
    clock = "".join(f"{v}{u}" for v, u in ((hours, "H"), (minutes, "M"), (secs, "S")) if v)
    return "P" + (f"{days}D" if days else "") + (f"T{clock}" if clock else "")


def _step_values(times: np.ndarray) -> list[str]:
    """The steps in ISO 8601: a repeating interval if evenly spaced (seconds or whole
    months), else every instant (up to 1000), else the interval first/last."""
    text = format_time(times)
    n = len(text)
    if n == 1:
        return text
    seconds = np.diff(times.astype("datetime64[s]").astype(np.int64))
    if np.all(seconds == seconds[0]):
        return [f"R{n}/{text[0]}/{_iso_duration(int(seconds[0]))}"]
    months = times.astype("datetime64[M]")
    if np.array_equal(months.astype("datetime64[s]"), times.astype("datetime64[s]")):
        spacing = np.diff(months.astype(np.int64))
        if np.all(spacing == spacing[0]):
            return [f"R{n}/{text[0]}/P{int(spacing[0])}M"]
    return text if n <= 1000 else [f"{text[0]}/{text[-1]}"]


def temporal_extent(times: np.ndarray) -> dict[str, Any]:
    """The ``temporal`` extent: the first step to the end of the last step's interval.

    >>> axis = np.array(["2025-01-01", "2025-01-02", "2025-01-03"], dtype="datetime64[s]")
    >>> temporal_extent(axis)["interval"], temporal_extent(axis)["values"]
    ([['2025-01-01T00:00:00Z', '2025-01-04T00:00:00Z']], ['R3/2025-01-01T00:00:00Z/P1D'])
    """
    times = np.asarray(times).astype("datetime64[s]")
    if times.size == 0:
        return {"interval": [[None, None]], "values": [], "trs": TRS_GREGORIAN}
    _, ends = step_bounds(times)
    first, last = format_time(np.array([times[0], ends[-1]]))
    return {"interval": [[first, last]], "values": _step_values(times), "trs": TRS_GREGORIAN}


def _parameter(name: str, info: Any) -> dict[str, Any]:
    prop = observed_property(info if not isinstance(info, dict) else {**info, "name": name})
    out: dict[str, Any] = {
        "type": "Parameter",
        "id": name,
        "label": prop["label"] or name,
        "data-type": "float",
        "observedProperty": prop,
    }
    units = info.get("units") if isinstance(info, dict) else getattr(info, "units", "")
    unit = unit_object(str(units or ""), i18n=False)
    if unit is not None:
        out["unit"] = unit
    return out


def _query_link(base: str, query: str, levels: list[int]) -> dict[str, Any]:
    title, description = _QUERY_TEXT[query]
    variables: dict[str, Any] = {
        "title": title,
        "description": description,
        "query_type": query,
        "output_formats": list(OUTPUT_FORMATS),
        "default_output_format": "CoverageJSON",
        "crs_details": [{"crs": "CRS84", "wkt": CRS84_WKT}],
        "alveary:levels": levels,
        "alveary:default_level": max(levels) if levels else None,
    }
    if query in ("area", "cube"):
        variables["alveary:stats"] = list(STATISTICS)
    if query == "radius":
        variables["within_units"] = list(WITHIN_UNITS)
    if query == "cube":
        variables["height_units"] = []  # surface fields: no vertical axis, no z
    return {
        "href": f"{base}/{query}{{?{_QUERY_PARAMETERS[query]}}}",
        "rel": "data",
        "type": COVJSON,
        "title": title,
        "templated": True,
        "variables": variables,
    }


def collection_document(
    cube: CubeLike,
    base_url: str = "",
    *,
    title: str | None = None,
    description: str | None = None,
) -> dict[str, Any]:
    """``/collections/{cube}``: one cube as an EDR collection.

    Parameters
    ----------
    cube:
        The cube (its current version): id, title, levels, times, variables, coverage.
    base_url:
        Prefix of every link (no trailing slash; empty: links from the root).
    title, description:
        Override the cube's own title; the description defaults to the title.
    """
    base = base_url.rstrip("/")
    here = f"{base}/collections/{cube.id}"
    name = title or str(cube.title or cube.id)
    levels = sorted(int(v) for v in cube.levels)
    links = [
        _link(here, "self", _JSON, "This collection"),
        _link(f"{base}/cubes/{cube.id}", "describedby", _JSON, "The cube in the native API"),
    ]
    links += [_link(f"{here}/{q}", "data", COVJSON, _QUERY_TEXT[q][0]) for q in QUERY_TYPES]
    west, south, east, north = (float(v) for v in cube.coverage)
    return {
        "id": str(cube.id),
        "title": name,
        "description": description or name,
        "links": links,
        "extent": {
            "spatial": {"bbox": [[west, south, east, north]], "crs": CRS84},
            "temporal": temporal_extent(np.asarray(cube.times)),
        },
        "data_queries": {q: {"link": _query_link(here, q, levels)} for q in QUERY_TYPES},
        "crs": [CRS84],
        "output_formats": list(OUTPUT_FORMATS),
        "parameter_names": {n: _parameter(n, i) for n, i in cube.variables.items()},
        "distanceunits": list(WITHIN_UNITS),
    }


def collections_document(
    cubes: Iterable[CubeLike | tuple[CubeLike, str | None]], base_url: str = ""
) -> dict[str, Any]:
    """``/collections``: every cube as in :func:`collection_document`.

    Each item is a cube, or a pair (cube, title override).
    """
    base = base_url.rstrip("/")
    out = []
    for item in cubes:
        cube, title = item if isinstance(item, tuple) else (item, None)
        out.append(collection_document(cube, base, title=title))
    return {
        "links": [_link(f"{base}/collections", "self", _JSON, "The collections")],
        "collections": out,
    }


def edr_format(f: str | None, accept: str | None) -> str:
    """The encoder for an EDR query answer: ``f`` if given (case-insensitive, one of
    :data:`OUTPUT_FORMATS`), else the best ``Accept`` match, else CoverageJSON.

    >>> edr_format("CoverageJSON", None), edr_format(None, "application/geo+json")
    ('covjson', 'geojson')
    >>> edr_format(None, "application/prs.coverage+json;q=0.9, text/csv;q=0.5")
    'covjson'
    >>> edr_format("netCDF", None)
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: f is 'netCDF'; allowed: CoverageJSON, GeoJSON, Arrow or CSV
    """
    if f is not None:
        name = _FORMAT_NAMES.get(f.strip().lower())
        if name is None:
            names = list(OUTPUT_FORMATS)
            raise InvalidInput("f", f, ", ".join(names[:-1]) + " or " + names[-1])
        return name
    best, best_key = "covjson", (0.0, 0)
    for order, item in enumerate((accept or "").split(",")):
        parts = [p.strip() for p in item.split(";")]
        name = _FORMAT_MEDIA.get(parts[0].lower())
        q = 1.0
        for p in parts[1:]:
            if p.lower().startswith("q="):
                try:
                    q = float(p[2:])
                except ValueError:
                    q = 0.0
        if name is not None and q > 0 and (q, -order) > best_key:
            best, best_key = name, (q, -order)
    return best
