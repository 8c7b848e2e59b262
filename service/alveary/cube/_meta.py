"""The cube's metadata: variables (CF attributes), levels, time axis, coverage, grid."""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from alveary import grid
from alveary._errors import CubeFormatError, InvalidInput
from alveary.cube._layout import ChunkShape
from alveary.cube._manifest import Manifest
from alveary.cube._time import parse_time, to_times

__all__ = [
    "FORMAT_NAME",
    "FORMAT_VERSION",
    "GRID_DESCRIPTION",
    "READABLE_FORMATS",
    "TIME_UNITS",
    "CubeMeta",
    "VariableInfo",
    "check_cube_id",
    "parse_time",
    "to_times",
]

FORMAT_NAME = "alveary-cube"
# 2: every version has a manifest, chunks carry a CRC32C checksum, and a version may
# inherit chunks stored under an older version. 1: neither (still read).
FORMAT_VERSION = 2
READABLE_FORMATS = (1, 2)
TIME_UNITS = "seconds since 1970-01-01T00:00:00Z"

GRID_DESCRIPTION: dict[str, Any] = {
    "name": "alveary equal-area hexagonal grid",
    "earth_model": "WGS84 ellipsoid; geodetic latitudes mapped to the authalic sphere",
    "authalic_radius_m": round(grid.R_AUTHALIC, 4),
    "polyhedron": "icosahedron, a vertex at 58.28252559 N 11.25 E, its neighbour at azimuth 0",
    "projection": "Snyder equal-area polyhedral projection (Cartographica 29(1), 1992)",
    "aperture": 4,
    "zones_at_level": "10 * 4**level + 2 (twelve pentagons)",
    "layout": "strips (time, 5, 2n, n) with n = 2**level, apex (time, 2): north, south",
    "zone_id": "(1 << (2*level + 4)) | (region << (2*level + 1)) | (i << level) | j",
}

_ID = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,63}$")
_VAR = re.compile(r"^[A-Za-z][A-Za-z0-9_]{0,63}$")
_RESERVED = {"time", "versions", "current"}
_AGGREGATIONS = ("mean", "sum")


def check_cube_id(cube_id: str) -> str:
    """The cube id if it is valid, else :class:`alveary.InvalidInput`.

    Examples
    --------
    >>> check_cube_id("velmora-irrigation")
    'velmora-irrigation'
    """
    if not isinstance(cube_id, str) or not _ID.match(cube_id):
        raise InvalidInput(
            "cube_id", cube_id, "1-64 characters of A-Z a-z 0-9 _ . -, starting alphanumeric"
        )
    return cube_id


def _float_or_none(x: Any) -> float | None:
    return None if x is None else float(x)


@dataclass(frozen=True)
class VariableInfo:
    """One variable: CF attributes, storage type and no-data handling.

    ``fill_value`` is the stored no-data value (``_FillValue``): always NaN for floating
    types; for integer types the most negative value by default (the largest for
    unsigned types). Integer variables may be
    packed: ``value = stored * scale_factor + add_offset`` (CF conventions, section 8.1).
    ``aggregation`` says how coarser levels combine finer zones: ``"mean"`` (an area
    mean, for intensive quantities) or ``"sum"`` (for counts and totals).

    Examples
    --------
    >>> v = VariableInfo("sm", units="m3 m-3", dtype="int16", scale_factor=1e-4)
    >>> v.fill_value
    -32768
    >>> v.encode(np.array([0.25, np.nan])).tolist()
    [2500, -32768]
    >>> v.decode(np.array([2500, -32768], dtype="int16")).tolist()
    [0.25, nan]
    >>> v["units"]
    'm3 m-3'
    """

    name: str
    units: str = "1"
    long_name: str = ""
    dtype: str = "float32"
    fill_value: float | int | None = None
    scale_factor: float | None = None
    add_offset: float | None = None
    standard_name: str | None = None
    aggregation: str = "mean"
    comment: str | None = None

    def __post_init__(self) -> None:
        if not isinstance(self.name, str) or not _VAR.match(self.name) or self.name in _RESERVED:
            raise InvalidInput(
                "variable",
                self.name,
                "1-64 characters of A-Z a-z 0-9 _, starting with a letter, "
                f"not one of {sorted(_RESERVED)}",
            )
        try:
            dt = np.dtype(self.dtype)
        except TypeError:
            raise InvalidInput(f"{self.name}.dtype", self.dtype, "a numpy dtype") from None
        if dt.kind not in "fiu" or dt.itemsize > 8:
            raise InvalidInput(
                f"{self.name}.dtype", self.dtype, "float32, float64 or an integer type"
            )
        object.__setattr__(self, "dtype", dt.name)
        if self.aggregation not in _AGGREGATIONS:
            raise InvalidInput(f"{self.name}.aggregation", self.aggregation, str(_AGGREGATIONS))
        if self.fill_value is None:
            fill: float | int = math.nan if dt.kind == "f" else int(np.iinfo(dt).min)
            if dt.kind == "u":
                fill = int(np.iinfo(dt).max)
            object.__setattr__(self, "fill_value", fill)
        elif dt.kind in "iu":
            object.__setattr__(self, "fill_value", int(self.fill_value))
        elif not math.isnan(float(self.fill_value)):
            raise InvalidInput(
                f"{self.name}._FillValue", self.fill_value, "NaN for floating-point variables"
            )
        else:
            object.__setattr__(self, "fill_value", math.nan)
        if dt.kind == "f" and (self.scale_factor is not None or self.add_offset is not None):
            raise InvalidInput(
                f"{self.name}.scale_factor", self.scale_factor, "packing only for integer dtypes"
            )
        object.__setattr__(self, "scale_factor", _float_or_none(self.scale_factor))
        object.__setattr__(self, "add_offset", _float_or_none(self.add_offset))

    def __getitem__(self, key: str) -> Any:
        return getattr(self, key)

    @property
    def packed(self) -> bool:
        return self.scale_factor is not None or self.add_offset is not None

    @property
    def itemsize(self) -> int:
        return np.dtype(self.dtype).itemsize

    def _fill_is_nan(self) -> bool:
        return isinstance(self.fill_value, float) and math.isnan(self.fill_value)

    def encode(self, values: np.ndarray) -> np.ndarray:
        """Physical values (float, NaN = no data) to the stored representation."""
        v = np.asarray(values, dtype=np.float64)
        dt = np.dtype(self.dtype)
        missing = ~np.isfinite(v)
        if dt.kind == "f":
            out = v.astype(dt)
            if not self._fill_is_nan():
                out[missing] = self.fill_value
            return out
        scale = 1.0 if self.scale_factor is None else self.scale_factor
        offset = 0.0 if self.add_offset is None else self.add_offset
        info = np.iinfo(dt)
        lo, hi = float(info.min), float(info.max)
        if self.fill_value == info.min:
            lo += 1
        elif self.fill_value == info.max:
            hi -= 1
        raw = np.rint((np.where(missing, 0.0, v) - offset) / scale)
        out = np.clip(raw, lo, hi).astype(dt)
        out[missing] = self.fill_value
        return out

    @property
    def value_dtype(self) -> np.dtype[np.floating[Any]]:
        """The type that holds this variable's physical values exactly: float32 for an
        unpacked float32 variable (half the memory of float64), else float64.

        >>> VariableInfo("t").value_dtype, VariableInfo("sm", dtype="int16").value_dtype
        (dtype('float32'), dtype('float64'))
        """
        packed = self.scale_factor is not None or self.add_offset is not None
        if np.dtype(self.dtype) == np.float32 and not packed:
            return np.dtype(np.float32)
        return np.dtype(np.float64)

    def decode(self, raw: np.ndarray) -> np.ndarray:
        """Stored values to float64 physical values, NaN where no data."""
        raw = np.asarray(raw)
        out = raw.astype(np.float64)
        if raw.dtype.kind == "f" and self.scale_factor is None and self.add_offset is None:
            if self._fill_is_nan():
                return out  # NaN already means no data
        if self._fill_is_nan():
            missing = np.isnan(out)
        else:
            missing = raw == self.fill_value
            if raw.dtype.kind == "f":
                missing |= np.isnan(out)
        if self.scale_factor is not None:
            out *= self.scale_factor
        if self.add_offset is not None:
            out += self.add_offset
        out[missing] = np.nan
        return out

    def cf_attrs(self) -> dict[str, Any]:
        """CF attributes of the stored arrays.

        ``_FillValue`` is given for integer types (equal to zarr's fill_value); floating
        types store no-data as NaN, which needs no attribute.
        """
        attrs: dict[str, Any] = {"units": self.units, "long_name": self.long_name or self.name}
        if not self._fill_is_nan():
            attrs["_FillValue"] = self.fill_value
        if self.standard_name:
            attrs["standard_name"] = self.standard_name
        if self.scale_factor is not None:
            attrs["scale_factor"] = self.scale_factor
        if self.add_offset is not None:
            attrs["add_offset"] = self.add_offset
        attrs["cell_methods"] = f"area: {self.aggregation}"
        if self.comment:
            attrs["comment"] = self.comment
        return attrs

    def to_json(self) -> dict[str, Any]:
        fill = "NaN" if self._fill_is_nan() else self.fill_value
        out: dict[str, Any] = {
            "units": self.units,
            "long_name": self.long_name,
            "dtype": self.dtype,
            "_FillValue": fill,
            "aggregation": self.aggregation,
        }
        for key in ("scale_factor", "add_offset", "standard_name", "comment"):
            if getattr(self, key) is not None:
                out[key] = getattr(self, key)
        return out

    @classmethod
    def from_json(cls, name: str, data: dict[str, Any]) -> VariableInfo:
        fill = data.get("_FillValue")
        if fill == "NaN":
            fill = math.nan
        return cls(
            name=name,
            units=data.get("units", "1"),
            long_name=data.get("long_name", ""),
            dtype=data.get("dtype", "float32"),
            fill_value=fill,
            scale_factor=data.get("scale_factor"),
            add_offset=data.get("add_offset"),
            standard_name=data.get("standard_name"),
            aggregation=data.get("aggregation", "mean"),
            comment=data.get("comment"),
        )

    @classmethod
    def from_any(cls, name: str, spec: Any) -> VariableInfo:
        """Accept a VariableInfo, a dict of its fields (CF names allowed) or None."""
        if isinstance(spec, VariableInfo):
            return spec if spec.name == name else cls(**{**spec.__dict__, "name": name})
        if spec is None:
            return cls(name)
        if isinstance(spec, dict):
            data = dict(spec)
            if "_FillValue" in data:
                data["fill_value"] = data.pop("_FillValue")
            data.pop("name", None)
            try:
                return cls(name=name, **data)
            except TypeError as exc:
                raise InvalidInput(f"variables[{name!r}]", sorted(spec), str(exc)) from None
        raise InvalidInput(f"variables[{name!r}]", type(spec).__name__, "a dict or VariableInfo")


@dataclass(frozen=True)
class CubeMeta:
    """Everything the root group of a cube version says about the cube."""

    id: str
    title: str
    levels: tuple[int, ...]
    times: np.ndarray = field(repr=False)
    variables: dict[str, VariableInfo]
    chunks: dict[int, ChunkShape]
    shards: dict[int, tuple[int, int, int] | None]
    coverage: tuple[float, float, float, float]
    version: str
    created: str
    summary: str = ""
    source: str = ""
    history: str = ""
    extra: dict[str, Any] = field(default_factory=dict)
    manifest: Manifest | None = field(default=None, repr=False)
    #: variable -> level -> (min, max) of the values stored, recorded at build time;
    #: empty for versions built before ranges were recorded.
    ranges: dict[str, dict[int, tuple[float, float]]] = field(default_factory=dict)

    def value_range(self, variable: str, level: int) -> tuple[float, float] | None:
        """(min, max) of the values of ``variable`` stored at ``level``, if recorded.

        None when the version does not record it (built before ranges were recorded) or
        holds no value of the variable at that level.
        """
        found = self.ranges.get(variable, {}).get(int(level))
        return None if found is None else (float(found[0]), float(found[1]))

    def written(self, array: str, coords: tuple[int, ...]) -> bool | None:
        """Whether this version wrote the chunk ``coords`` of ``array`` (``"sm/6/strips"``).

        ``True``: the chunk holds data, so a failure to read it is a fault of the store.
        ``False``: it was never written (no data). ``None``: unknown, the version was
        written before manifests (format 1). Pure: no I/O.
        """
        if self.manifest is None:
            return None
        return self.manifest.written(array, coords)

    def to_attrs(self) -> dict[str, Any]:
        """Root-group attributes: CF/ACDD globals plus the ``alveary`` block."""
        w, s, e, n = self.coverage
        t0 = str(self.times[0]) + "Z"
        t1 = str(self.times[-1]) + "Z"
        block = {
            "format": FORMAT_NAME,
            "format_version": FORMAT_VERSION,
            "id": self.id,
            "title": self.title,
            "version": self.version,
            "created": self.created,
            "levels": list(self.levels),
            "variables": {k: v.to_json() for k, v in self.variables.items()},
            "time": {
                "units": TIME_UNITS,
                "calendar": "proleptic_gregorian",
                "count": int(self.times.size),
                "first": t0,
                "last": t1,
            },
            "coverage": {"bbox": [w, s, e, n], "crs": "EPSG:4326"},
            "chunks": {
                str(lv): {"time": c.time, "rows": c.rows, "cols": c.cols}
                for lv, c in self.chunks.items()
            },
            "shards": {
                str(lv): (None if sh is None else list(sh)) for lv, sh in self.shards.items()
            },
            "grid": GRID_DESCRIPTION,
            "extra": self.extra,
            "value_ranges": {
                name: {str(lv): [lo, hi] for lv, (lo, hi) in sorted(per.items())}
                for name, per in self.ranges.items()
            },
        }
        return {
            "Conventions": "CF-1.10, ACDD-1.3",
            "title": self.title,
            "id": self.id,
            "summary": self.summary,
            "source": self.source,
            "history": self.history,
            "date_created": self.created,
            "geospatial_lon_min": w,
            "geospatial_lat_min": s,
            "geospatial_lon_max": e,
            "geospatial_lat_max": n,
            "time_coverage_start": t0,
            "time_coverage_end": t1,
            "alveary": block,
        }

    @classmethod
    def from_attrs(cls, attrs: dict[str, Any], times: np.ndarray) -> CubeMeta:
        block = attrs.get("alveary")
        if not isinstance(block, dict) or block.get("format") != FORMAT_NAME:
            raise CubeFormatError("store", None, f"a root group with an {FORMAT_NAME!r} block")
        fv = block.get("format_version")
        if fv not in READABLE_FORMATS:
            raise CubeFormatError("format_version", fv, " or ".join(map(str, READABLE_FORMATS)))
        try:
            chunks = {
                int(k): ChunkShape(int(c["time"]), int(c["rows"]), int(c["cols"]))
                for k, c in block["chunks"].items()
            }
            shards: dict[int, tuple[int, int, int] | None] = {
                int(k): (None if v is None else (int(v[0]), int(v[1]), int(v[2])))
                for k, v in block.get("shards", {}).items()
            }
            w, s, e, n = (float(x) for x in block["coverage"]["bbox"])
            variables = {k: VariableInfo.from_json(k, v) for k, v in block["variables"].items()}
            return cls(
                id=str(block["id"]),
                title=str(block.get("title", block["id"])),
                levels=tuple(sorted(int(x) for x in block["levels"])),
                times=times,
                variables=variables,
                chunks=chunks,
                shards=shards,
                coverage=(w, s, e, n),
                version=block["version"],
                created=block.get("created", ""),
                summary=attrs.get("summary", ""),
                source=attrs.get("source", ""),
                history=attrs.get("history", ""),
                extra=block.get("extra", {}),
                ranges=_read_ranges(block.get("value_ranges", {})),
            )
        except (KeyError, TypeError, ValueError) as exc:
            raise CubeFormatError("metadata", str(exc), "a complete alveary block") from None


def _read_ranges(data: Any) -> dict[str, dict[int, tuple[float, float]]]:
    """The ``value_ranges`` block: {variable: {level: [min, max]}} (absent: empty)."""
    if not isinstance(data, dict):
        raise CubeFormatError("value_ranges", type(data).__name__, "an object")
    out: dict[str, dict[int, tuple[float, float]]] = {}
    for name, per in data.items():
        out[str(name)] = {int(lv): (float(v[0]), float(v[1])) for lv, v in per.items()}
    return out
