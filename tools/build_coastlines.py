"""Build the map page's coastlines from the npm package ``world-atlas`` (Natural Earth land,
as TopoJSON) into a small GeoJSON file shipped with the service.

    npm pack world-atlas@2.0.2 && tar xzf world-atlas-2.0.2.tgz
    python tools/build_coastlines.py package/land-50m.json

writes ``service/alveary/api/static/data/coastlines.geojson`` (one MultiLineString, the
land outlines; lines along the ±180° cut are left out) and copies the package's licence
beside it. TopoJSON arcs are delta-encoded integers on a quantisation grid: each arc's
points are the running sums of its deltas, scaled and translated by the topology's
``transform``.
"""

from __future__ import annotations

import argparse
import json
import shutil
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
OUT = ROOT / "service" / "alveary" / "api" / "static" / "data"


def decode_arcs(topology: dict) -> list[list[tuple[float, float]]]:
    """Every arc of a quantised TopoJSON topology as (lon, lat) points."""
    (sx, sy), (tx, ty) = topology["transform"]["scale"], topology["transform"]["translate"]
    arcs = []
    for arc in topology["arcs"]:
        x = y = 0
        points = []
        for dx, dy in arc:
            x, y = x + dx, y + dy
            points.append((x * sx + tx, y * sy + ty))
        arcs.append(points)
    return arcs


def arcs_of(geometry: dict) -> set[int]:
    """Indices of the arcs a (Multi)Polygon or GeometryCollection uses (~i is arc i reversed)."""
    if geometry["type"] == "GeometryCollection":
        return set().union(*(arcs_of(g) for g in geometry["geometries"]))
    rings = (
        geometry["arcs"]
        if geometry["type"] == "Polygon"
        else [r for polygon in geometry["arcs"] for r in polygon]
    )
    return {i if i >= 0 else ~i for ring in rings for i in ring}


def split_at_cut(points: list[tuple[float, float]], digits: int) -> list[list[list[float]]]:
    """Round the points; cut the line where it runs along or jumps across ±180°, or runs
    along the south pole's edge of the data."""
    lines, current = [], []
    for lon, lat in points:
        p = [round(lon, digits), round(lat, digits)]
        along = current and abs(p[0]) == 180.0 and abs(current[-1][0]) == 180.0
        across = current and abs(p[0] - current[-1][0]) > 180.0
        pole = current and p[1] <= -89.99 and current[-1][1] <= -89.99
        if along or across or pole:
            if len(current) > 1:
                lines.append(current)
            current = [p]
            continue
        if not current or p != current[-1]:
            current.append(p)
    if len(current) > 1:
        lines.append(current)
    return lines


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("topojson", type=Path, help="world-atlas land-*.json")
    parser.add_argument("--digits", type=int, default=2, help="decimals kept (default 2)")
    args = parser.parse_args()
    topology = json.loads(args.topojson.read_text())
    arcs = decode_arcs(topology)
    lines = []
    for i in sorted(arcs_of(topology["objects"]["land"])):
        lines.extend(split_at_cut(arcs[i], args.digits))
    feature = {
        "type": "Feature",
        "properties": {"source": f"world-atlas {args.topojson.name} (Natural Earth land)"},
        "geometry": {"type": "MultiLineString", "coordinates": lines},
    }
    OUT.mkdir(parents=True, exist_ok=True)
    text = json.dumps({"type": "FeatureCollection", "features": [feature]}, separators=(",", ":"))
    (OUT / "coastlines.geojson").write_text(text)
    licence = args.topojson.parent / "LICENSE"
    if licence.exists():
        shutil.copy(licence, OUT / "LICENSE-world-atlas.txt")
    print(f"{len(lines)} lines, {sum(len(x) for x in lines)} points, {len(text)} bytes")


if __name__ == "__main__":
    main()
