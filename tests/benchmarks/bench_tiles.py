"""Map tile rendering against the floor any PNG tile server pays: Pillow encoding a
256 × 256 RGBA PNG, measured in the same run on the same pictures.

Three figures per tile, each the best of three, medians over seeded tiles:

- encode: Pillow alone (``Image.save(..., "PNG")`` at the tile encoder's zlib level);
- new tile: the pixel-to-zone map (``point_to_zone`` on 257 × 257 pixel centres), the
  values of the tile's zones, colouring and PNG encoding;
- another time step of the same tile: the pixel-to-zone map comes from the cache, so only
  the values, colouring and encoding are paid.

Values come from a stand-in for a warm cube (a smooth field looked up by each zone's
place in the five-strip layout): about what the executor costs when every chunk is
cached, without its per-request overhead. Goals: new tile <= 4x encode, another step <= 2x encode.
The pixel-to-zone map is also timed the plain way (``point_to_zone`` on every pixel
centre) beside ``raster_to_zone``, which the service uses.

Then over HTTP: a real ``alveary serve`` process (one worker, answer cache off, chunk
cache on) serving a cube on the S3-protocol test server: the time of one cold tile (its
chunks read from the S3 server), and tiles per second per worker for new tiles and for
another time step of tiles already drawn (chunks warm), against Pillow's encode measured
in this process.
"""

from __future__ import annotations

import io
import math
import statistics
import time

import httpx
import numpy as np
from PIL import Image

from alveary import grid
from alveary.api._colours import colour_scale
from alveary.api._mvt import zone_tile_mvt
from alveary.api._render import PNG_COMPRESSION, encode_png, render_tile
from alveary.cube import create_cube
from alveary.query._tiles import (
    PixelZoneCache,
    default_level,
    pixel_centres,
    tile_zone_candidates,
    tile_zones,
)
from support.s3 import S3Server
from support.server import ServiceProcess

SEED = 20260512
N_TILES = 16
REPEATS = 3
LEVELS = tuple(range(0, 14))
STEPS = 2


def best_of(fn, repeats: int = REPEATS) -> tuple[float, object]:
    best, out = math.inf, None
    for _ in range(repeats):
        start = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - start)
    return best, out


class WarmCube:
    """Values of zones per time step, looked up by their place in the five-strip layout:
    a smooth field with a little noise, as measured fields are. A lookup costs about what
    a gather from cached chunks costs (a few array operations per zone)."""

    def read(self, zones: np.ndarray, level: int, step: int) -> np.ndarray:
        _, region, i, j = grid.zone_to_index(zones)
        n = float(1 << level)
        u, v = i / (2.0 * n), j / n
        smooth = 0.25 + 0.15 * np.sin(6 * np.pi * u + region) * np.cos(4 * np.pi * v)
        noise = ((zones * np.uint64(2654435761)) % np.uint64(1000)).astype(np.float64)
        return smooth + 0.004 * (noise / 1000.0 - 0.5) + 0.01 * step


def pick_tiles(rng: np.random.Generator) -> list[tuple[int, int, int]]:
    tiles = []
    while len(tiles) < N_TILES:
        z = int(rng.integers(3, 12))
        n = 1 << z
        y = int(rng.integers(n // 8, n - n // 8))  # away from the polar rows
        x = int(rng.integers(0, n))
        tiles.append((z, y, x))
    return tiles


def pillow_encode(rgba: np.ndarray, level: int) -> bytes:
    out = io.BytesIO()
    Image.fromarray(rgba, "RGBA").save(out, format="PNG", compress_level=level)
    return out.getvalue()


def main() -> None:
    rng = np.random.default_rng(SEED)
    tiles = pick_tiles(rng)
    cube = WarmCube()
    scale = colour_scale("nectar")
    vmin, vmax = 0.05, 0.45

    rows = []
    for z, y, x in tiles:
        level = default_level(z, y, LEVELS)
        cache = PixelZoneCache(64 << 20)

        def new_tile(z=z, y=y, x=x, level=level, cache=cache):
            cache.clear()
            tz = cache.get(z, y, x, level)
            rgba = render_tile(tz.index, cube.read(tz.zones, level, 0), scale, vmin, vmax)
            return encode_png(rgba), rgba

        def other_step(z=z, y=y, x=x, level=level, cache=cache):
            tz = cache.get(z, y, x, level)
            rgba = render_tile(tz.index, cube.read(tz.zones, level, 1), scale, vmin, vmax)
            return encode_png(rgba)

        t_new, (png, rgba) = best_of(new_tile)
        t_step, _ = best_of(other_step)
        t_encode, _ = best_of(lambda rgba=rgba: pillow_encode(rgba, PNG_COMPRESSION))
        t_encode6, _ = best_of(lambda rgba=rgba: pillow_encode(rgba, 6))
        t_map, tz = best_of(lambda z=z, y=y, x=x, level=level: tile_zones(z, y, x, level))
        lat, lon = pixel_centres(z, y, x, pad=1)
        t_plain, _ = best_of(
            lambda lat=lat, lon=lon, level=level: grid.point_to_zone(lat, lon, level)
        )
        rows.append((t_encode, t_new, t_step, t_encode6, t_map, len(png), tz.zones.size, t_plain))

    enc = statistics.median(r[0] for r in rows)
    new = statistics.median(r[1] for r in rows)
    step = statistics.median(r[2] for r in rows)
    enc6 = statistics.median(r[3] for r in rows)
    pmap = statistics.median(r[4] for r in rows)
    size = statistics.median(r[5] for r in rows)
    nzones = statistics.median(r[6] for r in rows)
    plain = statistics.median(r[7] for r in rows)
    ratio_new = statistics.median(r[1] / r[0] for r in rows)
    ratio_step = statistics.median(r[2] / r[0] for r in rows)

    # vector tiles: zones about 16 px across, with one variable
    vz, vy, vx = tiles[0]
    vlevel = default_level(vz, vy, LEVELS, target=16.0)
    vzones = tile_zone_candidates(vz, vy, vx, vlevel)
    t_mvt, mvt = best_of(
        lambda: zone_tile_mvt(vz, vy, vx, vzones, {"v": np.linspace(0, 1, vzones.size)})
    )

    print(f"{N_TILES} seeded tiles (z 3-11), default level for zones 2.5-4.9 px across,")
    print(f"median {nzones:.0f} zones a tile, median PNG {size / 1024:.1f} KiB; one process.")
    print("Ratios are medians of each tile's own ratio (its figures measured back to back).\n")
    print("| step | median time | ratio to Pillow encode | tiles/s |")
    print("|---|---|---|---|")
    print(
        f"| Pillow encode alone (zlib level {PNG_COMPRESSION}) | {enc * 1e3:.2f} ms | 1.00 | "
        f"{1 / enc:.0f} |"
    )
    print(
        f"| new tile (pixel-to-zone map + values + colour + PNG) | {new * 1e3:.2f} ms | "
        f"{ratio_new:.2f} (goal <= 4) | {1 / new:.0f} |"
    )
    print(
        f"| another time step, cached map | {step * 1e3:.2f} ms | {ratio_step:.2f} "
        f"(goal <= 2) | {1 / step:.0f} |"
    )
    print(f"| of which the pixel-to-zone map | {pmap * 1e3:.2f} ms | {pmap / enc:.2f} | |")
    print(
        f"| the map by point_to_zone on every pixel instead | {plain * 1e3:.2f} ms | "
        f"{plain / enc:.2f} | |"
    )
    print(
        f"| Pillow encode at its default zlib level 6 | {enc6 * 1e3:.2f} ms | {enc6 / enc:.2f} | |"
    )
    print(
        f"\nvector tile: {vzones.size} candidate zones at level {vlevel}, "
        f"{t_mvt * 1e3:.1f} ms, {len(mvt) / 1024:.1f} KiB"
    )
    over_http(enc)


HTTP_LEVELS = (4, 6, 8)
HTTP_REGION = (-20.0, 20.0, 40.0, 60.0)  # west, south, east, north
HTTP_STEPS = 12


def build_http_cube(url: str, options: dict) -> None:
    times = np.datetime64("2025-01-01", "s") + np.arange(HTTP_STEPS) * np.timedelta64(1, "D")
    writer = create_cube(
        url,
        cube_id="tiles",
        times=times,
        levels=list(HTTP_LEVELS),
        coverage=HTTP_REGION,
        variables={"v": {"units": "1", "dtype": "float32"}},
        storage_options=options,
    )
    cube = WarmCube()
    for level in HTTP_LEVELS:
        zones = grid.zones_in_bbox(*HTTP_REGION, level)
        steps = np.stack([cube.read(zones, level, t) for t in range(HTTP_STEPS)])
        writer.write("v", level, zones, steps)
    writer.publish()


def over_http(encode_s: float) -> None:
    # tiles of zoom 6 over the region: level 8 zones (about 2.5-5 px) on every tile
    n = 1 << 6
    xs = range(int((HTTP_REGION[0] + 180) / 360 * n) + 1, int((HTTP_REGION[2] + 180) / 360 * n))
    ys = range(19, 25)
    tiles = [(6, y, x) for y in ys for x in xs][:40]
    with S3Server() as s3:
        bucket = s3.create_bucket()
        url, options = f"s3://{bucket}/tiles", s3.storage_options()
        build_http_cube(url, options)
        cubes = [{"id": "tiles", "url": url, "storage_options": options}]
        opts = {"answer_cache_bytes": 0, "workers": 1}
        with (
            ServiceProcess(cubes, options=opts) as svc,
            httpx.Client(base_url=svc.url, timeout=120) as http,
        ):

            def get(tile, step):
                z, y, x = tile
                r = http.get(
                    f"/collections/tiles/map/tiles/WebMercatorQuad/{z}/{y}/{x}",
                    params={"datetime": f"2025-01-{step + 1:02d}T00:00:00Z"},
                )
                r.raise_for_status()

            start = time.perf_counter()
            get(tiles[0], 0)  # cold: chunks from the S3 server, a new pixel-to-zone map
            cold = time.perf_counter() - start
            start = time.perf_counter()
            for tile in tiles[1:]:
                get(tile, 0)  # new tiles (their chunks mostly cold too)
            new = (time.perf_counter() - start) / (len(tiles) - 1)
            for tile in tiles:
                get(tile, 1)  # chunks of step 1 warm (a chunk holds several steps)
            start = time.perf_counter()
            for tile in tiles:
                get(tile, 2)  # another step: cached pixel maps, warm chunks
            step = (time.perf_counter() - start) / len(tiles)
    print(f"\nover HTTP (one worker, answer cache off, {len(tiles)} tiles of zoom 6):")
    print("| figure | time | ratio to Pillow encode | tiles/s per worker |")
    print("|---|---|---|---|")
    print(
        f"| one cold tile (chunks from the S3 server) | {cold * 1e3:.1f} ms | "
        f"{cold / encode_s:.1f} | |"
    )
    print(f"| new tiles, in turn | {new * 1e3:.1f} ms | {new / encode_s:.1f} | {1 / new:.0f} |")
    print(
        f"| another time step, chunks warm | {step * 1e3:.1f} ms | {step / encode_s:.1f} | "
        f"{1 / step:.0f} |"
    )


if __name__ == "__main__":
    main()
