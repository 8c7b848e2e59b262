"""CoverageJSON (OGC 21-069r2) answers, built from the same columnar results as every format.

The mapping from alveary's answers to CoverageJSON domain types:

- one zone's time series (a ``position`` query at one point): a ``PointSeries`` whose
  ``x``/``y`` axes hold the zone centre (not the requested point);
- many zones (``radius``, ``area`` and ``cube`` queries, ``position`` at several points):
  a ``MultiPointSeries``, the zone centres as ``[lon, lat]`` tuples on the ``composite``
  axis in the answer's row order; ranges have ``axisNames`` ``["t", "composite"]``;
- statistics over an area: a ``PolygonSeries`` on the request polygon, one parameter per
  variable and statistic (``<variable>_<statistic>``, e.g. ``soil_moisture_mean``),
  grouped per variable in ``parameterGroups``.

Coordinates are CRS84 (longitude, latitude); times are RFC 3339 UTC strings. The ``t``
axis carries ``bounds``: step ``i`` stands for ``[t[i], t[i + 1])`` of the cube's time axis,
the last step for as long as the one before it (see :mod:`alveary.query._steps`). Missing
data is ``null``; values print as the native encoders print them (a float32 variable as
the shortest float32 decimal, a packed one with the fewest decimals that give back the
stored integers). Parameters carry an i18n ``observedProperty`` (its ``id`` the CF standard
name in the NERC vocabulary when the variable has one) and a ``unit`` whose ``symbol`` is
for display (``m³/m³``) and whose ``label`` is the UDUNITS string as stored (``m3 m-3``).

What CoverageJSON has no member for travels in custom members with the prefix
``alveary:`` (CoverageJSON §8.1, compact-URI style; the prefix is our own and not
registered, so generic clients ignore these members): on the domain, ``alveary:zone``
(integer zone ids), ``alveary:zone_text`` and each per-row column of the query
(``alveary:distance_m``, ``alveary:steps``, ``alveary:point``), all aligned with the spatial
positions; on the coverage, ``alveary:cube``, ``alveary:version`` and ``alveary:level``;
on statistics, ``alveary:statistic``, ``alveary:zone_count`` and ``alveary:area_m2``.
"""

from __future__ import annotations

import functools
from typing import Any

import numpy as np
import orjson

from alveary import grid
from alveary.api._encode import printable
from alveary.api._units import unit_symbol
from alveary.query import CRS84, ResultVariable, StatsResult, ZoneResult, format_time, step_bounds

__all__ = [
    "COVJSON",
    "COVJSON_LEGACY",
    "PREFIX",
    "STANDARD_NAMES",
    "covjson_media_type",
    "covjson_parameter",
    "encode_covjson",
    "has_data",
    "multi_point_series",
    "observed_property",
    "point_series",
    "polygon_series",
    "to_coverage",
    "unit_object",
]

#: The CoverageJSON media type (OGC 21-069r2 §8).
COVJSON = "application/vnd.cov+json"
#: The media type OGC API - EDR 1.1 names, from before CoverageJSON's registration.
COVJSON_LEGACY = "application/prs.coverage+json"
#: Prefix of alveary's custom members (``alveary:zone``, ...).
PREFIX = "alveary"
#: Vocabulary of CF standard names; ``observedProperty.id`` is this + name + ``/``.
STANDARD_NAMES = "http://vocab.nerc.ac.uk/standard_name/"

_LANG = "en"  # CF attributes (long_name) are English by convention
_JSON_OPTS = orjson.OPT_SERIALIZE_NUMPY
_XY_SYSTEM = {"coordinates": ["x", "y"], "system": {"type": "GeographicCRS", "id": CRS84}}
_T_SYSTEM = {"coordinates": ["t"], "system": {"type": "TemporalRS", "calendar": "Gregorian"}}
_STATISTIC_WORDS = {
    "mean": "mean",
    "min": "minimum",
    "max": "maximum",
    "sum": "sum",
    "count": "number of zones with data",
    "std": "standard deviation",
    "area_m2": "area of the zones with data",
}


def _quality(accept: str, media: str) -> float:
    """The q value ``accept`` gives ``media`` (0 when absent)."""
    best = 0.0
    for item in accept.split(","):
        parts = [p.strip() for p in item.split(";")]
        if parts[0].lower() != media:
            continue
        q = 1.0
        for p in parts[1:]:
            if p.lower().startswith("q="):
                try:
                    q = float(p[2:])
                except ValueError:
                    q = 0.0
        best = max(best, q)
    return best


def covjson_media_type(accept: str | None) -> str:
    """The CoverageJSON media type to answer with: the registered one, unless ``Accept``
    prefers the older name that EDR 1.1 uses.

    >>> covjson_media_type(None)
    'application/vnd.cov+json'
    >>> covjson_media_type("application/prs.coverage+json")
    'application/prs.coverage+json'
    >>> covjson_media_type("application/prs.coverage+json;q=0.5, application/vnd.cov+json")
    'application/vnd.cov+json'
    """
    if not accept:
        return COVJSON
    legacy = _quality(accept, COVJSON_LEGACY)
    return COVJSON_LEGACY if legacy > 0 and legacy > _quality(accept, COVJSON) else COVJSON


def _get(info: Any, name: str) -> str:
    value = info.get(name) if isinstance(info, dict) else getattr(info, name, None)
    return str(value).strip() if value else ""


def _label(info: Any) -> str:
    """A short human name: long_name, else the standard name in words, else the name."""
    words = _get(info, "standard_name").replace("_", " ")
    return _get(info, "long_name") or words or _get(info, "name")


def observed_property(info: Any) -> dict[str, str]:
    """``id`` and ``label`` of what a variable observes, as plain strings.

    ``id`` is the CF standard name in the NERC vocabulary when the variable has one, else
    the variable's name (an identifier local to the collection).

    >>> from alveary.cube import VariableInfo
    >>> observed_property(VariableInfo("sm", standard_name="soil_moisture_content"))
    {'id': 'http://vocab.nerc.ac.uk/standard_name/soil_moisture_content/', 'label': 'soil moisture content'}
    """  # noqa: E501
    standard = _get(info, "standard_name")
    ident = f"{STANDARD_NAMES}{standard}/" if standard else _get(info, "name")
    return {"id": ident, "label": _label(info)}


def unit_object(units: str, *, i18n: bool = True) -> dict[str, Any] | None:
    """A CoverageJSON/EDR unit: display ``symbol`` and the stored UDUNITS ``label``.

    None when the variable has no units. ``i18n`` wraps the label as an i18n object
    (CoverageJSON); EDR collection metadata takes a plain string.

    >>> unit_object("kg m-2 s-1")
    {'label': {'en': 'kg m-2 s-1'}, 'symbol': 'kg/(m²·s)'}
    >>> unit_object("K", i18n=False)
    {'label': 'K', 'symbol': 'K'}
    """
    units = (units or "").strip()
    if not units:
        return None
    symbol = unit_symbol(units) or units
    return {"label": {_LANG: units} if i18n else units, "symbol": symbol}


def covjson_parameter(info: Any) -> dict[str, Any]:
    """The CoverageJSON parameter object of a variable.

    >>> from alveary.query import ResultVariable
    >>> p = covjson_parameter(ResultVariable("sm", "m3 m-3", "Root-zone soil moisture"))
    >>> p["observedProperty"]["label"], p["unit"]["symbol"]
    ({'en': 'Root-zone soil moisture'}, 'm³/m³')
    """
    prop = observed_property(info)
    out: dict[str, Any] = {
        "type": "Parameter",
        "observedProperty": {"id": prop["id"], "label": {_LANG: prop["label"]}},
    }
    unit = unit_object(_get(info, "units"))
    if unit is not None:
        out["unit"] = unit
    return out


def _time_axis(times: np.ndarray, axis: np.ndarray | None) -> dict[str, Any]:
    _, ends = step_bounds(times, axis)
    starts = format_time(times)
    if np.array_equal(ends[:-1], times[1:]):  # consecutive steps: each ends where the next starts
        finish = starts[1:] + format_time(ends[-1:])
    else:
        finish = format_time(ends)
    bounds = [t for pair in zip(starts, finish, strict=True) for t in pair]
    return {"values": starts, "bounds": bounds}


def _range(values: np.ndarray, axes: list[str], integer: bool = False) -> dict[str, Any]:
    """An NdArray; NaN becomes ``null`` when encoded (orjson writes NaN as null)."""
    values = np.asarray(values)
    # float32 stays float32, so that it prints as the shortest float32 decimal.
    dtype = np.int64 if integer else (np.float32 if values.dtype == np.float32 else np.float64)
    data = np.ascontiguousarray(values, dtype=dtype).reshape(-1)
    return {
        "type": "NdArray",
        "dataType": "integer" if integer else "float",
        "axisNames": axes,
        "shape": list(values.shape),
        "values": data,
    }


def _stored(result: ZoneResult, name: str) -> np.ndarray:
    """A variable's values as the native encoders print them: the shortest decimal that
    reads back to the stored value (float32, packed integers; see ``printable``)."""
    info = result.variables.get(name)
    values = result.values[name]
    return printable(values, info) if isinstance(info, ResultVariable) else values


def _members(result: ZoneResult | StatsResult) -> dict[str, Any]:
    return {
        f"{PREFIX}:cube": result.cube,
        f"{PREFIX}:version": result.version,
        f"{PREFIX}:level": int(result.level),
    }


def _zone_members(result: ZoneResult) -> dict[str, Any]:
    zones = np.asarray(result.zones, dtype=np.uint64)
    out: dict[str, Any] = {
        f"{PREFIX}:zone": zones,
        f"{PREFIX}:zone_text": grid.zone_to_text(zones).tolist(),
    }
    for name, column in result.extra.items():
        out[f"{PREFIX}:{name}"] = np.asarray(column)
    return out


def _require_data(result: ZoneResult | StatsResult) -> None:
    if not has_data(result):
        raise ValueError("the answer holds no data: answer 204 instead of encoding it")


def has_data(result: ZoneResult | StatsResult) -> bool:
    """Whether an answer holds any value; EDR answers 204 (no content) when it does not.

    True when at least one zone (or area) and one time step are selected and at least one
    selected value is not missing.
    """
    if result.times.size == 0:
        return False
    if isinstance(result, StatsResult):
        return result.zone_count > 0 and any(
            np.any(np.asarray(per.get("area_m2", np.zeros(0))) > 0) for per in result.stats.values()
        )
    if result.zones.size == 0:
        return False
    return any(np.any(~np.isnan(np.asarray(a, dtype=np.float64))) for a in result.values.values())


def point_series(result: ZoneResult, *, time_axis: np.ndarray | None = None) -> dict[str, Any]:
    """A ``PointSeries`` coverage of a one-zone answer, at the zone's centre.

    ``time_axis`` is the cube's whole time axis, for the ``bounds`` of the last step
    answered (default: the answer's own steps).

    This is the answer of every single-point ``position`` query, so what repeats between
    answers (the zone's centre and names, the time axis, the parameter objects) is kept
    in small caches rather than worked out again.
    """
    _require_data(result)
    if result.zones.size != 1:
        raise ValueError(f"a PointSeries holds one zone, the answer has {result.zones.size}")
    zone = int(result.zones[0])
    lon, lat, text = _zone_place(zone)
    domain: dict[str, Any] = {
        "type": "Domain",
        "domainType": "PointSeries",
        "axes": {
            "x": {"values": [lon]},
            "y": {"values": [lat]},
            "t": _cached_time_axis(result.times, time_axis),
        },
        "referencing": [_XY_SYSTEM, _T_SYSTEM],
        f"{PREFIX}:zone": [zone],
        f"{PREFIX}:zone_text": [text],
    }
    for name, column in result.extra.items():
        domain[f"{PREFIX}:{name}"] = np.asarray(column)
    return {
        "type": "Coverage",
        "domain": domain,
        "parameters": {v: _parameter(i) for v, i in result.variables.items()},
        "ranges": {v: _range(_stored(result, v)[:, 0], ["t"]) for v in result.values},
        **_members(result),
    }


@functools.lru_cache(maxsize=4096)
def _zone_place(zone: int) -> tuple[float, float, str]:
    """A zone's centre (lon, lat) and text id, for point answers (a field app asks for the
    same few zones again and again)."""
    lat, lon = grid.zone_to_point(zone)
    return float(lon), float(lat), str(grid.zone_to_text(zone))


@functools.lru_cache(maxsize=256)
def _parameter(info: Any) -> dict[str, Any]:
    """:func:`covjson_parameter`, kept per variable (only ever serialised, never changed)."""
    return covjson_parameter(info)


_TIME_AXES: dict[tuple[bytes, bytes], dict[str, Any]] = {}
_TIME_AXES_MAX = 256


def _cached_time_axis(times: np.ndarray, axis: np.ndarray | None) -> dict[str, Any]:
    """:func:`_time_axis` of the steps of a point answer, kept for the next answer with the
    same steps of the same axis (answers hold few steps; the keys are their bytes)."""
    times = np.asarray(times, dtype="datetime64[s]")
    full = b"" if axis is None else np.asarray(axis, dtype="datetime64[s]").tobytes()
    key = (times.tobytes(), full)
    found = _TIME_AXES.get(key)
    if found is None:
        found = _time_axis(times, axis)
        if len(_TIME_AXES) >= _TIME_AXES_MAX:
            _TIME_AXES.clear()
        _TIME_AXES[key] = found
    return found


def multi_point_series(
    result: ZoneResult, *, time_axis: np.ndarray | None = None
) -> dict[str, Any]:
    """A ``MultiPointSeries`` coverage: zone centres on the composite axis, in row order."""
    _require_data(result)
    lat, lon = grid.zone_to_point(np.asarray(result.zones, dtype=np.uint64))
    domain: dict[str, Any] = {
        "type": "Domain",
        "domainType": "MultiPointSeries",
        "axes": {
            "t": _time_axis(result.times, time_axis),
            "composite": {
                "dataType": "tuple",
                "coordinates": ["x", "y"],
                "values": np.column_stack([lon, lat]),
            },
        },
        "referencing": [_XY_SYSTEM, _T_SYSTEM],
    }
    domain.update(_zone_members(result))
    return {
        "type": "Coverage",
        "domain": domain,
        "parameters": {v: covjson_parameter(i) for v, i in result.variables.items()},
        "ranges": {v: _range(_stored(result, v), ["t", "composite"]) for v in result.values},
        **_members(result),
    }


def _statistic_parameter(info: Any, statistic: str) -> dict[str, Any]:
    label = _label(info)
    words = _STATISTIC_WORDS.get(statistic, statistic)
    if statistic in ("count", "area_m2"):
        out: dict[str, Any] = {
            "type": "Parameter",
            "observedProperty": {"label": {_LANG: f"{label}: {words}"}},
            "unit": unit_object("1" if statistic == "count" else "m2"),
        }
    else:
        out = covjson_parameter(info)
        out["label"] = {_LANG: f"{label}, {words} over the area"}
    out[f"{PREFIX}:statistic"] = statistic
    return out


def polygon_series(
    result: StatsResult, geometry: dict[str, Any], *, time_axis: np.ndarray | None = None
) -> dict[str, Any]:
    """A ``PolygonSeries`` coverage of area statistics, on the request polygon.

    ``geometry`` is the request polygon as GeoJSON (a ``Polygon``: a PolygonSeries holds
    exactly one polygon, so statistics over a MultiPolygon have no CoverageJSON form).
    Parameters are named ``<variable>_<statistic>``; ``count`` is an integer range.
    """
    if geometry.get("type") != "Polygon":
        raise ValueError(f"a PolygonSeries holds one Polygon, not a {geometry.get('type')}")
    _require_data(result)
    parameters: dict[str, Any] = {}
    ranges: dict[str, Any] = {}
    groups = []
    for name, info in result.variables.items():
        per = result.stats[name]
        members = []
        for statistic in (*result.names, "area_m2"):
            key = f"{name}_{statistic}"
            members.append(key)
            parameters[key] = _statistic_parameter(info, statistic)
            ranges[key] = _range(per[statistic], ["t"], integer=statistic == "count")
        prop = observed_property(info)
        groups.append(
            {
                "type": "ParameterGroup",
                "label": {_LANG: prop["label"]},
                "observedProperty": {"id": prop["id"], "label": {_LANG: prop["label"]}},
                "members": members,
            }
        )
    domain = {
        "type": "Domain",
        "domainType": "PolygonSeries",
        "axes": {
            "composite": {
                "dataType": "polygon",
                "coordinates": ["x", "y"],
                "values": [geometry["coordinates"]],
            },
            "t": _time_axis(result.times, time_axis),
        },
        "referencing": [_XY_SYSTEM, _T_SYSTEM],
    }
    return {
        "type": "Coverage",
        "domain": domain,
        "parameters": parameters,
        "parameterGroups": groups,
        "ranges": ranges,
        **_members(result),
        f"{PREFIX}:zone_count": int(result.zone_count),
        f"{PREFIX}:area_m2": float(result.area_m2),
    }


def to_coverage(
    result: ZoneResult | StatsResult,
    *,
    geometry: dict[str, Any] | None = None,
    time_axis: np.ndarray | None = None,
) -> dict[str, Any]:
    """The CoverageJSON coverage of an answer: PolygonSeries for statistics (``geometry``,
    the request polygon, is then required), PointSeries for a one-point query, else
    MultiPointSeries. Values are numpy arrays: serialise with :func:`encode_covjson`.
    """
    if isinstance(result, StatsResult):
        if geometry is None:
            raise ValueError("area statistics need the request polygon")
        return polygon_series(result, geometry, time_axis=time_axis)
    if result.kind == "point" and result.zones.size == 1:
        return point_series(result, time_axis=time_axis)
    return multi_point_series(result, time_axis=time_axis)


def encode_covjson(
    result: ZoneResult | StatsResult,
    *,
    geometry: dict[str, Any] | None = None,
    time_axis: np.ndarray | None = None,
) -> bytes:
    """The CoverageJSON document of an answer, as UTF-8 bytes (see :func:`to_coverage`).

    Raises ValueError for an answer without data (:func:`has_data`): EDR answers those
    with 204 and no body.
    """
    document = to_coverage(result, geometry=geometry, time_axis=time_axis)
    return orjson.dumps(document, option=_JSON_OPTS)
