"""Point tables over many time steps, judged against a pandas groupby made in the test."""

from __future__ import annotations

import numpy as np
import pandas as pd

from alveary import grid
from alveary.cube import open_cube
from alveary.ingest import ingest


def test_more_than_400_daily_steps_land_on_their_days(tmp_path):
    rng = np.random.default_rng(400)
    n, days, level = 6000, 420, 6
    table = pd.DataFrame(
        {
            "lat": rng.uniform(-60.0, 70.0, n),
            "lon": rng.uniform(-180.0, 180.0, n),
            "time": pd.Timestamp("2023-01-01", tz="UTC")
            + pd.to_timedelta(rng.integers(0, days * 86400, n), unit="s"),
            "rain": rng.gamma(2.0, 3.0, n),
        }
    )
    # several points in one zone on one day, so that means and counts are exercised
    table.loc[:99, ["lat", "lon"]] = (12.5, 40.25)
    table.loc[:99, "time"] = pd.Timestamp("2024-02-20T07:00:00", tz="UTC")
    path = tmp_path / "rain.csv"
    table.to_csv(path, index=False)
    ingest([str(path)], str(tmp_path / "c"), level, cube_id="rain")
    cube = open_cube(str(tmp_path / "c"))

    # reference: pandas groupby over (UTC day, zone)
    table["zone"] = grid.point_to_zone(table["lat"].to_numpy(), table["lon"].to_numpy(), level)
    table["day"] = table["time"].dt.floor("1D").dt.tz_localize(None)
    ref = table.groupby(["day", "zone"])["rain"].agg(["mean", "count"]).reset_index()
    days_seen = np.sort(table["day"].unique()).astype("datetime64[s]")
    assert days_seen.size > 400
    np.testing.assert_array_equal(cube.times, days_seen)

    zones = np.unique(ref["zone"].to_numpy()).astype(np.uint64)
    mean = cube.read("rain", zones)
    count = cube.read("rain_count", zones)
    t = np.searchsorted(cube.times, ref["day"].to_numpy().astype("datetime64[s]"))
    z = np.searchsorted(zones, ref["zone"].to_numpy().astype(np.uint64))
    np.testing.assert_allclose(mean[t, z], ref["mean"].to_numpy(), rtol=1e-6)  # float32
    np.testing.assert_array_equal(count[t, z], ref["count"].to_numpy())
    # nothing anywhere else: every binned cell is a groupby row, and all points counted
    assert int(np.isfinite(count).sum()) == len(ref)
    assert np.nansum(count) == n
