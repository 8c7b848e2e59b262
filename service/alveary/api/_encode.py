"""Encoders from columnar results to JSON, GeoJSON, Arrow IPC stream and CSV.

All four are built from the same arrays, so a query gives the same numbers in every format.
Missing data is ``null`` in JSON and GeoJSON, a null in Arrow and an empty field in CSV.
The long (Arrow, CSV) form has one row per zone and time step, zone-major.
"""

from __future__ import annotations

import io
from typing import Any

import numpy as np
import orjson
import pyarrow as pa
import pyarrow.csv as pacsv

from alveary import grid
from alveary.query import StatsResult, ZoneResult, format_time

__all__ = ["FORMATS", "MEDIA_TYPES", "encode", "negotiate"]

#: Format name -> media type.
FORMATS: dict[str, str] = {
    "json": "application/json",
    "geojson": "application/geo+json",
    "arrow": "application/vnd.apache.arrow.stream",
    "csv": "text/csv; charset=utf-8",
}
MEDIA_TYPES: dict[str, str] = {
    "application/json": "json",
    "application/geo+json": "geojson",
    "application/vnd.apache.arrow.stream": "arrow",
    "text/csv": "csv",
}
_JSON_OPTS = orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS


def negotiate(f: str | None, accept: str | None, allowed: tuple[str, ...]) -> str:
    """Pick the output format: ``f`` if given, else the best ``Accept`` match, else JSON.

    >>> accept = "text/csv;q=0.5, application/vnd.apache.arrow.stream"
    >>> negotiate(None, accept, ("json", "arrow", "csv"))
    'arrow'
    >>> negotiate("csv", "application/json", ("json", "csv"))
    'csv'
    >>> negotiate(None, "image/png", ("json",))
    'json'
    """
    if f:
        return f
    if not accept:
        return allowed[0]
    best, best_key = None, (0.0, 0)
    for order, item in enumerate(accept.split(",")):
        parts = [p.strip() for p in item.split(";")]
        media = parts[0].lower()
        q = 1.0
        for p in parts[1:]:
            if p.startswith("q="):
                try:
                    q = float(p[2:])
                except ValueError:
                    q = 0.0
        name = MEDIA_TYPES.get(media)
        if name is None and media in ("*/*", "application/*"):
            name = allowed[0]
        if name in allowed and q > 0 and (best is None or (q, -order) > best_key):
            best, best_key = name, (q, -order)
    return best or allowed[0]


def _variables_json(result: ZoneResult | StatsResult) -> dict[str, dict[str, str]]:
    return {v.name: {"units": v.units, "long_name": v.long_name} for v in result.variables.values()}


def _header(result: ZoneResult | StatsResult) -> dict[str, Any]:
    head = {
        "cube": result.cube,
        "version": result.version,
        "level": result.level,
        "variables": _variables_json(result),
        "times": format_time(result.times),
    }
    note = getattr(result, "note", None)
    if note:
        head["note"] = note
    return head


def _zone_columns(result: ZoneResult) -> dict[str, list[Any]]:
    zones = result.zones
    lat, lon = grid.zone_to_point(zones) if zones.size else (np.zeros(0), np.zeros(0))
    cols: dict[str, list[Any]] = {
        "zone": zones.tolist(),
        "zone_text": grid.zone_to_text(zones).tolist() if zones.size else [],
        "lat": np.asarray(lat).tolist(),
        "lon": np.asarray(lon).tolist(),
    }
    for name, values in result.extra.items():
        cols[name] = values.tolist()
    return cols


def _values(result: ZoneResult) -> dict[str, list[list[float]]]:
    return {v: a.T.tolist() for v, a in result.values.items()}


def _zone_json(result: ZoneResult) -> bytes:
    cols = _zone_columns(result)
    values = _values(result)
    names = list(cols)
    vnames = list(values)
    rows = []
    for n in range(result.zones.size):
        row = {k: cols[k][n] for k in names}
        row["values"] = {v: values[v][n] for v in vnames}
        rows.append(row)
    body = _header(result)
    body["kind"] = result.kind
    body["zones"] = rows
    return orjson.dumps(body, option=_JSON_OPTS)


def _zone_geojson(result: ZoneResult) -> bytes:
    cols = _zone_columns(result)
    values = _values(result)
    geometries = grid.zone_to_geojson(np.atleast_1d(result.zones))
    names = list(cols)
    features = []
    for n in range(result.zones.size):
        props = {k: cols[k][n] for k in names}
        for v, series in values.items():
            props[v] = series[n]
        features.append(
            {
                "type": "Feature",
                "id": cols["zone"][n],
                "geometry": geometries[n],
                "properties": props,
            }
        )
    body: dict[str, Any] = {"type": "FeatureCollection", "features": features}
    body.update(_header(result))
    body["kind"] = result.kind
    return orjson.dumps(body, option=_JSON_OPTS)


def _stats_body(result: StatsResult) -> dict[str, Any]:
    body = _header(result)
    body["kind"] = "stats"
    body["zone_count"] = result.zone_count
    body["area_m2"] = result.area_m2
    body["stats"] = {
        v: {k: (a.astype(np.int64) if k == "count" else a).tolist() for k, a in per.items()}
        for v, per in result.stats.items()
    }
    return body


def _stats_geojson(result: StatsResult, geometry: dict[str, Any] | None) -> bytes:
    # ``geometry`` may be a Feature: its geometry is used and its properties are kept,
    # with the answer's members added (an answer member wins over a posted one).
    props: dict[str, Any] = {}
    if geometry is not None and geometry.get("type") == "Feature":
        props = dict(geometry.get("properties") or {})
        geometry = geometry.get("geometry")
    props.update(_stats_body(result))
    feature = {"type": "Feature", "geometry": geometry, "properties": props}
    return orjson.dumps(feature, option=_JSON_OPTS)


def _masked(a: np.ndarray) -> pa.Array:
    a = np.ascontiguousarray(a, dtype=np.float64)
    return pa.array(a, mask=np.isnan(a))


def _zone_table(result: ZoneResult) -> pa.Table:
    n, t = result.zones.size, result.times.size
    time = result.times.astype("datetime64[s]")
    cols: dict[str, pa.Array] = {
        "zone": pa.array(np.repeat(result.zones.astype(np.uint64), t), pa.uint64()),
        "time": pa.array(np.tile(time, n), pa.timestamp("s", tz="UTC")),
    }
    fields = [pa.field("zone", pa.uint64()), pa.field("time", pa.timestamp("s", tz="UTC"))]
    for name, info in result.variables.items():
        cols[name] = _masked(result.values[name].T.reshape(-1))
        meta = {"units": info.units, "long_name": info.long_name}
        fields.append(pa.field(name, pa.float64(), metadata=meta))
    for name, values in result.extra.items():
        arr = pa.array(np.repeat(values, t))
        cols[name] = arr
        units = {"units": "m"} if name == "distance_m" else None
        fields.append(pa.field(name, arr.type, metadata=units))
    schema = pa.schema(fields, metadata=_schema_meta(result))
    return pa.Table.from_arrays(list(cols.values()), schema=schema)


def _stats_table(result: StatsResult) -> pa.Table:
    t = result.times.size
    names = list(result.variables)
    time = result.times.astype("datetime64[s]")
    cols: dict[str, pa.Array] = {
        "time": pa.array(np.tile(time, len(names)), pa.timestamp("s", tz="UTC")),
        "variable": pa.array(np.repeat(np.array(names, dtype=object), t).tolist(), pa.string()),
    }
    for stat in (*result.names, "area_m2"):
        data = np.concatenate([result.stats[v][stat] for v in names]) if names else np.zeros(0)
        if stat == "count":
            cols[stat] = pa.array(data.astype(np.int64))
        else:
            cols[stat] = _masked(data)
    meta = _schema_meta(result)
    meta["zone_count"] = str(result.zone_count)
    meta["area_m2"] = repr(result.area_m2)
    return pa.table(cols).replace_schema_metadata(meta)


def _schema_meta(result: ZoneResult | StatsResult) -> dict[str, str]:
    units = {v.name: v.units for v in result.variables.values()}
    return {
        "cube": result.cube,
        "version": result.version,
        "level": str(result.level),
        "units": orjson.dumps(units).decode(),
        "variables": orjson.dumps(_variables_json(result)).decode(),
        **_note(result),
    }


def _note(result: ZoneResult | StatsResult) -> dict[str, str]:
    note = getattr(result, "note", None)
    return {"note": str(note)} if note else {}


def _arrow(table: pa.Table) -> bytes:
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table, max_chunksize=65_536)
    return bytes(sink.getvalue().to_pybytes())


def _csv(table: pa.Table) -> bytes:
    cols = []
    for i, field in enumerate(table.schema):
        col = table.column(i)
        if pa.types.is_timestamp(field.type):
            text = np.datetime_as_string(col.to_numpy().astype("datetime64[s]"), unit="s")
            col = pa.array(np.char.add(text.astype(str), "Z"), pa.string())
        cols.append(col)
    plain = pa.Table.from_arrays(cols, names=table.column_names)
    out = io.BytesIO()
    pacsv.write_csv(plain, out, pacsv.WriteOptions(quoting_style="needed"))
    return out.getvalue()


def encode(
    result: ZoneResult | StatsResult, fmt: str, *, geometry: dict[str, Any] | None = None
) -> tuple[bytes, str]:
    """Encode a result; returns (body, media type).

    ``geometry`` is the request area, used as the Feature geometry of GeoJSON statistics.
    """
    if fmt == "json":
        if isinstance(result, StatsResult):
            return orjson.dumps(_stats_body(result), option=_JSON_OPTS), FORMATS["json"]
        return _zone_json(result), FORMATS["json"]
    if fmt == "geojson":
        if isinstance(result, StatsResult):
            return _stats_geojson(result, geometry), FORMATS["geojson"]
        return _zone_geojson(result), FORMATS["geojson"]
    table = _stats_table(result) if isinstance(result, StatsResult) else _zone_table(result)
    if fmt == "arrow":
        return _arrow(table), FORMATS["arrow"]
    return _csv(table), FORMATS["csv"]
