"""Neighbourhood statistics and time aggregation: ratios measured in one run.

1. Focal mean, k = 3, over a bbox of about 100 000 zones at level 11, against the cost of
   just gathering the box's values from strip arrays (what a plain bbox query does with
   its decoded chunks). The focal path gathers the box plus its halo, builds the windows
   and computes the mean. Also: the halo's extra zones and extra 64 x 64 chunks (the
   read plan's count), and the other statistics.
2. Monthly (and weekly) aggregation of a one-year daily series of 10 000 zones, against
   gathering the plain series.

Best of seven repeats each, in CPU time of this process (single-threaded numpy; other
work on a shared machine disturbs it less than wall time). Prints markdown tables; never
asserts a time.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable

import numpy as np

from alveary import grid
from alveary.cube import ChunkShape, LevelLayout
from alveary.query._focal import focal_gradient, focal_kernel, focal_statistic
from alveary.query._timeagg import aggregate_periods, anomaly

SEED = 20240611
REPEATS = 7
LEVEL = 11
K = 3
# An invented box over the Atlantic, sized for about 100 000 level-11 zones.
BBOX = (-38.0, 20.0, -26.2, 31.0)


def best_of(fn: Callable[[], object], repeats: int = REPEATS) -> tuple[float, object]:
    best, out = math.inf, None
    for _ in range(repeats):
        start = time.process_time()
        out = fn()
        best = min(best, time.process_time() - start)
    return best, out


class StripStore:
    """Decoded strip arrays (time, rows, cols) covering the cells of some zones, per strip:
    a stand-in for the chunks a read has decoded."""

    def __init__(self, zones: np.ndarray, ntime: int, rng: np.random.Generator) -> None:
        _, region, i, j = grid.zone_to_index(zones)
        self.parts = {}
        for r in np.unique(region).tolist():
            sel = region == r
            i0, j0 = int(i[sel].min()), int(j[sel].min())
            shape = (ntime, int(i[sel].max()) - i0 + 1, int(j[sel].max()) - j0 + 1)
            self.parts[r] = (i0, j0, rng.normal(280.0, 5.0, size=shape))

    def gather(self, zones: np.ndarray) -> np.ndarray:
        """(time, zones) values: one fancy index per strip part."""
        _, region, i, j = grid.zone_to_index(zones)
        ntime = next(iter(self.parts.values()))[2].shape[0]
        out = np.empty((ntime, zones.size))
        for r, (i0, j0, arr) in self.parts.items():
            sel = np.flatnonzero(region == r)
            out[:, sel] = arr[:, i[sel] - i0, j[sel] - j0]
        return out


def chunks_of(zones: np.ndarray) -> int:
    lay = LevelLayout(LEVEL, 1, ChunkShape(1, 64, 64))
    _, region, i, j = grid.zone_to_index(zones)
    rb, cb, _, _ = lay.spatial_chunk(i, j)
    return int(np.unique((region * 4096 + rb) * 4096 + cb).size)


def table(rows: list[tuple[str, ...]], header: tuple[str, ...]) -> None:
    print("| " + " | ".join(header) + " |")
    print("|" + "|".join("---" for _ in header) + "|")
    for row in rows:
        print("| " + " | ".join(row) + " |")


def focal(rng: np.random.Generator) -> None:
    targets = grid.zones_in_bbox(*BBOX, LEVEL)
    needed = grid.disk_union(targets, K)
    print(
        f"level {LEVEL}, bbox {BBOX}: {targets.size:,} zones; k = {K}: halo "
        f"{needed.size - targets.size:,} zones (+{(needed.size / targets.size - 1) * 100:.1f} %)"
        f", 64 x 64 chunks {chunks_of(targets)} -> {chunks_of(needed)}\n"
    )
    t_box, _ = best_of(lambda: grid.zones_in_bbox(*BBOX, LEVEL))
    t_union, _ = best_of(lambda: grid.disk_union(targets, K))
    t_windows, windows = best_of(lambda: grid.disk_windows(targets, K))
    windows1 = grid.disk_windows(targets, 1)
    rows = []
    for ntime in (1, 32):
        store = StripStore(needed, ntime, rng)
        t_plain, _ = best_of(lambda store=store: store.gather(targets))
        t_needed, values = best_of(lambda store=store: store.gather(needed))
        t_mean, _ = best_of(lambda values=values: focal_statistic(values, windows, "mean"))
        total = t_needed + t_windows + t_mean
        query = t_box + t_plain  # a plain bbox query's own computing: zones, then values
        rows += [
            (f"{ntime}", "gather the box (reference)", f"{t_plain * 1e3:.1f} ms", "1.00"),
            (f"{ntime}", "zones_in_bbox", f"{t_box * 1e3:.1f} ms", ""),
            (f"{ntime}", "disk_union (plan: halo)", f"{t_union * 1e3:.1f} ms", ""),
            (f"{ntime}", "disk_windows", f"{t_windows * 1e3:.1f} ms", ""),
            (f"{ntime}", "gather box + halo", f"{t_needed * 1e3:.1f} ms", ""),
            (
                f"{ntime}",
                "focal mean k=3",
                f"{t_mean * 1e3:.1f} ms",
                f"{t_mean / t_plain:.2f}",
            ),
            (
                f"{ntime}",
                "**gather + windows + focal mean**",
                f"{total * 1e3:.1f} ms",
                f"**{total / t_plain:.2f}**",
            ),
            (
                f"{ntime}",
                "zones + gather + windows + focal mean, over zones + gather",
                f"{(t_box + total) * 1e3:.1f} ms",
                f"{(t_box + total) / query:.2f} (of the plain box's compute)",
            ),
        ]
        if ntime == 1:
            for name, fn in (
                ("min", lambda v=values: focal_statistic(v, windows, "min")),
                ("std", lambda v=values: focal_statistic(v, windows, "std")),
                ("count", lambda v=values: focal_statistic(v, windows, "count")),
                ("kernel 4,2,1,0.5", lambda v=values: focal_kernel(v, windows, [4, 2, 1, 0.5])),
                ("gradient (k=3 plane fit)", lambda v=values: focal_gradient(v, windows)),
                (
                    "gradient (k=1, six neighbours)",
                    lambda v=values[:, np.searchsorted(needed, windows1.needed)]: focal_gradient(
                        v, windows1
                    ),
                ),
            ):
                t, _ = best_of(fn)
                rows.append(
                    (f"{ntime}", f"focal {name}", f"{t * 1e3:.1f} ms", f"{t / t_plain:.2f}")
                )
    table(rows, ("time steps", "step", "time", "x gather"))


def monthly(rng: np.random.Generator) -> None:
    zones = grid.zones_in_bbox(8.0, 38.0, 20.0, 48.0, 10)[:10_000]
    days = np.arange("2023-01-01", "2024-01-01", dtype="datetime64[D]").astype("datetime64[s]")
    store = StripStore(zones, days.size, rng)
    t_plain, values = best_of(lambda: store.gather(zones))
    print(f"\none year of daily values ({days.size} steps) at {zones.size:,} zones\n")
    rows = [("gather the series (reference)", f"{t_plain * 1e3:.1f} ms", "1.00")]
    gappy = np.where(rng.random(values.shape) < 0.1, np.nan, values)
    for label, fn in (
        ("P1M mean", lambda: aggregate_periods(values, days, "P1M", "mean")),
        ("P1M mean, 10 % NaN", lambda: aggregate_periods(gappy, days, "P1M", "mean")),
        ("P1M max", lambda: aggregate_periods(values, days, "P1M", "max")),
        ("P1M last", lambda: aggregate_periods(values, days, "P1M", "last")),
        ("P7D mean", lambda: aggregate_periods(values, days, "P7D", "mean")),
        ("anomaly by day of year", lambda: anomaly(values, days, "dayofyear")),
    ):
        t, _ = best_of(fn)
        rows.append((label, f"{t * 1e3:.1f} ms", f"{t / t_plain:.2f}"))
    t_mean = float(rows[1][1].split()[0]) / 1e3
    rows.append(
        (
            "**gather + P1M mean**",
            f"{(t_plain + t_mean) * 1e3:.1f} ms",
            f"**{(t_plain + t_mean) / t_plain:.2f}**",
        )
    )
    table(rows, ("step", "time", "x gather"))


def main() -> None:
    rng = np.random.default_rng(SEED)
    focal(rng)
    monthly(rng)


if __name__ == "__main__":
    main()
