"""Raster sources: GeoTIFF (rasterio) and NetCDF or Zarr (xarray), any CRS pyproj knows.

A :class:`RasterSource` describes one variable: the files and time steps it comes from,
its CRS and pixel-centre coordinates, and its no-data value. It is small and picklable;
each worker opens the files itself and reads only the window a chunk needs.
"""

from __future__ import annotations

import re
import threading
import warnings
from dataclasses import dataclass, field
from datetime import datetime
from functools import lru_cache
from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray
from pyproj import CRS, Transformer

from alveary._errors import IngestError

__all__ = ["RasterSource", "open_geotiffs", "open_xarray_sources"]

_DATE = re.compile(r"(\d{4})-?(\d{2})-?(\d{2})(?:[T_-]?(\d{2})(\d{2})(\d{2})?)?")


def date_from_name(path: str) -> np.datetime64 | None:
    """A date (and optional time) written in a file name, e.g. ``sm_2024-03-01.tif``.

    Examples
    --------
    >>> date_from_name("canopy_20240301.tif")
    np.datetime64('2024-03-01T00:00:00')
    >>> date_from_name("dem.tif") is None
    True
    """
    m = _DATE.search(Path(path).stem)
    if m is None:
        return None
    y, mo, d, hh, mm, ss = m.groups()
    try:
        dt = datetime(int(y), int(mo), int(d), int(hh or 0), int(mm or 0), int(ss or 0))
    except ValueError:
        return None
    return np.datetime64(dt, "s")


def stem_without_date(path: str) -> str:
    """The file stem with a date and its separators removed: ``sm_2024-03-01`` -> ``sm``."""
    stem = _DATE.sub("", Path(path).stem).strip("_-. ")
    stem = re.sub(r"[^A-Za-z0-9_]", "_", stem)
    if not stem or not stem[0].isalpha():
        stem = "v_" + stem
    return stem


def _axis_centres(first: float, step: float, count: int) -> np.ndarray:
    return first + step * np.arange(count, dtype=np.float64)


@dataclass(frozen=True, eq=False)
class RasterSource:
    """One variable of a raster source.

    ``steps`` lists, for each time step, ``(path, selector)``: for GeoTIFF the band
    number, for xarray sources ``(variable name, time index or None)``.
    """

    name: str
    kind: str  # "gtiff" or "xarray"
    crs_wkt: str
    x: np.ndarray = field(repr=False)  # pixel-centre coordinates along columns
    y: np.ndarray = field(repr=False)  # pixel-centre coordinates along rows
    times: np.ndarray = field(repr=False)
    steps: tuple[tuple[str, Any], ...] = field(repr=False)
    nodata: float | None = None
    scale: float = 1.0
    offset: float = 0.0
    units: str = "1"
    long_name: str = ""
    dtype: str = "float32"
    packing: dict[str, Any] | None = None
    dims: tuple[str, str] | None = None  # xarray: (y dim, x dim)
    time_dim: str | None = None
    engine: str | None = None

    # -- geometry --------------------------------------------------------------------
    @property
    def geographic(self) -> bool:
        return bool(CRS.from_wkt(self.crs_wkt).is_geographic)

    @property
    def pixel_size(self) -> tuple[float, float]:
        dx = abs(float(self.x[1] - self.x[0])) if self.x.size > 1 else 1.0
        dy = abs(float(self.y[1] - self.y[0])) if self.y.size > 1 else 1.0
        return dx, dy

    def pixel_size_m(self) -> float:
        """Approximate pixel edge in metres (geographic rasters: at the equator)."""
        dx, dy = self.pixel_size
        if self.geographic:
            return max(dx, dy) * 111_320.0
        return max(dx, dy)

    def bounds(self) -> tuple[float, float, float, float]:
        dx, dy = self.pixel_size
        return (
            float(self.x.min() - dx / 2),
            float(self.y.min() - dy / 2),
            float(self.x.max() + dx / 2),
            float(self.y.max() + dy / 2),
        )

    def lonlat_bounds(self) -> tuple[float, float, float, float]:
        """``(west, south, east, north)`` in degrees (west > east: crosses 180)."""
        w, s, e, n = self.bounds()
        crs = CRS.from_wkt(self.crs_wkt)
        if crs.is_geographic:
            if e - w >= 359.9:
                return (-180.0, max(-90.0, s), 180.0, min(90.0, n))
            w = ((w + 180.0) % 360.0) - 180.0
            e = ((e + 180.0) % 360.0) - 180.0
            return (w, max(-90.0, s), e, min(90.0, n))
        tr = Transformer.from_crs(crs, "EPSG:4326", always_xy=True)
        w2, s2, e2, n2 = tr.transform_bounds(w, s, e, n, densify_pts=21)
        return (float(w2), float(s2), float(e2), float(n2))

    def is_global(self) -> bool:
        w, s, e, n = self.lonlat_bounds()
        return (e - w) >= 359.0 and s <= -89.0 and n >= 89.0

    def pixel_index(self, lat: np.ndarray, lon: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Row and column of the pixel holding each point (-1 outside the raster)."""
        crs = CRS.from_wkt(self.crs_wkt)
        lat = np.asarray(lat, dtype=np.float64)
        lon = np.asarray(lon, dtype=np.float64)
        if crs.is_geographic and _is_plain_lonlat(crs):
            xs, ys = lon, lat
        else:
            tr = _transformer(self.crs_wkt)
            xs, ys = tr.transform(lon, lat)
            xs, ys = np.asarray(xs), np.asarray(ys)
        if crs.is_geographic:
            dx = self.pixel_size[0]
            west = float(self.x.min() - dx / 2)
            xs = west + np.mod(xs - west, 360.0)
        col = _nearest_index(self.x, xs)
        row = _nearest_index(self.y, ys)
        bad = (col < 0) | (row < 0)
        col[bad] = -1
        row[bad] = -1
        return row, col

    # -- values ----------------------------------------------------------------------
    def read(self, step: int, rows: slice, cols: slice) -> np.ndarray:
        """Pixel values of one time step in a window, float64 with NaN for no-data."""
        path, sel = self.steps[step]
        try:
            if self.kind == "gtiff":
                raw = _read_gtiff(path, int(sel), rows, cols)
            else:
                raw = _read_xarray(self, path, sel, rows, cols)
        except (OSError, RuntimeError, ValueError) as exc:
            raise IngestError("source", path, f"pixel data that can be read ({exc})") from None
        out = raw.astype(np.float64)
        bad = ~np.isfinite(out)
        if self.nodata is not None and np.isfinite(self.nodata):
            bad |= raw == self.nodata
        out = out * self.scale + self.offset
        out[bad] = np.nan
        return out

    def sample(self, step: int, row: np.ndarray, col: np.ndarray) -> np.ndarray:
        """Values at pixels ``(row, col)`` (-1: outside, NaN) for one time step."""
        out = np.full(row.shape, np.nan)
        ok = row >= 0
        if not ok.any():
            return out
        r0, r1 = int(row[ok].min()), int(row[ok].max()) + 1
        c0, c1 = int(col[ok].min()), int(col[ok].max()) + 1
        block = self.read(step, slice(r0, r1), slice(c0, c1))
        out[ok] = block[row[ok] - r0, col[ok] - c0]
        return out


def _is_plain_lonlat(crs: CRS) -> bool:
    # WGS84 (or an ellipsoid close enough for pixel lookup) with lon/lat degrees
    try:
        if crs.to_epsg() in (4326, 4979, 4269, 4258):
            return True
        return crs.datum is not None and crs.datum.name.startswith("World Geodetic System 1984")
    except Exception:  # pragma: no cover - pyproj edge cases
        return False


def _transformer(wkt: str) -> Transformer:
    """A lon/lat -> source CRS transformer for the calling thread (pyproj transformers
    must not be shared between threads)."""
    return _thread_transformer(wkt, threading.get_ident())


@lru_cache(maxsize=64)
def _thread_transformer(wkt: str, thread: int) -> Transformer:
    return Transformer.from_crs("EPSG:4326", wkt, always_xy=True)


def _nearest_index(centres: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Index of the nearest pixel centre along a monotonic axis, -1 outside it."""
    c = np.asarray(centres, dtype=np.float64)
    n = c.size
    flip = n > 1 and c[1] < c[0]
    if flip:
        c = c[::-1]
    if n == 1:
        idx = np.zeros(v.shape, dtype=np.int64)
        half = 0.5
    else:
        mids = (c[1:] + c[:-1]) / 2
        idx = np.searchsorted(mids, v, side="right").astype(np.int64)
        half = None
    lo_edge = c[0] - ((c[1] - c[0]) / 2 if n > 1 else half)
    hi_edge = c[-1] + ((c[-1] - c[-2]) / 2 if n > 1 else half)
    outside = ~np.isfinite(v) | (v < lo_edge) | (v >= hi_edge)
    if flip:
        idx = n - 1 - idx
    idx[outside] = -1
    return idx


# -- GeoTIFF ---------------------------------------------------------------------------
def _read_gtiff(path: str, band: int, rows: slice, cols: slice) -> np.ndarray:
    import rasterio
    from rasterio.windows import Window

    with rasterio.open(path) as ds:
        win = Window(cols.start, rows.start, cols.stop - cols.start, rows.stop - rows.start)
        return np.asarray(ds.read(band, window=win))


def _gtiff_info(path: str) -> dict[str, Any]:
    import rasterio
    from rasterio.errors import RasterioIOError

    try:
        with rasterio.open(path) as ds:
            if ds.crs is None:
                raise IngestError(
                    "source", path, "a raster with a CRS (this GeoTIFF has no CRS: unknown CRS)"
                )
            t = ds.transform
            if t.b != 0 or t.d != 0:
                raise IngestError("source", path, "a north-up raster (no rotation terms)")
            tags = ds.tags()
            return {
                "crs": ds.crs.to_wkt(),
                "x": _axis_centres(t.c + t.a / 2, t.a, ds.width),
                "y": _axis_centres(t.f + t.e / 2, t.e, ds.height),
                "count": ds.count,
                "nodata": ds.nodata,
                "dtype": ds.dtypes[0],
                "scales": ds.scales,
                "offsets": ds.offsets,
                "units": ds.units,
                "descriptions": ds.descriptions,
                "time": tags.get("TIFFTAG_DATETIME") or tags.get("time"),
            }
    except RasterioIOError as exc:
        raise IngestError("source", path, f"a readable GeoTIFF ({exc})") from None


def _tiff_time(text: str | None) -> np.datetime64 | None:
    if not text:
        return None
    for fmt in ("%Y:%m:%d %H:%M:%S", "%Y-%m-%dT%H:%M:%S", "%Y-%m-%d"):
        try:
            return np.datetime64(datetime.strptime(text.strip().rstrip("Z"), fmt), "s")
        except ValueError:
            continue
    return None


def _check_same_grid(
    name: str, first: tuple[str, dict[str, Any]], other: tuple[str, dict[str, Any]]
) -> None:
    (p0, a), (p1, b) = first, other

    same = (
        a["x"].shape == b["x"].shape
        and a["y"].shape == b["y"].shape
        and np.allclose(a["x"], b["x"], rtol=0, atol=1e-9 * max(1.0, abs(a["x"]).max()))
        and np.allclose(a["y"], b["y"], rtol=0, atol=1e-9 * max(1.0, abs(a["y"]).max()))
        and CRS.from_wkt(a["crs"]) == CRS.from_wkt(b["crs"])
    )
    if not same:
        raise IngestError(
            "source",
            p1,
            f"the same grid (CRS, size, pixel coordinates) as {p0} for variable {name!r}",
        )


def _no_time(path: str) -> IngestError:
    return IngestError(
        "time",
        None,
        message=(
            f"{path} has no time axis (no CF time dimension, no date in the file name, no "
            "TIFFTAG_DATETIME); give the instant its values hold with --time, "
            "e.g. --time 2024-06-01T00:00:00Z"
        ),
    )


def _group_geotiffs(
    infos: list[tuple[str, dict[str, Any]]], names: list[str] | None
) -> dict[str, list[tuple[str, int, dict[str, Any]]]]:
    """Variables and their (path, band, info) members, by the naming rules."""
    groups: dict[str, list[tuple[str, int, dict[str, Any]]]] = {}
    for path, info in infos:
        if names and len(names) == 1:
            if info["count"] != 1:
                raise IngestError(
                    "source", path, "single-band GeoTIFFs when one --variable is given"
                )
            groups.setdefault(names[0], []).append((path, 1, info))
            continue
        base = stem_without_date(path)
        if info["count"] == 1:
            groups.setdefault(base, []).append((path, 1, info))
            continue
        for k in range(1, info["count"] + 1):
            desc = (info["descriptions"] or [None] * info["count"])[k - 1]
            vname = stem_without_date(desc) if desc else f"{base}_b{k}"
            groups.setdefault(vname, []).append((path, k, info))
    if names and len(names) > 1:
        unknown = sorted(set(names) - set(groups))
        if unknown:
            raise IngestError(
                "variable", unknown[0], f"one of the variables in the files: {sorted(groups)}"
            )
        groups = {k: v for k, v in groups.items() if k in names}
    return groups


def _member_times(
    vname: str, members: list[tuple[str, int, dict[str, Any]]], undated: np.datetime64 | None
) -> NDArray[np.datetime64]:
    times = [date_from_name(path) or _tiff_time(info["time"]) for path, _, info in members]
    missing = [m[0] for m, t in zip(members, times, strict=True) if t is None]
    if missing and len(members) > 1:
        raise IngestError(
            "source",
            missing[0],
            "files with a date in the name (YYYY-MM-DD) or a TIFFTAG_DATETIME, "
            "so that they can be put in time order",
        )
    if missing:
        if undated is None:
            raise _no_time(missing[0])
        times = [undated]
    tarr = np.array(times, dtype="datetime64[s]")
    if tarr.size > 1 and (np.diff(np.sort(tarr).astype(np.int64)) == 0).any():
        dup = str(np.sort(tarr)[np.flatnonzero(np.diff(np.sort(tarr).astype(np.int64)) == 0)[0]])
        raise IngestError("source", vname, f"one file per time step (two files at {dup})")
    return tarr


def _geotiff_source(
    vname: str, members: list[tuple[str, int, dict[str, Any]]], undated: np.datetime64 | None
) -> RasterSource:
    first = members[0]
    for m in members[1:]:
        _check_same_grid(vname, (first[0], first[2]), (m[0], m[2]))
    times = _member_times(vname, members, undated)
    order = np.argsort(times, kind="stable")
    info, band = first[2], first[1]
    scale = (info["scales"] or (1.0,))[band - 1] or 1.0
    offset = (info["offsets"] or (0.0,))[band - 1] or 0.0
    dtype = np.dtype(info["dtype"])
    packing = None
    if dtype.kind in "iu" and (scale != 1.0 or offset != 0.0):
        packing = {"dtype": dtype.name, "scale_factor": scale, "add_offset": offset}
    return RasterSource(
        name=vname,
        kind="gtiff",
        crs_wkt=info["crs"],
        x=info["x"],
        y=info["y"],
        times=times[order],
        steps=tuple((members[i][0], members[i][1]) for i in order),
        nodata=info["nodata"],
        scale=float(scale),
        offset=float(offset),
        units=(info["units"] or ("",))[band - 1] or "1",
        long_name=vname.replace("_", " "),
        packing=packing,
    )


def open_geotiffs(
    paths: list[str], names: list[str] | None, undated: np.datetime64 | None = None
) -> dict[str, RasterSource]:
    """GeoTIFF files as variables over time.

    With one ``--variable`` name, every file is a time step of that variable. Without,
    a single-band file is a variable named after the file (its date removed), and
    files sharing that name are its time steps; a multi-band file gives one variable
    per band (``<name>_b<k>`` or the band description). A file without a date is one
    step at ``undated`` (an error if that is None).
    """
    groups = _group_geotiffs([(p, _gtiff_info(p)) for p in paths], names)
    return {v: _geotiff_source(v, members, undated) for v, members in groups.items()}


# -- NetCDF / Zarr through xarray ------------------------------------------------------
_DS_LOCK = threading.Lock()
_DATASETS: dict[tuple[str, str | None], Any] = {}


def _open_ds(path: str, engine: str | None) -> Any:
    """An opened dataset, kept for the process (xarray locks its file reads itself).

    Worker threads come and go (dask.distributed recycles them), so the cache is per
    process, not per thread.
    """
    import xarray as xr

    key = (path, engine)
    with _DS_LOCK:
        ds = _DATASETS.get(key)
        if ds is None:
            if len(_DATASETS) > 32:
                for old in _DATASETS.values():
                    old.close()
                _DATASETS.clear()
            if engine == "zarr":
                with warnings.catch_warnings():  # sources without consolidated metadata
                    warnings.simplefilter("ignore", RuntimeWarning)
                    ds = xr.open_zarr(path, mask_and_scale=False, decode_times=True)
            else:
                ds = xr.open_dataset(path, engine=engine, mask_and_scale=False, decode_times=True)
            _DATASETS[key] = ds
        return ds


def _read_xarray(src: RasterSource, path: str, sel: Any, rows: slice, cols: slice) -> np.ndarray:
    var, tindex = sel
    ds = _open_ds(path, src.engine)
    da = ds[var]
    assert src.dims is not None
    ydim, xdim = src.dims
    isel: dict[str, slice | int] = {ydim: rows, xdim: cols}
    if src.time_dim is not None and tindex is not None:
        isel[src.time_dim] = int(tindex)
    da = da.isel(isel)
    extra = [d for d in da.dims if d not in (ydim, xdim)]
    if extra:
        da = da.isel({d: 0 for d in extra})
    return np.asarray(da.transpose(ydim, xdim).values)


def _find_axes(ds: Any, da: Any, path: str) -> tuple[str, str, str | None, CRS]:
    def role(name: str) -> str | None:
        c = ds[name] if name in ds.variables else None
        attrs = dict(c.attrs) if c is not None else {}
        sn = str(attrs.get("standard_name", "")).lower()
        units = str(attrs.get("units", "")).lower()
        axis = str(attrs.get("axis", "")).upper()
        low = name.lower()
        if sn == "latitude" or units in ("degrees_north", "degree_north", "degrees_n"):
            return "lat"
        if sn == "longitude" or units in ("degrees_east", "degree_east", "degrees_e"):
            return "lon"
        if sn == "projection_y_coordinate":
            return "y"
        if sn == "projection_x_coordinate":
            return "x"
        if low in ("lat", "latitude"):
            return "lat"
        if low in ("lon", "longitude", "long"):
            return "lon"
        if low == "y" or axis == "Y":
            return "y"
        if low == "x" or axis == "X":
            return "x"
        if c is not None and np.issubdtype(c.dtype, np.datetime64):
            return "time"
        if low == "time" or axis == "T":
            return "time"
        return None

    roles = {d: role(d) for d in da.dims}
    ydim = next((d for d, r in roles.items() if r in ("lat", "y")), None)
    xdim = next((d for d, r in roles.items() if r in ("lon", "x")), None)
    tdim = next((d for d, r in roles.items() if r == "time"), None)
    if ydim is None or xdim is None:
        raise IngestError(
            "source", path, f"variable {da.name!r} with latitude/longitude or y/x dimensions"
        )
    if roles[ydim] == "lat" and roles[xdim] == "lon":
        return str(ydim), str(xdim), tdim, CRS.from_epsg(4326)
    return str(ydim), str(xdim), tdim, _grid_mapping_crs(ds, da, path)


def _grid_mapping_crs(ds: Any, da: Any, path: str) -> CRS:
    """The CRS of a CF ``grid_mapping`` variable (WKT, or CF projection attributes)."""
    gm = da.attrs.get("grid_mapping")
    if gm and gm in ds.variables:
        attrs = dict(ds[gm].attrs)
        for key in ("crs_wkt", "spatial_ref"):
            if key in attrs:
                try:
                    return CRS.from_wkt(str(attrs[key]))
                except Exception:
                    break
        try:
            return CRS.from_cf(attrs)
        except Exception:
            pass
    raise IngestError(
        "source",
        path,
        f"a CRS for variable {da.name!r}: projected x/y axes need a CF grid_mapping "
        "(crs_wkt, spatial_ref or CF projection attributes) pyproj can read "
        "(unknown CRS)",
    )


def _engine(path: str) -> str | None:
    zarr_like = (
        path.rstrip("/").endswith(".zarr")
        or Path(path, "zarr.json").exists()
        or Path(path, ".zgroup").exists()
    )
    return "zarr" if zarr_like else None


def _coordinate(ds: Any, da: Any, dim: str, path: str, name: str) -> NDArray[np.float64]:
    arr = (
        np.asarray(ds[dim].values, dtype=np.float64)
        if dim in ds.variables
        else np.arange(da.sizes[dim], dtype=np.float64)
    )
    if arr.size > 1 and not (np.all(np.diff(arr) > 0) or np.all(np.diff(arr) < 0)):
        raise IngestError("source", path, f"a monotonic {dim} axis for {name!r}")
    return arr


def _variable_times(
    ds: Any, path: str, n: str, tdim: str | None, undated: np.datetime64 | None
) -> tuple[NDArray[np.datetime64], list[tuple[str, Any]]]:
    if tdim is not None:
        tvals = np.asarray(ds[tdim].values)
        if not np.issubdtype(tvals.dtype, np.datetime64):
            raise IngestError("source", path, f"a CF time axis for {n!r} ({tdim})")
        times = tvals.astype("datetime64[s]")
        return times, [(path, (n, k)) for k in range(times.size)]
    t = date_from_name(path)
    if t is None:
        if undated is None:
            raise _no_time(path)
        t = undated
    return np.array([t], dtype="datetime64[s]"), [(path, (n, None))]


def _packing(da: Any) -> dict[str, Any]:
    """Scale, offset, no-data and packing of a variable as stored (CF attributes)."""
    attrs = dict(da.attrs)
    scale = float(attrs.get("scale_factor", 1.0))
    offset = float(attrs.get("add_offset", 0.0))
    nodata = attrs.get("_FillValue", attrs.get("missing_value"))
    if nodata is None:
        nodata = da.encoding.get("_FillValue")
    enc = np.dtype(da.dtype)
    packing = None
    if enc.kind in "iu" and (scale != 1.0 or offset != 0.0):
        packing = {"dtype": enc.name, "scale_factor": scale, "add_offset": offset}
    return {
        "nodata": None if nodata is None else float(np.asarray(nodata).ravel()[0]),
        "scale": scale,
        "offset": offset,
        "units": str(attrs.get("units", "1")),
        "long_name": str(attrs.get("long_name", da.name)),
        "packing": packing,
    }


def _xarray_member(
    ds: Any, path: str, n: str, engine: str | None, undated: np.datetime64 | None
) -> dict[str, Any]:
    """Everything one file says about variable ``n``: grid, CRS, times, packing."""
    da = ds[n]
    ydim, xdim, tdim, crs = _find_axes(ds, da, path)
    times, steps = _variable_times(ds, path, n, tdim, undated)
    return {
        "crs": crs.to_wkt(),
        "x": _coordinate(ds, da, xdim, path, n),
        "y": _coordinate(ds, da, ydim, path, n),
        "times": times,
        "steps": steps,
        "dims": (ydim, xdim),
        "tdim": tdim,
        "engine": engine,
        **_packing(da),
    }


def _xarray_source(n: str, members: list[tuple[str, dict[str, Any]]]) -> RasterSource:
    """One variable over the files that hold it, in time order."""
    first = members[0]
    for m in members[1:]:
        _check_same_grid(n, first, m)
    times = np.concatenate([m[1]["times"] for m in members])
    steps = [s for m in members for s in m[1]["steps"]]
    order = np.argsort(times, kind="stable")
    times = times[order]
    if times.size > 1 and (np.diff(times.astype(np.int64)) == 0).any():
        raise IngestError("source", n, "distinct time steps across files")
    info = first[1]
    return RasterSource(
        name=n,
        kind="xarray",
        crs_wkt=info["crs"],
        x=info["x"],
        y=info["y"],
        times=times,
        steps=tuple(steps[i] for i in order),
        nodata=info["nodata"],
        scale=info["scale"],
        offset=info["offset"],
        units=info["units"],
        long_name=info["long_name"],
        packing=info["packing"],
        dims=info["dims"],
        time_dim=info["tdim"],
        engine=info["engine"],
    )


def open_xarray_sources(
    paths: list[str], names: list[str] | None, undated: np.datetime64 | None = None
) -> dict[str, RasterSource]:
    """NetCDF files or Zarr stores: each ``--variable`` over the files' time steps.

    A variable without a time dimension in a file without a date in its name is one
    step at ``undated`` (an error if that is None).
    """
    if not names:
        raise IngestError(
            "variable", None, "one or more --variable names for NetCDF or Zarr sources"
        )
    per_var: dict[str, list[tuple[str, dict[str, Any]]]] = {n: [] for n in names}
    for path in paths:
        engine = _engine(path)
        try:
            ds = _open_ds(path, engine)
        except Exception as exc:
            raise IngestError("source", path, f"a readable NetCDF or Zarr source ({exc})") from None
        present = [n for n in names if n in ds.data_vars]
        if not present:
            raise IngestError(
                "variable",
                ",".join(names),
                f"variables of {path}: {sorted(str(v) for v in ds.data_vars)}",
            )
        for n in present:
            per_var[n].append((path, _xarray_member(ds, path, n, engine, undated)))
    missing = [n for n, members in per_var.items() if not members]
    if missing:
        raise IngestError("variable", missing[0], f"a variable present in the sources {paths}")
    return {n: _xarray_source(n, members) for n, members in per_var.items()}
