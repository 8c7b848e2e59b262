"""Point tables (CSV or Parquet with lat, lon, time and value columns), binned per zone.

Every value column becomes two variables: ``<name>`` (the mean of the points in a zone
and time step) and ``<name>_count`` (how many points there were). Time steps are the
point times floored to ``time_step`` (a pandas frequency such as ``1D`` or ``1h``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from alveary import grid
from alveary._errors import IngestError

__all__ = ["PointBins", "bin_points"]

_LAT = ("lat", "latitude")
_LON = ("lon", "longitude", "lng", "long")
_TIME = ("time", "datetime", "date", "timestamp")


@dataclass(frozen=True, eq=False)
class PointBins:
    """Binned points of one variable: per (time step, zone) the mean and the count."""

    name: str
    times: np.ndarray = field(repr=False)  # the variable's time steps, datetime64[s]
    tindex: np.ndarray = field(repr=False)  # per bin: index into times
    zones: np.ndarray = field(repr=False)  # per bin: zone id
    mean: np.ndarray = field(repr=False)
    count: np.ndarray = field(repr=False)
    bbox: tuple[float, float, float, float] = (-180.0, -90.0, 180.0, 90.0)
    source: str = ""


def _column(cols: dict[str, str], names: tuple[str, ...], what: str, path: str) -> str:
    for n in names:
        if n in cols:
            return cols[n]
    raise IngestError("source", path, f"a {what} column (one of {', '.join(names)})")


def _read_table(path: str) -> pd.DataFrame:
    p = Path(path)
    try:
        if p.suffix.lower() in (".parquet", ".pq"):
            return pd.read_parquet(p)
        return pd.read_csv(p)
    except (OSError, ValueError) as exc:
        raise IngestError("source", path, f"a readable CSV or Parquet table ({exc})") from None


def _value_columns(
    df: pd.DataFrame, skip: set[str], names: list[str] | None, path: str
) -> list[str]:
    numeric = [str(c) for c in df.columns if c not in skip and pd.api.types.is_numeric_dtype(df[c])]
    wanted = list(names) if names else numeric
    missing = [n for n in wanted if n not in df.columns]
    if missing:
        raise IngestError("variable", missing[0], f"a value column of {path}: {numeric}")
    if not wanted:
        raise IngestError("source", path, "at least one numeric value column")
    return wanted


def _steps(df: pd.DataFrame, tcol: str, time_step: str, path: str) -> np.ndarray:
    """Point times floored to the time step, as naive UTC ``datetime64[s]``."""
    try:
        t = pd.to_datetime(df[tcol], utc=True)
    except (ValueError, TypeError) as exc:
        raise IngestError("source", path, f"times pandas can parse ({exc})") from None
    try:
        steps = t.dt.floor(time_step).dt.tz_localize(None)
    except ValueError as exc:
        raise IngestError("time_step", time_step, f"a pandas frequency ({exc})") from None
    return np.asarray(steps.to_numpy("datetime64[s]"))


def _long_table(path: str, names: list[str] | None, time_step: str) -> pd.DataFrame:
    """One table as rows of (var, lat, lon, t, v, src): one row per point and value column."""
    df = _read_table(path)
    cols = {str(c).lower(): c for c in df.columns}
    lat = _column(cols, _LAT, "latitude", path)
    lon = _column(cols, _LON, "longitude", path)
    tcol = _column(cols, _TIME, "time", path)
    wanted = _value_columns(df, {lat, lon, tcol}, names, path)
    latv = pd.to_numeric(df[lat], errors="coerce").to_numpy(np.float64)
    lonv = pd.to_numeric(df[lon], errors="coerce").to_numpy(np.float64)
    bad = (np.abs(latv) > 90) & np.isfinite(latv)
    if bad.any():
        row = int(np.flatnonzero(bad)[0])
        raise IngestError("lat", float(latv[row]), f"latitudes in [-90, 90] ({path}, row {row})")
    steps = _steps(df, tcol, time_step, path)
    frames = [
        pd.DataFrame(
            {
                "var": n,
                "lat": latv,
                "lon": lonv,
                "t": steps,
                "v": pd.to_numeric(df[n], errors="coerce").to_numpy(np.float64),
                "src": path,
            }
        )
        for n in wanted
    ]
    return pd.concat(frames, ignore_index=True)


def _bin(name: str, part: pd.DataFrame, level: int) -> PointBins:
    """Mean and count per (time step, zone) of one variable's points.

    Bins are the distinct rows of the two columns (time index, zone id), so any number
    of time steps and any zone id is binned exactly.
    """
    lat = part["lat"].to_numpy(np.float64)
    lon = part["lon"].to_numpy(np.float64)
    zones = np.asarray(grid.point_to_zone(lat, lon, level), dtype=np.int64)  # ids < 2**53
    times, ti = np.unique(part["t"].to_numpy("datetime64[s]"), return_inverse=True)
    pairs = np.stack([ti.astype(np.int64).ravel(), zones.ravel()], axis=1)
    keys, inv = np.unique(pairs, axis=0, return_inverse=True)
    inv = inv.ravel()
    count = np.bincount(inv, minlength=keys.shape[0])
    total = np.bincount(inv, weights=part["v"].to_numpy(np.float64), minlength=keys.shape[0])
    return PointBins(
        name=name,
        times=times,
        tindex=keys[:, 0].copy(),
        zones=keys[:, 1].astype(np.uint64),
        mean=total / count,
        count=count.astype(np.float64),
        bbox=(float(lon.min()), float(lat.min()), float(lon.max()), float(lat.max())),
        source=",".join(sorted(set(part["src"]))),
    )


def bin_points(
    paths: list[str], names: list[str] | None, level: int, time_step: str = "1D"
) -> dict[str, PointBins]:
    """Read point tables and bin their values per zone at ``level`` and time step."""
    data = pd.concat([_long_table(p, names, time_step) for p in paths], ignore_index=True)
    ok = np.isfinite(data["lat"]) & np.isfinite(data["lon"]) & np.isfinite(data["v"])
    data = data[ok & data["t"].notna()]
    out = {
        str(n): _bin(str(n), part, level)
        for n, part in data.groupby("var", sort=True)
        if not part.empty
    }
    if not out:
        raise IngestError("source", ",".join(paths), "points with finite lat, lon and values")
    return out
