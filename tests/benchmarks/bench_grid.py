"""Grid throughput, with PROJ's Snyder projection (``+proj=isea``) as the yardstick.

Everything is measured in the same run, best of three repeats. point_to_zone includes the
geodetic-to-authalic step, the projection and the quantisation to zone ids; PROJ's figure
is its forward projection alone, on the same points. Prints markdown tables.

Single points: a field app sends one GPS fix at a time, each different, so the service
computes every answer anew. The table gives the grid's single-zone calls in microseconds
per call, beside PROJ's forward projection of one point (a compiled yardstick of the same
work) and the same call through a one-element array. A profile of the array path for one
point (pyinstrument) showed the time in numpy's per-call overhead: some hundred operations
on one-element arrays in the projection, its Newton steps and the authalic latitude's
Gauss sums, plus a full decode of the id to validate it and another to use it.
"""

from __future__ import annotations

import math
import time

import numpy as np
import pyproj

from alveary import grid

SEED = 20240917
N_POINTS = 1_000_000
LEVEL = 15
REPEATS = 3
DISK_CALLS = 300

# An invented quadrilateral over open ocean, about 600 km across.
POLYGON = {
    "type": "Polygon",
    "coordinates": [[[-28.4, 31.2], [-22.1, 30.6], [-21.3, 35.9], [-27.9, 36.4], [-28.4, 31.2]]],
}


def best_of(fn, repeats: int = REPEATS) -> tuple[float, object]:
    best, out = math.inf, None
    for _ in range(repeats):
        start = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - start)
    return best, out


def level_for(geometry: dict, target: int) -> int:
    """The level at which the polygon holds about ``target`` zones (geodesic area)."""
    ring = np.array(geometry["coordinates"][0])
    area, _ = pyproj.Geod(ellps="WGS84").polygon_area_perimeter(ring[:, 0], ring[:, 1])
    per_zone0 = grid.zone_area(0)
    return max(0, round(math.log(target * per_zone0 / abs(area), 4)))


SINGLE_CALLS = 3000


def per_call(fn) -> float:
    """Microseconds per call, best of three runs of SINGLE_CALLS calls."""
    seconds, _ = best_of(lambda: [fn() for _ in range(SINGLE_CALLS)])
    return seconds / SINGLE_CALLS * 1e6


def single_points(isea) -> None:
    rng = np.random.default_rng(SEED + 1)
    lat = float(np.degrees(np.arcsin(rng.uniform(-1, 1))))
    lon = float(rng.uniform(-180, 180))
    zone = grid.point_to_zone(lat, lon, LEVEL)
    one = np.atleast_1d(zone)
    proj = per_call(lambda: isea.transform(lon, lat))
    rows = [
        ("point_to_zone(lat, lon)", lambda: grid.point_to_zone(lat, lon, LEVEL)),
        ("point_to_zone, 1-element arrays", lambda: grid.point_to_zone([lat], [lon], LEVEL)),
        ("zone_to_point(zone)", lambda: grid.zone_to_point(zone)),
        ("zone_to_point, 1-element array", lambda: grid.zone_to_point(one)),
        ("zone_to_text(zone)", lambda: grid.zone_to_text(zone)),
        ("zone_to_index(zone)", lambda: grid.zone_to_index(zone)),
        ("zone_level(zone)", lambda: grid.zone_level(zone)),
        ("is_pentagon(zone)", lambda: grid.is_pentagon(zone)),
    ]
    print(f"\n### Single points (level {LEVEL}), µs per call\n")
    print("| call | µs per call | / PROJ forward of one point |")
    print("| --- | --- | --- |")
    print(f"| PROJ `+proj=isea` forward, one point | {proj:.1f} | 1.00 |")
    for name, fn in rows:
        t = per_call(fn)
        print(f"| {name} | {t:.1f} | {t / proj:.2f} |")


def main() -> None:
    rng = np.random.default_rng(SEED)
    lat = np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, N_POINTS)))
    lon = rng.uniform(-180.0, 180.0, N_POINTS)

    sphere = pyproj.CRS.from_proj4(f"+proj=longlat +R={grid.R_AUTHALIC!r} +no_defs")
    plane = pyproj.CRS.from_proj4(f"+proj=isea +R={grid.R_AUTHALIC!r} +no_defs")
    isea = pyproj.Transformer.from_crs(sphere, plane, always_xy=True)

    t_ours, zones = best_of(lambda: grid.point_to_zone(lat, lon, LEVEL))
    t_proj, _ = best_of(lambda: isea.transform(lon, lat))
    t_back, _ = best_of(lambda: grid.zone_to_point(zones))

    disk_zones = zones[:DISK_CALLS]

    def disks():
        return sum(np.asarray(grid.zone_disk(z, 10)).size for z in disk_zones)

    t_disk, disk_total = best_of(disks)

    poly_level = level_for(POLYGON, 100_000)
    t_poly, poly_zones = best_of(lambda: grid.zones_in_polygon(POLYGON, poly_level))

    ratio = t_proj / t_ours
    rows = [
        (
            f"point_to_zone, level {LEVEL}",
            f"{N_POINTS:,} points",
            f"{t_ours:.3f} s",
            f"{N_POINTS / t_ours / 1e6:.2f} M points/s",
        ),
        (
            "PROJ `+proj=isea` forward (projection only)",
            f"{N_POINTS:,} points",
            f"{t_proj:.3f} s",
            f"{N_POINTS / t_proj / 1e6:.2f} M points/s",
        ),
        (
            "zone_to_point",
            f"{N_POINTS:,} zones",
            f"{t_back:.3f} s",
            f"{N_POINTS / t_back / 1e6:.2f} M zones/s",
        ),
        (
            "zone_disk(z, 10)",
            f"{DISK_CALLS} calls, {disk_total / DISK_CALLS:.0f} zones each",
            f"{t_disk:.3f} s",
            f"{t_disk / DISK_CALLS * 1e6:.0f} µs per call",
        ),
        (
            f"zones_in_polygon, level {poly_level}",
            f"{np.asarray(poly_zones).size:,} zones",
            f"{t_poly:.3f} s",
            f"{np.asarray(poly_zones).size / t_poly / 1e6:.2f} M zones/s",
        ),
    ]
    print("| operation | size | best of 3 | throughput |")
    print("| --- | --- | --- | --- |")
    for row in rows:
        print("| " + " | ".join(row) + " |")
    single_points(isea)
    verdict = "meets the goal (>= 1.0)" if ratio >= 1.0 else "BELOW the goal of 1.0"
    print(
        f"\npoint_to_zone vs PROJ: PROJ time / ours = **{ratio:.2f}** "
        f"({verdict}; aim 2.0). Ours includes authalic latitude and quantisation to ids."
    )


if __name__ == "__main__":
    main()
