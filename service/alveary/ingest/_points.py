"""Point tables (CSV or Parquet with lat, lon, time and value columns), binned per zone.

Every value column becomes two variables: ``<name>`` (the mean of the points in a zone
and time step) and ``<name>_count`` (how many points there were). Time steps are the
point times floored to ``time_step`` (a pandas frequency such as ``1D`` or ``1h``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

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


def _read_table(path: str):
    import pandas as pd

    p = Path(path)
    try:
        if p.suffix.lower() in (".parquet", ".pq"):
            return pd.read_parquet(p)
        return pd.read_csv(p)
    except (OSError, ValueError) as exc:
        raise IngestError("source", path, f"a readable CSV or Parquet table ({exc})") from None


def bin_points(
    paths: list[str], names: list[str] | None, level: int, time_step: str = "1D"
) -> dict[str, PointBins]:
    """Read point tables and bin their values per zone at ``level`` and time step."""
    import pandas as pd

    frames = []
    for path in paths:
        df = _read_table(path)
        cols = {str(c).lower(): c for c in df.columns}
        lat = _column(cols, _LAT, "latitude", path)
        lon = _column(cols, _LON, "longitude", path)
        tcol = _column(cols, _TIME, "time", path)
        skip = {lat, lon, tcol}
        numeric = [c for c in df.columns if c not in skip and pd.api.types.is_numeric_dtype(df[c])]
        wanted = list(names) if names else [str(c) for c in numeric]
        missing = [n for n in wanted if n not in df.columns]
        if missing:
            raise IngestError(
                "variable", missing[0], f"a value column of {path}: {[str(c) for c in numeric]}"
            )
        if not wanted:
            raise IngestError("source", path, "at least one numeric value column")
        try:
            t = pd.to_datetime(df[tcol], utc=True)
        except (ValueError, TypeError) as exc:
            raise IngestError("source", path, f"times pandas can parse ({exc})") from None
        latv = pd.to_numeric(df[lat], errors="coerce").to_numpy(np.float64)
        lonv = pd.to_numeric(df[lon], errors="coerce").to_numpy(np.float64)
        bad = (np.abs(latv) > 90) & np.isfinite(latv)
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            raise IngestError(
                "lat", float(latv[row]), f"latitudes in [-90, 90] ({path}, row {row})"
            )
        try:
            steps = t.dt.floor(time_step).dt.tz_localize(None)
        except ValueError as exc:
            raise IngestError("time_step", time_step, f"a pandas frequency ({exc})") from None
        for n in wanted:
            frames.append(
                pd.DataFrame(
                    {
                        "var": n,
                        "lat": latv,
                        "lon": lonv,
                        "t": steps.to_numpy("datetime64[s]"),
                        "v": pd.to_numeric(df[n], errors="coerce").to_numpy(np.float64),
                        "src": path,
                    }
                )
            )
    data = pd.concat(frames, ignore_index=True)
    ok = np.isfinite(data["lat"]) & np.isfinite(data["lon"]) & np.isfinite(data["v"])
    ok &= data["t"].notna()
    data = data[ok]
    out = {}
    for n, part in data.groupby("var", sort=True):
        if part.empty:
            continue
        z = grid.point_to_zone(part["lat"].to_numpy(), part["lon"].to_numpy(), level)
        times = np.unique(part["t"].to_numpy("datetime64[s]"))
        ti = np.searchsorted(times, part["t"].to_numpy("datetime64[s]"))
        key = ti.astype(np.int64) * (1 << 58) + np.asarray(z, dtype=np.int64)
        ukey, inv = np.unique(key, return_inverse=True)
        count = np.bincount(inv)
        mean = np.bincount(inv, weights=part["v"].to_numpy()) / count
        lat, lon = part["lat"].to_numpy(), part["lon"].to_numpy()
        out[str(n)] = PointBins(
            name=str(n),
            times=times,
            tindex=(ukey >> 58).astype(np.int64),
            zones=(ukey & ((1 << 58) - 1)).astype(np.uint64),
            mean=mean,
            count=count.astype(np.float64),
            bbox=(float(lon.min()), float(lat.min()), float(lon.max()), float(lat.max())),
            source=",".join(sorted(set(part["src"]))),
        )
    if not out:
        raise IngestError("source", ",".join(paths), "points with finite lat, lon and values")
    return out
