"""Encoders from columnar results to JSON, GeoJSON, Arrow IPC stream and CSV.

All four are built from the same arrays, so a query gives the same numbers in every format.
Missing data is ``null`` in JSON and GeoJSON, a null in Arrow and an empty field in CSV.
The long (Arrow, CSV) form has one row per zone and time step, zone-major.

Zone answers are encoded block by block (:func:`encode_blocks`): a block of zones at a
time, so that a large answer can be sent as it is made and the memory it takes while
encoding is that of one block, whatever the size of the answer. Joining the blocks gives
exactly the document :func:`encode` returns.

Numbers are printed as the shortest decimal that reads back to the stored value: a
variable stored as float32 as the shortest float32 decimal (``296.18756``), a packed
integer variable (``stored * scale_factor + add_offset``) with the fewest decimals that
give back the stored integer (``0.2552``), anything else as the shortest float64 decimal.
Arrow keeps the stored type (float32 stays float32; packed and float64 are float64).
"""

from __future__ import annotations

import functools
import io
import math
from collections.abc import Iterator
from typing import Any

import numpy as np
import orjson
import pyarrow as pa
import pyarrow.csv as pacsv

from alveary import grid
from alveary.query import ResultVariable, StatsResult, TimeAxis, ZoneResult, time_axis_json

__all__ = ["BLOCK_ROWS", "FORMATS", "MEDIA_TYPES", "encode", "encode_blocks", "negotiate"]

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

#: (zone, time) rows encoded per block (a block holds whole zones: at least one).
BLOCK_ROWS = 32_768


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


# -- numbers ---------------------------------------------------------------------------
def _packed(info: ResultVariable) -> bool:
    return info.scale_factor is not None or info.add_offset is not None


def printable(values: np.ndarray, info: ResultVariable) -> np.ndarray:
    """Values whose shortest ``repr`` is the shortest decimal that reads back to what is
    stored: float32 for a float32 variable, packed values rounded to the fewest decimals
    that give back the stored integers, float64 otherwise. NaN stays NaN.

    >>> printable(np.array([296.18756103515625]), ResultVariable("t", dtype="float32"))
    array([296.18756], dtype=float32)
    >>> sm = ResultVariable("sm", dtype="int16", scale_factor=1e-4)
    >>> printable(np.array([2552 * 1e-4, np.nan]), sm).tolist()
    [0.2552, nan]
    """
    a = np.asarray(values, dtype=np.float64)
    if _packed(info):
        return _round_packed(a, info)
    if info.dtype == "float32":
        return a.astype(np.float32)
    return a


def _round_packed(a: np.ndarray, info: ResultVariable) -> np.ndarray:
    scale = 1.0 if info.scale_factor is None else float(info.scale_factor)
    offset = 0.0 if info.add_offset is None else float(info.add_offset)
    if scale == 0.0 or not math.isfinite(scale):
        return a
    with np.errstate(invalid="ignore"):
        stored = np.round((a - offset) / scale)
        first = max(0, math.ceil(-math.log10(abs(scale))))
        for decimals in range(first, 18):
            out = np.round(a, decimals)
            back = np.round((out - offset) / scale)
            if np.array_equal(back, stored, equal_nan=True):
                return out
    return a


def _arrow_type(info: ResultVariable) -> pa.DataType:
    return pa.float32() if info.dtype == "float32" and not _packed(info) else pa.float64()


def _masked(a: np.ndarray, type_: pa.DataType | None = None) -> pa.Array:
    a = np.ascontiguousarray(a)
    if type_ is None or type_ == pa.float64():
        a = a.astype(np.float64, copy=False)
        return pa.array(a, mask=np.isnan(a), type=pa.float64())
    return pa.array(a.astype(np.float32), mask=np.isnan(a), type=pa.float32())


# -- shared pieces ---------------------------------------------------------------------
def _variables_json(result: ZoneResult | StatsResult) -> dict[str, dict[str, str]]:
    return {v.name: {"units": v.units, "long_name": v.long_name} for v in result.variables.values()}


def _header(result: ZoneResult | StatsResult) -> dict[str, Any]:
    body: dict[str, Any] = {
        "cube": result.cube,
        "version": result.version,
        "level": result.level,
        "variables": _variables_json(result),
    }
    # times; with calendar periods also time_bounds and time_steps; for a climatology
    # the keys ("month" or "dayofyear") instead of times
    body.update(time_axis_json(result.times, result.axis))
    if result.analysis:
        body["analysis"] = result.analysis
    note = getattr(result, "note", None)
    if note:
        body["note"] = note
    return body


def _row_count(result: ZoneResult | StatsResult) -> int:
    """Rows of the time axis: time steps, periods, or climatology keys."""
    axis = result.axis
    if axis is not None and axis.keys is not None:
        return int(axis.keys.size)
    return int(result.times.size)


def _time_axis_arrays(times: np.ndarray, axis: TimeAxis | None) -> dict[str, pa.Array]:
    """The long form's time columns over one run of the axis: ``time``; for periods also
    ``time_end`` and ``time_steps``; for a climatology its key instead of ``time``."""
    if axis is not None and axis.keys is not None and axis.key is not None:
        return {axis.key: pa.array(axis.keys.astype(np.int64), pa.int64())}
    stamp = pa.timestamp("s", tz="UTC")
    cols = {"time": pa.array(times.astype("datetime64[s]"), stamp)}
    if axis is not None and axis.bounds is not None:
        cols["time_end"] = pa.array(axis.bounds[:, 1].astype("datetime64[s]"), stamp)
    if axis is not None and axis.steps is not None:
        cols["time_steps"] = pa.array(axis.steps.astype(np.int64), pa.int64())
    return cols


def _tiled(arr: pa.Array, n: int) -> pa.Array:
    """``arr`` repeated ``n`` times end to end (one numpy tile: a chunk per repeat made
    a long answer's time column cost more than all its values).

    >>> _tiled(pa.array([1, 2], pa.int64()), 3).to_pylist()
    [1, 2, 1, 2, 1, 2]
    """
    if not n:
        return arr[:0]
    return pa.array(np.tile(arr.to_numpy(zero_copy_only=False), n), arr.type)


def _blocks(result: ZoneResult, block_rows: int) -> Iterator[slice]:
    n = int(result.zones.size)
    per = max(1, block_rows // max(1, _row_count(result)))
    for start in range(0, n, per):
        yield slice(start, min(n, start + per))


def _zone_columns(result: ZoneResult, sel: slice) -> dict[str, list[Any]]:
    zones = result.zones[sel]
    if zones.size == 1:  # a point's answer: plain numbers, no arrays
        zone = int(zones[0])
        lat1, lon1 = grid.zone_to_point(zone)
        one: dict[str, list[Any]] = {
            "zone": [zone],
            "zone_text": [str(grid.zone_to_text(zone))],
            "lat": [float(lat1)],
            "lon": [float(lon1)],
        }
        for name, values in result.extra.items():
            one[name] = values[sel].tolist()
        return one
    lat, lon = grid.zone_to_point(zones) if zones.size else (np.zeros(0), np.zeros(0))
    cols: dict[str, list[Any]] = {
        "zone": zones.tolist(),
        "zone_text": grid.zone_to_text(zones).tolist() if zones.size else [],
        "lat": np.asarray(lat).tolist(),
        "lon": np.asarray(lon).tolist(),
    }
    for name, values in result.extra.items():
        cols[name] = values[sel].tolist()
    return cols


def _series(result: ZoneResult, sel: slice) -> dict[str, np.ndarray]:
    """variable -> (zones in block, time) C-contiguous, in the printable type."""
    out = {}
    for name, a in result.values.items():
        info = result.variables.get(name) or ResultVariable(name)
        out[name] = np.ascontiguousarray(printable(a[:, sel], info).T)
    return out


def _join(body: bytes, first: bool) -> bytes:
    return body if first or not body else b"," + body


# -- JSON and GeoJSON ------------------------------------------------------------------
def _json_rows(result: ZoneResult, sel: slice) -> bytes:
    cols = _zone_columns(result, sel)
    series = _series(result, sel)
    names = list(cols)
    rows = []
    for n in range(sel.stop - sel.start):
        row: dict[str, Any] = {k: cols[k][n] for k in names}
        row["values"] = {v: a[n] for v, a in series.items()}
        rows.append(row)
    return orjson.dumps(rows, option=_JSON_OPTS)[1:-1]


def _geojson_rows(result: ZoneResult, sel: slice) -> bytes:
    cols = _zone_columns(result, sel)
    series = _series(result, sel)
    geometries = grid.zone_to_geojson(np.atleast_1d(result.zones[sel]))
    names = list(cols)
    features = []
    for n in range(sel.stop - sel.start):
        props: dict[str, Any] = {k: cols[k][n] for k in names}
        for v, a in series.items():
            props[v] = a[n]
        feature = {"type": "Feature", "id": cols["zone"][n], "geometry": geometries[n]}
        feature["properties"] = props
        features.append(feature)
    return orjson.dumps(features, option=_JSON_OPTS)[1:-1]


def _zone_json_blocks(result: ZoneResult, block_rows: int) -> Iterator[bytes]:
    yield _zone_json_head(result)
    for k, sel in enumerate(_blocks(result, block_rows)):
        yield _join(_json_rows(result, sel), k == 0)
    yield b"]}"


def _zone_json_head(result: ZoneResult) -> bytes:
    """The JSON answer up to its zones. A plain answer's head depends on the cube
    version, level, variables and time steps alone: made once for each of those."""
    note = getattr(result, "note", None)
    if result.axis is None and not result.analysis and not note and result.times.size <= 64:
        variables = tuple((v.name, v.units, v.long_name) for v in result.variables.values())
        times = np.asarray(result.times).astype("datetime64[s]").tobytes()
        return _plain_head(result.cube, result.version, result.level, variables, result.kind, times)
    head = _header(result)
    head["kind"] = result.kind
    return orjson.dumps(head, option=_JSON_OPTS)[:-1] + b',"zones":['


@functools.lru_cache(maxsize=1024)
def _plain_head(
    cube: str,
    version: str,
    level: int,
    variables: tuple[tuple[str, str, str], ...],
    kind: str,
    times: bytes,
) -> bytes:
    head: dict[str, Any] = {"cube": cube, "version": version, "level": level}
    head["variables"] = {name: {"units": u, "long_name": ln} for name, u, ln in variables}
    head.update(time_axis_json(np.frombuffer(times, dtype="datetime64[s]"), None))
    head["kind"] = kind
    return orjson.dumps(head, option=_JSON_OPTS)[:-1] + b',"zones":['


def _zone_geojson_blocks(result: ZoneResult, block_rows: int) -> Iterator[bytes]:
    yield b'{"type":"FeatureCollection","features":['
    for k, sel in enumerate(_blocks(result, block_rows)):
        yield _join(_geojson_rows(result, sel), k == 0)
    tail = _header(result)
    tail["kind"] = result.kind
    yield b"]," + orjson.dumps(tail, option=_JSON_OPTS)[1:]


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


# -- Arrow and CSV (long form) ---------------------------------------------------------
def _zone_schema(result: ZoneResult) -> pa.Schema:
    fields = [pa.field("zone", pa.uint64())]
    axis = _time_axis_arrays(result.times, result.axis)
    fields += [pa.field(name, col.type) for name, col in axis.items()]
    for name, info in result.variables.items():
        meta = {"units": info.units, "long_name": info.long_name}
        fields.append(pa.field(name, _arrow_type(info), metadata=meta))
    for name, values in result.extra.items():
        units = {"units": "m"} if name == "distance_m" else None
        fields.append(pa.field(name, pa.from_numpy_dtype(values.dtype), metadata=units))
    return pa.schema(fields, metadata=_schema_meta(result))


def _zone_batch(result: ZoneResult, sel: slice, schema: pa.Schema) -> pa.RecordBatch:
    zones = result.zones[sel]
    n, t = zones.size, _row_count(result)
    cols: list[pa.Array] = [pa.array(np.repeat(zones.astype(np.uint64), t), pa.uint64())]
    cols += [_tiled(a, n) for a in _time_axis_arrays(result.times, result.axis).values()]
    for name, info in result.variables.items():
        block = result.values[name][:, sel].T.reshape(-1)
        cols.append(_masked(block, _arrow_type(info)))
    for values in result.extra.values():
        cols.append(pa.array(np.repeat(values[sel], t)))
    return pa.RecordBatch.from_arrays(cols, schema=schema)


def _zone_arrow_blocks(result: ZoneResult, block_rows: int) -> Iterator[bytes]:
    schema = _zone_schema(result)
    sink = io.BytesIO()
    with pa.ipc.new_stream(sink, schema) as writer:
        for sel in _blocks(result, block_rows):
            writer.write_batch(_zone_batch(result, sel, schema))
            yield _drain(sink)
    yield _drain(sink)


def _drain(sink: io.BytesIO) -> bytes:
    data = sink.getvalue()
    sink.seek(0)
    sink.truncate()
    return data


def _time_text(times: np.ndarray) -> np.ndarray:
    text = np.datetime_as_string(times.astype("datetime64[s]"), unit="s")
    return np.char.add(text.astype(str), "Z")


def _zone_csv_blocks(result: ZoneResult, block_rows: int) -> Iterator[bytes]:
    t = _row_count(result)
    axis = {
        name: pa.array(_time_text(a.to_numpy()), pa.string())
        if pa.types.is_timestamp(a.type)
        else a
        for name, a in _time_axis_arrays(result.times, result.axis).items()
    }
    names = ["zone", "zone_text", "lat", "lon", *axis]
    names += [*result.variables, *result.extra]
    options = pacsv.WriteOptions(quoting_style="needed", include_header=True)
    if result.zones.size == 0:
        empty = [pa.array([], pa.string()) for _ in names]
        yield _csv_bytes(pa.Table.from_arrays(empty, names=names), options)
        return
    for k, sel in enumerate(_blocks(result, block_rows)):
        zones = result.zones[sel]
        n = zones.size
        lat, lon = grid.zone_to_point(zones)
        repeat = pa.array(np.repeat(np.arange(n), t))
        cols: list[pa.Array] = [
            pa.array(np.repeat(zones.astype(np.uint64), t), pa.uint64()),
            pa.array(np.asarray(grid.zone_to_text(zones)), pa.string()).take(repeat),
            pa.array(np.repeat(np.asarray(lat, dtype=np.float64), t)),
            pa.array(np.repeat(np.asarray(lon, dtype=np.float64), t)),
            *(_tiled(a, n) for a in axis.values()),
        ]
        for name, info in result.variables.items():
            block = printable(result.values[name][:, sel], info).T.reshape(-1)
            cols.append(_masked(block, _arrow_type(info)))
        for values in result.extra.values():
            cols.append(pa.array(np.repeat(values[sel], t)))
        table = pa.Table.from_arrays(cols, names=names)
        yield _csv_bytes(table, options if k == 0 else _NO_HEADER)


_NO_HEADER = pacsv.WriteOptions(quoting_style="needed", include_header=False)


def _csv_bytes(table: pa.Table, options: pacsv.WriteOptions) -> bytes:
    out = io.BytesIO()
    pacsv.write_csv(table, out, options)
    return out.getvalue()


def _stats_table(result: StatsResult) -> pa.Table:
    t = _row_count(result)
    names = list(result.variables)
    axis = _time_axis_arrays(result.times, result.axis)
    cols: dict[str, pa.Array] = {name: _tiled(a, len(names)) for name, a in axis.items()}
    cols["variable"] = pa.array(np.repeat(np.array(names, dtype=object), t).tolist(), pa.string())
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
    meta = {
        "cube": result.cube,
        "version": result.version,
        "level": str(result.level),
        "units": orjson.dumps(units).decode(),
        "variables": orjson.dumps(_variables_json(result)).decode(),
        **_note(result),
    }
    if result.analysis:
        meta["analysis"] = orjson.dumps(result.analysis).decode()
    return meta


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
            col = pa.array(_time_text(col.to_numpy()), pa.string())
        cols.append(col)
    plain = pa.Table.from_arrays(cols, names=table.column_names)
    return _csv_bytes(plain, pacsv.WriteOptions(quoting_style="needed"))


# -- entry points ----------------------------------------------------------------------
def encode_blocks(
    result: ZoneResult | StatsResult,
    fmt: str,
    *,
    geometry: dict[str, Any] | None = None,
    block_rows: int = BLOCK_ROWS,
) -> tuple[Iterator[bytes], str]:
    """The encoded answer as an iterator of byte blocks, and its media type.

    Zone answers are encoded ``block_rows`` (zone, time) rows at a time, lazily: each
    block is made when the iterator is advanced. Statistics answers are one block.
    """
    if isinstance(result, StatsResult):
        body, media = _encode_stats(result, fmt, geometry)
        return iter((body,)), media
    if fmt == "json":
        return _zone_json_blocks(result, block_rows), FORMATS["json"]
    if fmt == "geojson":
        return _zone_geojson_blocks(result, block_rows), FORMATS["geojson"]
    if fmt == "arrow":
        return _zone_arrow_blocks(result, block_rows), FORMATS["arrow"]
    return _zone_csv_blocks(result, block_rows), FORMATS["csv"]


def _encode_stats(
    result: StatsResult, fmt: str, geometry: dict[str, Any] | None
) -> tuple[bytes, str]:
    if fmt == "json":
        return orjson.dumps(_stats_body(result), option=_JSON_OPTS), FORMATS["json"]
    if fmt == "geojson":
        return _stats_geojson(result, geometry), FORMATS["geojson"]
    if fmt == "arrow":
        return _arrow(_stats_table(result)), FORMATS["arrow"]
    return _csv(_stats_table(result)), FORMATS["csv"]


def encode(
    result: ZoneResult | StatsResult, fmt: str, *, geometry: dict[str, Any] | None = None
) -> tuple[bytes, str]:
    """Encode a result whole; returns (body, media type).

    ``geometry`` is the request area, used as the Feature geometry of GeoJSON statistics.
    """
    blocks, media = encode_blocks(result, fmt, geometry=geometry)
    return b"".join(blocks), media
