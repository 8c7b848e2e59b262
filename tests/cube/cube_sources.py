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


def daily_geotiffs(directory, name, days, *, west, south, east, north, step, seed=0):
    """One GeoTIFF per day named ``<name>_<date>.tif`` with random values; returns the
    paths and the fields ``{date: (rows, cols)}``."""
    rng = np.random.default_rng(seed)
    rows, cols = round((north - south) / step), round((east - west) / step)
    paths, fields = [], {}
    for day in days:
        f = rng.normal(10.0, 2.0, (rows, cols)).astype("f4")
        fields[str(day)] = f
        paths.append(
            write_geotiff(
                Path(directory) / f"{name}_{day}.tif", f, west=west, north=north, step_x=step
            )
        )
    return paths, fields


def write_format1_cube(root, cube_id, times, level, name, values):
    """A cube as format 1 wrote it (no manifest, blosc without a checksum), made with
    zarr directly from the format's documentation. ``values`` is ``(time, zones)`` over
    ``grid.all_zones(level)``; returns the version id."""
    import json
    import warnings

    import zarr
    from zarr.codecs import BloscCodec

    from alveary import grid

    version = "20240101T000000.000000Z-0f0f0f0f"
    times = np.asarray(times, dtype="datetime64[s]")
    n, nt = 1 << level, times.size
    store = zarr.storage.LocalStore(str(root))
    g = zarr.open_group(store, path=f"versions/{version}", mode="w", zarr_format=3)
    t = g.create_array("time", shape=(nt,), chunks=(nt,), dtype="int64", fill_value=0)
    t[:] = times.astype(np.int64)
    blosc = [BloscCodec(cname="zstd", clevel=5, shuffle="shuffle", typesize=4)]
    rows, cols = min(64, 2 * n), min(64, n)
    strips = g.create_array(
        f"{name}/{level}/strips",
        shape=(nt, 5, 2 * n, n),
        chunks=(nt, 1, rows, cols),
        dtype="float32",
        fill_value=np.nan,
        compressors=blosc,
    )
    apex = g.create_array(
        f"{name}/{level}/apex",
        shape=(nt, 2),
        chunks=(nt, 2),
        dtype="float32",
        fill_value=np.nan,
        compressors=blosc,
    )
    zones = grid.all_zones(level)
    _, region, i, j = (np.asarray(a) for a in grid.zone_to_index(zones))
    full = np.full((nt, 5, 2 * n, n), np.nan, "f4")
    s = region < 5
    full[:, region[s], i[s], j[s]] = values[:, s]
    strips[:] = full
    apex[:] = values[:, ~s][:, np.argsort(region[~s])]
    first, last = str(times[0]) + "Z", str(times[-1]) + "Z"
    g.attrs.update(
        {
            "title": cube_id,
            "alveary": {
                "format": "alveary-cube",
                "format_version": 1,
                "id": cube_id,
                "title": cube_id,
                "version": version,
                "created": "2024-01-01T00:00:00Z",
                "levels": [level],
                "variables": {
                    name: {
                        "units": "1",
                        "long_name": name,
                        "dtype": "float32",
                        "_FillValue": "NaN",
                        "aggregation": "mean",
                    }
                },
                "time": {
                    "units": "seconds since 1970-01-01T00:00:00Z",
                    "count": nt,
                    "first": first,
                    "last": last,
                },
                "coverage": {"bbox": [-180.0, -90.0, 180.0, 90.0], "crs": "EPSG:4326"},
                "chunks": {str(level): {"time": nt, "rows": rows, "cols": cols}},
                "shards": {str(level): None},
                "grid": {},
                "extra": {},
            },
        }
    )
    with warnings.catch_warnings():  # consolidated metadata is not in the v3 spec yet
        warnings.simplefilter("ignore", UserWarning)
        zarr.consolidate_metadata(store, path=f"versions/{version}", zarr_format=3)
    pointer = {
        "format": "alveary-cube",
        "format_version": 1,
        "cube_id": cube_id,
        "version": version,
        "published": "2024-01-01T00:00:00Z",
        "history": [version],
    }
    (Path(root) / "current.json").write_text(json.dumps(pointer))
    return version
