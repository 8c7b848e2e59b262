"""Small source files for ingest tests, written with rasterio and xarray themselves."""

from __future__ import annotations

from pathlib import Path

import numpy as np


def lonlat_axes(step: float, west=-180.0, south=-90.0, east=180.0, north=90.0):
    """Pixel-centre longitudes (ascending) and latitudes (descending) of a lon/lat grid."""
    lon = np.arange(west + step / 2, east, step)
    lat = np.arange(north - step / 2, south, -step)
    return lon, lat


def write_geotiff(
    path,
    data,
    *,
    west,
    north,
    step_x,
    step_y=None,
    crs="EPSG:4326",
    nodata=None,
    dtype=None,
    scale=None,
    offset=None,
    date=None,
):
    """A single-band, north-up GeoTIFF; ``data`` is (rows, cols), row 0 at the north."""
    import rasterio
    from rasterio.transform import from_origin

    step_y = step_x if step_y is None else step_y
    data = np.asarray(data)
    dtype = dtype or data.dtype
    profile = {
        "driver": "GTiff",
        "height": data.shape[0],
        "width": data.shape[1],
        "count": 1,
        "dtype": np.dtype(dtype).name,
        "transform": from_origin(west, north, step_x, step_y),
        "nodata": nodata,
    }
    if crs is not None:
        profile["crs"] = crs
    Path(path).parent.mkdir(parents=True, exist_ok=True)
    with rasterio.open(path, "w", **profile) as ds:
        ds.write(data.astype(dtype), 1)
        if scale is not None or offset is not None:
            ds.scales = (scale or 1.0,)
            ds.offsets = (offset or 0.0,)
        if date is not None:
            ds.update_tags(TIFFTAG_DATETIME=date)
    return str(path)


def write_netcdf(path, name, data, times, lat, lon, attrs=None, encoding=None):
    """A CF NetCDF file with ``name(time, lat, lon)``."""
    import xarray as xr

    ds = xr.Dataset(
        {name: (("time", "lat", "lon"), data, attrs or {})},
        coords={
            "time": np.asarray(times, dtype="datetime64[ns]"),
            "lat": ("lat", lat, {"units": "degrees_north", "standard_name": "latitude"}),
            "lon": ("lon", lon, {"units": "degrees_east", "standard_name": "longitude"}),
        },
    )
    ds.to_netcdf(path, encoding={name: encoding} if encoding else None)
    return str(path)
