"""The demo: an invented irrigation district, simulated for a year, ingested for real.

The Velmora Flats irrigation district lies on the Isle of Velmora, an island that does
not exist (it is placed in the open Atlantic, near 30.5 N 36.1 W, where there is no
land). Its data are invented: a daily soil-moisture and canopy-temperature simulation
with parcels on irrigation rotations, a winter rain season, a reservoir, cloud gaps in
the thermal data and a short outage of the soil-moisture sensor. The files are written
as monthly CF NetCDF files on a projected (UTM) grid and go through the same
``ingest`` path as any user data: area mean to level 14 and a pyramid to level 9.

The values are as good as an invented simulation: they must never inform irrigation or
any other decision. Real decisions rest with local authorities and licensed practice.
"""

from __future__ import annotations

import tempfile
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from alveary.cube import default_store_root

if TYPE_CHECKING:
    from alveary.ingest._build import IngestSummary

__all__ = [
    "DEMO_CUBE_ID",
    "build_demo",
    "demo_built",
    "demo_url",
    "publish_demo",
    "write_demo_sources",
]

DEMO_CUBE_ID = "velmora-irrigation"
DEMO_LEVEL = 14
DEMO_MIN_LEVEL = 9
_CENTRE = (30.55, -36.10)  # lat, lon of the invented district
_EPSG = 32624  # UTM zone 24N, the zone of that longitude
_PIXEL = 250.0
_SHAPE = (120, 160)  # rows, cols: 30 km x 40 km


def demo_url(store: str | Path | None = None) -> str:
    """Where the demo cube lives: ``<store>/velmora-irrigation``."""
    root = Path(store) if store is not None else default_store_root()
    return str(root / DEMO_CUBE_ID)


def _simulate(days: int, seed: int) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    rng = np.random.default_rng(seed)
    ny, nx = _SHAPE
    yy, xx = np.mgrid[0:ny, 0:nx]
    # parcels of 4 x 4 pixels (1 km), each with a crop and an irrigation rotation
    py, px = yy // 4, xx // 4
    npy, npx = py.max() + 1, px.max() + 1
    crop = rng.choice(4, size=(npy, npx), p=[0.15, 0.3, 0.35, 0.2])[py, px]
    interval = rng.integers(5, 12, size=(npy, npx))[py, px]
    phase = rng.integers(0, 12, size=(npy, npx))[py, px]
    soil = rng.normal(0.0, 0.02, size=(npy, npx))[py, px]  # texture: holding capacity
    # a reservoir and a river are water: no soil moisture, no canopy
    water = ((yy - 38) / 9.0) ** 2 + ((xx - 112) / 14.0) ** 2 < 1.0
    river = np.abs(yy - (60 + 18 * np.sin(xx / 23.0))) < 1.2
    water |= river
    doy = np.arange(days)
    season = np.sin(2 * np.pi * (doy - 100) / 365.0)  # +1 mid-summer
    et_mm = 4.5 + 2.5 * season  # reference evapotranspiration, mm/day
    rain_mm = np.where((season < 0.1) & (rng.random(days) < 0.22), rng.gamma(2.0, 6.0, days), 0.0)
    t_air = 291.0 + 8.0 * season + rng.normal(0.0, 1.5, days)
    theta = np.full(_SHAPE, 0.22) + soil
    sm = np.empty((days, ny, nx), dtype=np.float64)
    tc = np.empty((days, ny, nx), dtype=np.float64)
    active = {0: np.zeros(days, bool), 1: np.ones(days, bool), 2: season > -0.2, 3: season < 0.3}
    for d in range(days):
        irrigate = np.zeros(_SHAPE, bool)
        for c, on in active.items():
            if c and on[d]:
                irrigate |= (crop == c) & ((d + phase) % interval == 0)
        cover = np.where(crop == 0, 0.3, 1.0)
        theta = theta - cover * et_mm[d] / 500.0 * np.clip(theta / 0.3, 0.2, 1.0)
        theta = theta + rain_mm[d] / 500.0
        theta = np.where(irrigate, np.maximum(theta, 0.31 + soil), theta)
        theta = np.clip(theta, 0.05, 0.42 + soil)
        sm[d] = theta + rng.normal(0.0, 0.004, _SHAPE)
        stress = np.clip((0.24 - theta) / 0.14, 0.0, 1.0)
        tc[d] = t_air[d] - 2.5 + 9.0 * stress * cover + rng.normal(0.0, 0.4, _SHAPE)
        # clouds hide the thermal view on some days
        if rng.random() < 0.18:
            for _ in range(rng.integers(1, 4)):
                cy, cx, r = rng.uniform(0, ny), rng.uniform(0, nx), rng.uniform(6, 30)
                tc[d][(yy - cy) ** 2 + (xx - cx) ** 2 < r * r] = np.nan
    sm[:, water] = np.nan
    tc[:, water] = np.nan
    outage = slice(min(days - 1, 200), min(days, 204))  # the soil-moisture sensor is down
    sm[outage] = np.nan
    return sm, tc


def write_demo_sources(directory: str | Path, days: int = 365, seed: int = 7) -> list[str]:
    """Write the invented district's data as monthly CF NetCDF files; return the paths."""
    import pandas as pd
    import xarray as xr
    from pyproj import CRS, Transformer

    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    crs = CRS.from_epsg(_EPSG)
    x0, y0 = Transformer.from_crs("EPSG:4326", crs, always_xy=True).transform(
        _CENTRE[1], _CENTRE[0]
    )
    ny, nx = _SHAPE
    x = x0 + (np.arange(nx) - nx / 2 + 0.5) * _PIXEL
    y = y0 + (ny / 2 - 0.5 - np.arange(ny)) * _PIXEL
    sm, tc = _simulate(days, seed)
    times = pd.date_range("2025-01-01", periods=days, freq="D")
    cf = crs.to_cf()
    paths = []
    for month in sorted(set(times.month)):
        sel = np.flatnonzero(times.month == month)
        ds = xr.Dataset(
            {
                "soil_moisture": (
                    ("time", "y", "x"),
                    sm[sel],
                    {
                        "units": "m3 m-3",
                        "long_name": "volumetric soil moisture, root zone (invented)",
                        "grid_mapping": "crs",
                    },
                ),
                "canopy_temperature": (
                    ("time", "y", "x"),
                    tc[sel].astype(np.float32),
                    {
                        "units": "K",
                        "long_name": "canopy temperature at midday (invented)",
                        "grid_mapping": "crs",
                    },
                ),
                "crs": ((), np.int32(0), cf),
            },
            coords={
                "time": times[sel],
                "y": ("y", y, {"standard_name": "projection_y_coordinate", "units": "m"}),
                "x": ("x", x, {"standard_name": "projection_x_coordinate", "units": "m"}),
            },
            attrs={
                "title": "Velmora Flats irrigation district (invented demo data)",
                "Conventions": "CF-1.10",
                "comment": "Invented data for a place that does not exist.",
            },
        )
        encoding: dict[str, dict[str, Any]] = {
            "soil_moisture": {
                "dtype": "int16",
                "scale_factor": 1e-4,
                "add_offset": 0.0,
                "_FillValue": -32768,
            },
            "canopy_temperature": {"_FillValue": np.float32(np.nan)},
        }
        path = directory / f"velmora_2025-{month:02d}.nc"
        ds.to_netcdf(path, encoding=encoding)
        paths.append(str(path))
    return paths


def publish_demo(
    url: str,
    *,
    days: int = 365,
    progress: bool = False,
    scheduler: str | None = None,
) -> IngestSummary:
    """Write the invented district's sources to a temporary directory and publish the
    demo cube from them at ``url`` (any store URL: a local path, ``s3://...``), with the
    demo's settings: area mean to level 14, pyramid down to level 9."""
    from alveary.ingest._build import ingest

    with tempfile.TemporaryDirectory(prefix="alveary-demo-") as tmp:
        paths = write_demo_sources(tmp, days=days)
        return ingest(
            paths,
            url,
            DEMO_LEVEL,
            variables=["soil_moisture", "canopy_temperature"],
            method="mean",
            pyramid=True,
            pyramid_min_level=DEMO_MIN_LEVEL,
            cube_id=DEMO_CUBE_ID,
            scheduler=scheduler,
            title="Velmora Flats irrigation district (invented demo data)",
            summary=(
                "Invented daily soil moisture and canopy temperature for a district that "
                "does not exist. Demo data only: not for irrigation or any other decision."
            ),
            progress=progress,
            replace=True,
        )


def build_demo(
    store: str | Path | None = None,
    *,
    force: bool = False,
    days: int = 365,
    progress: bool = False,
    scheduler: str | None = None,
) -> str:
    """Build the demo cube on the embedded store (if missing, or always with ``force``).

    Returns the cube's URL (a local path), ``<store>/velmora-irrigation``.
    """
    url = demo_url(store)
    if force or not demo_built(url):
        publish_demo(url, days=days, progress=progress, scheduler=scheduler)
    return url


def demo_built(url: str) -> bool:
    """Whether a demo cube is published at the local path ``url``."""
    return (Path(url) / "current.json").exists()
