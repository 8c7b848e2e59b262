"""``alveary zone``: grid facts for a point (zone id and text, centre, boundary, area)."""

from __future__ import annotations

import argparse
import json
from typing import Any

import numpy as np

from alveary import grid

__all__ = ["register", "zone_facts"]


def register(subparsers: Any) -> None:
    p = subparsers.add_parser(
        "zone",
        help="print the zone under a point: id, text form, centre, boundary, area",
        description="Print the zone under a WGS84 point at a refinement level.",
    )
    p.add_argument("--lat", type=float, required=True, help="latitude, degrees [-90, 90]")
    p.add_argument("--lon", type=float, required=True, help="longitude, degrees")
    p.add_argument(
        "--level", type=int, required=True, help=f"refinement level [0, {grid.MAX_LEVEL}]"
    )
    p.add_argument("--json", action="store_true", help="print JSON instead of text")
    p.set_defaults(handler=_run)


def zone_facts(lat: float, lon: float, level: int) -> dict[str, Any]:
    """What the grid says about the zone under a point, as a JSON-ready dict."""
    zone = grid.point_to_zone(lat, lon, level)
    clat, clon = grid.zone_to_point(zone)
    return {
        "zone": int(zone),
        "text": str(grid.zone_to_text(zone)),
        "level": level,
        "pentagon": bool(grid.is_pentagon(zone)),
        "centre": {"lat": float(clat), "lon": float(clon)},
        "boundary": [[float(a), float(b)] for a, b in np.asarray(grid.zone_boundary(zone))],
        "area_m2": float(grid.zone_areas(zone)),
    }


def _run(args: argparse.Namespace) -> int:
    facts = zone_facts(args.lat, args.lon, args.level)
    if args.json:
        print(json.dumps(facts, indent=2))
        return 0
    c = facts["centre"]
    print(f"zone      {facts['zone']}  ({facts['text']}, level {facts['level']})")
    print(f"kind      {'pentagon' if facts['pentagon'] else 'hexagon'}")
    print(f"centre    {c['lat']:.7f}, {c['lon']:.7f}")
    print(f"area      {facts['area_m2']:,.1f} m²")
    print("boundary  (lat, lon), counter-clockwise seen from outside the Earth")
    for lat, lon in facts["boundary"]:
        print(f"          {lat:.7f}, {lon:.7f}")
    return 0
