"""The open stage of a build: sources classified, opened, their time steps and footprints."""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from alveary._errors import IngestError
from alveary.cube import VariableInfo
from alveary.ingest._points import PointBins, bin_points
from alveary.ingest._raster import RasterSource, open_geotiffs, open_xarray_sources
from alveary.ingest._request import BuildRequest

__all__ = ["Sources", "footprint_text", "open_sources", "step_map", "union_bbox"]

_TIFF = (".tif", ".tiff", ".gtiff")
_NETCDF = (".nc", ".nc4", ".netcdf", ".cdf", ".h5", ".hdf5")
_TABLE = (".csv", ".parquet", ".pq")
BBox = tuple[float, float, float, float]


def _classify(path: str) -> str:
    p = Path(path)
    low = path.lower().rstrip("/")
    if low.endswith(".zarr") or (
        p.is_dir() and ((p / "zarr.json").exists() or (p / ".zgroup").exists())
    ):
        kind = "xarray"
    elif p.suffix.lower() in _TIFF:
        kind = "gtiff"
    elif p.suffix.lower() in _NETCDF:
        kind = "xarray"
    elif p.suffix.lower() in _TABLE:
        kind = "points"
    else:
        raise IngestError(
            "source", path, "a GeoTIFF (.tif), NetCDF (.nc), Zarr (.zarr), CSV or Parquet file"
        )
    if not p.exists():
        raise IngestError("source", path, "an existing, readable file (unreadable file)")
    if p.is_file() and not os.access(p, os.R_OK):
        raise IngestError("source", path, "a readable file (unreadable file)")
    return kind


def step_map(times: NDArray[np.datetime64], own: NDArray[np.datetime64]) -> NDArray[np.int64]:
    """For each cube step, the index of the same instant in ``own`` (-1: none).

    Examples
    --------
    >>> t = np.array(["2024-01-01", "2024-01-02", "2024-01-03"], dtype="datetime64[s]")
    >>> step_map(t, t[1:]).tolist()
    [-1, 0, 1]
    """
    idx = np.clip(np.searchsorted(own, times), 0, own.size - 1)
    return np.where(own[idx] == times, idx, -1).astype(np.int64)


def union_bbox(boxes: list[BBox]) -> BBox:
    """The lon/lat box holding every box (west > east: it crosses 180°)."""
    ws, ss, es, ns = zip(*boxes, strict=True)
    s, n = max(-90.0, min(ss)), min(90.0, max(ns))
    if any(w > e for w, e in zip(ws, es, strict=True)) or (max(es) - min(ws)) >= 359.0:
        if len(boxes) == 1:
            return (ws[0], s, es[0], n)
        return (-180.0, s, 180.0, n)
    return (max(-180.0, min(ws)), s, min(180.0, max(es)), n)


def footprint_text(box: BBox) -> str:
    """A footprint as people read it.

    Examples
    --------
    >>> footprint_text((-81.0, 0.0, -80.99991, 0.00009))
    'west -81.0, south 0.0, east -80.99991, north 9e-05 (degrees)'
    """
    w, s, e, n = (float(f"{v:.8g}") for v in box)
    return f"west {w}, south {s}, east {e}, north {n} (degrees)"


def _check_footprint(src: RasterSource) -> BBox:
    box = src.lonlat_bounds()
    w, s, e, n = box
    ok = all(math.isfinite(v) for v in box) and -90.0 <= s < n <= 90.0 and w != e
    ok = ok and -180.0 <= w <= 180.0 and -180.0 <= e <= 180.0
    if not ok:
        raise IngestError(
            "source",
            src.steps[0][0],
            message=(
                f"the footprint of {src.steps[0][0]} on the globe is degenerate: "
                f"{footprint_text(box)}. Its CRS is probably wrong (for example a raster "
                "on a degree grid labelled with a projected CRS such as UTM)."
            ),
        )
    return box


@dataclass(frozen=True, eq=False)
class Sources:
    """Every variable a build takes, with the time steps and footprints of its sources."""

    paths: tuple[str, ...]
    rasters: dict[str, RasterSource]
    points: dict[str, PointBins]
    times: NDArray[np.datetime64]
    variables: dict[str, VariableInfo]
    footprints: dict[str, BBox]

    def coverage(self) -> BBox:
        return union_bbox(list(self.footprints.values()))

    def defined(self, name: str, times: NDArray[np.datetime64]) -> NDArray[np.bool_]:
        """The cube steps at which this build gives variable ``name`` its values."""
        base = name.removesuffix("_count") if name not in self.points else name
        if name in self.rasters:
            own = self.rasters[name].times
        elif base in self.points:
            own = self.points[base].times
        else:
            return np.zeros(times.size, dtype=bool)
        return np.asarray(step_map(times, own) >= 0)


def _variable_info(src: RasterSource) -> VariableInfo:
    kw: dict[str, Any] = {"units": src.units or "1", "long_name": src.long_name or src.name}
    if src.packing:
        kw.update(src.packing)
    return VariableInfo.from_any(src.name, kw)


def _open_kinds(
    kinds: dict[str, list[str]], req: BuildRequest
) -> tuple[dict[str, RasterSource], dict[str, PointBins]]:
    names = list(req.variables) if req.variables else None
    rasters: dict[str, RasterSource] = {}
    if "gtiff" in kinds:
        rasters.update(open_geotiffs(kinds["gtiff"], names, req.time))
    if "xarray" in kinds:
        for k, v in open_xarray_sources(kinds["xarray"], names, req.time).items():
            if k in rasters:
                raise IngestError("variable", k, "a variable coming from one kind of source")
            rasters[k] = v
    points: dict[str, PointBins] = {}
    if "points" in kinds:
        for k, p in bin_points(kinds["points"], names, req.level, req.time_step).items():
            if k in rasters or f"{k}_count" in rasters:
                raise IngestError("variable", k, "a variable coming from one kind of source")
            points[k] = p
    if names:
        found = set(rasters) | set(points)
        missing = [n for n in names if n not in found]
        if missing and not ("gtiff" in kinds and len(names) == 1):
            raise IngestError("variable", missing[0], f"a variable in the sources: {sorted(found)}")
    return rasters, points


def open_sources(req: BuildRequest) -> Sources:
    """Open every source (headers and point tables; no pixel data yet)."""
    kinds: dict[str, list[str]] = {}
    for src in req.sources:
        kinds.setdefault(_classify(src), []).append(src)
    rasters, points = _open_kinds(kinds, req)
    if not rasters and not points:
        raise IngestError("sources", list(req.sources), "at least one variable")
    all_times = [s.times for s in rasters.values()] + [p.times for p in points.values()]
    times = np.unique(np.concatenate(all_times)).astype("datetime64[s]")
    variables = {k: _variable_info(s) for k, s in rasters.items()}
    for k in points:
        variables[k] = VariableInfo(k, long_name=f"mean of {k} per zone")
        variables[f"{k}_count"] = VariableInfo(
            f"{k}_count", units="1", long_name=f"number of {k} points", aggregation="sum"
        )
    footprints = {k: _check_footprint(s) for k, s in rasters.items()}
    footprints.update({k: p.bbox for k, p in points.items()})
    return Sources(req.sources, rasters, points, times, variables, footprints)
