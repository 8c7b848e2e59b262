"""The ``coords`` parameter of OGC API - EDR: Well-Known Text geometries read into query inputs.

WKT is the text form of OGC Simple Features (OGC 06-103r4, ISO 19125-1). The EDR queries
use four of its types, two-dimensional only, with x the longitude and y the latitude in
degrees (CRS84):

- ``POINT(lon lat)``: a ``position`` or ``radius`` query;
- ``MULTIPOINT((lon lat), (lon lat))``, or the bare ``MULTIPOINT(lon lat, lon lat)`` that
  many writers produce: a ``position`` query at several places;
- ``POLYGON((lon lat, ...), (hole ...))`` and ``MULTIPOLYGON(((...)), ((...)))``: an
  ``area`` query. Rings are closed (first position = last) and have at least four
  positions, as Simple Features require.

Type names are case-insensitive and whitespace is free. Anything else (other types,
``Z``/``M`` coordinates, ``EMPTY``, an SRID prefix, a longitude outside [-180, 180] or a
latitude outside [-90, 90]) is refused with :class:`alveary.InvalidInput` naming
``coords``, where in the text the problem lies, and what is allowed.

The result is a GeoJSON geometry (RFC 7946: positions as ``[lon, lat]``), the form the
rest of the query layer reads: :func:`coords_lat_lon` gives the latitudes and longitudes
of points, :func:`coords_area` the checked request area of polygons.
"""

from __future__ import annotations

import re
from collections.abc import Collection
from typing import Any

import numpy as np

from alveary._errors import InvalidInput, LimitExceeded
from alveary.query._geometry import Area, parse_polygon

__all__ = ["WKT_TYPES", "coords_area", "coords_lat_lon", "parse_coords"]

#: The WKT types understood, as GeoJSON type names.
WKT_TYPES: tuple[str, ...] = ("Point", "MultiPoint", "Polygon", "MultiPolygon")

_PARAMETER = "coords"
_TAGS = {name.upper(): name for name in WKT_TYPES}
_EXAMPLES = {
    "Point": "POINT(lon lat)",
    "MultiPoint": "MULTIPOINT((lon lat), ...)",
    "Polygon": "POLYGON((lon lat, ...))",
    "MultiPolygon": "MULTIPOLYGON(((lon lat, ...)), ...)",
}
_RANGE = "longitude in [-180, 180] and latitude in [-90, 90] degrees (CRS84)"
_NUMBER = r"[-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?"
_POSITION = re.compile(rf"\s*({_NUMBER})\s+({_NUMBER})\s*")
_NUMBERS = re.compile(_NUMBER)
_WORD = re.compile(r"[A-Za-z]+")
# The most common value by far, read in one match (anything else takes the full reader).
_PLAIN_POINT = re.compile(rf"\s*POINT\s*\(\s*({_NUMBER})\s+({_NUMBER})\s*\)\s*", re.IGNORECASE)


def _allowed(kinds: Collection[str]) -> str:
    """What ``coords`` may be, in words, e.g. ``"WKT POINT(lon lat); longitude in ..."``."""
    names = " or ".join(_EXAMPLES[k] for k in WKT_TYPES if k in kinds)
    return f"WKT {names}, 2-D, {_RANGE}"


def _short(text: str) -> str:
    return text if len(text) <= 120 else text[:117] + "..."


class _Reader:
    """A cursor over WKT text; every error names ``coords`` and the character position."""

    def __init__(self, text: str, allowed: str) -> None:
        self.text = text
        self.i = 0
        self.allowed = allowed

    def fail(self, problem: str, at: int | None = None) -> InvalidInput:
        where = self.i if at is None else at
        message = f"{_PARAMETER}: {problem} at character {where + 1}; allowed: {self.allowed}"
        return InvalidInput(_PARAMETER, _short(self.text), self.allowed, message=message)

    def skip(self) -> None:
        while self.i < len(self.text) and self.text[self.i].isspace():
            self.i += 1

    def peek(self) -> str:
        self.skip()
        return self.text[self.i] if self.i < len(self.text) else ""

    def word(self) -> str:
        self.skip()
        m = _WORD.match(self.text, self.i)
        if m is None:
            return ""
        self.i = m.end()
        return m.group().upper()

    def expect(self, char: str) -> None:
        if self.peek() != char:
            found = repr(self.peek()) if self.peek() else "the end of the text"
            raise self.fail(f"expected '{char}', found {found}")
        self.i += 1

    def accept(self, char: str) -> bool:
        if self.peek() == char:
            self.i += 1
            return True
        return False

    def positions(self) -> list[list[float]]:
        """``( x y, x y, ... )``: a parenthesised list of 2-D positions."""
        self.expect("(")
        end = self.text.find(")", self.i)
        start = self.text.find("(", self.i)
        if end < 0 or 0 <= start < end:
            raise self.fail("expected a list of positions 'lon lat, lon lat, ...'")
        out: list[list[float]] = []
        offset = self.i
        for part in self.text[self.i : end].split(","):
            m = _POSITION.fullmatch(part)
            if m is None:
                count = len(_NUMBERS.findall(part))
                problem = (
                    f"a position of {count} numbers (only 2-D 'lon lat' positions are allowed)"
                    if count > 2 and _NUMBERS.sub("", part).strip() == ""
                    else f"{part.strip()!r} is not a position 'lon lat'"
                )
                raise self.fail(problem, offset)
            out.append([float(m.group(1)), float(m.group(2))])
            offset += len(part) + 1
        self.i = end + 1
        return out

    def end(self) -> None:
        self.skip()
        if self.i != len(self.text):
            raise self.fail("unexpected text after the geometry")


def _point(r: _Reader) -> list[float]:
    at = r.i
    pos = r.positions()
    if len(pos) != 1:
        raise r.fail(f"a point holds one position, found {len(pos)}", at)
    return pos[0]


def _multipoint(r: _Reader) -> list[list[float]]:
    r.skip()
    save = r.i
    r.expect("(")
    if r.peek() != "(":  # the bare form MULTIPOINT(x y, x y)
        r.i = save
        return r.positions()
    out = [_point(r)]
    while r.accept(","):
        out.append(_point(r))
    r.expect(")")
    return out


def _ring(r: _Reader) -> list[list[float]]:
    at = r.i
    ring = r.positions()
    if len(ring) < 4:
        raise r.fail(f"a ring of {len(ring)} positions (a ring needs at least 4)", at)
    if ring[0] != ring[-1]:
        raise r.fail("a ring that is not closed (its first and last positions differ)", at)
    return ring


def _polygon(r: _Reader) -> list[list[list[float]]]:
    r.expect("(")
    rings = [_ring(r)]
    while r.accept(","):
        rings.append(_ring(r))
    r.expect(")")
    return rings


def _multipolygon(r: _Reader) -> list[list[list[list[float]]]]:
    r.expect("(")
    polygons = [_polygon(r)]
    while r.accept(","):
        polygons.append(_polygon(r))
    r.expect(")")
    return polygons


_BODIES = {"Point": _point, "MultiPoint": _multipoint, "Polygon": _polygon}


def _read(r: _Reader, kinds: Collection[str]) -> dict[str, Any]:
    tag = r.word()
    base = tag.rstrip("ZM") if tag not in _TAGS else tag
    if tag not in _TAGS and base in _TAGS:
        raise r.fail(f"{tag} has Z or M coordinates; only 2-D geometries are allowed", 0)
    kind = _TAGS.get(tag)
    if kind is None:
        found = tag or (repr(r.peek()) if r.peek() else "nothing")
        raise r.fail(f"unknown geometry type {found}", 0)
    if kind not in kinds:
        raise r.fail(f"a {tag} is not allowed here", 0)
    at = r.i
    modifier = r.word()
    if modifier in ("Z", "M", "ZM"):
        raise r.fail(f"{tag} {modifier} has Z or M coordinates; only 2-D is allowed", at)
    if modifier == "EMPTY":
        raise r.fail(f"an empty {tag}", at)
    if modifier:
        raise r.fail(f"unexpected word {modifier!r} after {tag}", at)
    coordinates = _multipolygon(r) if kind == "MultiPolygon" else _BODIES[kind](r)
    r.end()
    return {"type": kind, "coordinates": coordinates}


def _positions_of(geometry: dict[str, Any]) -> np.ndarray:
    """Every position of a geometry as an (n, 2) array of (lon, lat)."""
    coords = geometry["coordinates"]
    kind = geometry["type"]
    if kind == "Point":
        flat = [coords]
    elif kind == "MultiPoint":
        flat = coords
    elif kind == "Polygon":
        flat = [p for ring in coords for p in ring]
    else:
        flat = [p for poly in coords for ring in poly for p in ring]
    return np.asarray(flat, dtype=np.float64).reshape(-1, 2)


def parse_coords(
    text: str,
    kinds: Collection[str] = WKT_TYPES,
    *,
    max_positions: int | None = None,
) -> dict[str, Any]:
    """Read a WKT ``coords`` value into a GeoJSON geometry.

    Parameters
    ----------
    text:
        The ``coords`` parameter as sent.
    kinds:
        The GeoJSON type names allowed for this query, a subset of :data:`WKT_TYPES`.
    max_positions:
        Refuse more positions than this with :class:`alveary.LimitExceeded`.

    Raises
    ------
    InvalidInput
        Named ``coords``: unreadable text, a type not in ``kinds``, Z/M or empty
        geometries, open or short rings, coordinates out of range.

    Examples
    --------
    >>> parse_coords("POINT(-36.1 30.55)")
    {'type': 'Point', 'coordinates': [-36.1, 30.55]}
    >>> parse_coords("multipoint (0 1, 2 3)")["coordinates"]
    [[0.0, 1.0], [2.0, 3.0]]
    >>> parse_coords("POLYGON((0 0, 1 0, 1 1, 0 0))")["coordinates"]
    [[[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 0.0]]]
    >>> parse_coords("POINT(10 95)")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: coords at position 0 is [10.0, 95.0]; allowed: longitude in [-180, 180] and latitude in [-90, 90] degrees (CRS84)
    >>> parse_coords("LINESTRING(0 0, 1 1)", ("Point",))
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: coords: unknown geometry type LINESTRING at character 1; allowed: WKT POINT(lon lat), 2-D, longitude in [-180, 180] and latitude in [-90, 90] degrees (CRS84)
    """  # noqa: E501
    unknown = set(kinds) - set(WKT_TYPES)
    if unknown:
        raise ValueError(f"unknown WKT kinds {sorted(unknown)}; known: {WKT_TYPES}")
    if "Point" in kinds and isinstance(text, str) and (max_positions is None or max_positions):
        plain = _PLAIN_POINT.fullmatch(text)
        if plain is not None:
            lon, lat = float(plain.group(1)), float(plain.group(2))
            if abs(lon) <= 180 and abs(lat) <= 90:
                return {"type": "Point", "coordinates": [lon, lat]}
    allowed = _allowed(kinds)
    if not isinstance(text, str) or not text.strip():
        raise InvalidInput(_PARAMETER, text, allowed)
    geometry = _read(_Reader(text, allowed), kinds)
    positions = _positions_of(geometry)
    if max_positions is not None and positions.shape[0] > max_positions:
        raise LimitExceeded("positions in coords", int(positions.shape[0]), max_positions)
    bad = np.nonzero(~((np.abs(positions[:, 0]) <= 180) & (np.abs(positions[:, 1]) <= 90)))[0]
    if bad.size:
        i = int(bad[0])
        raise InvalidInput(_PARAMETER, positions[i].tolist(), _RANGE, index=i)
    return geometry


def coords_lat_lon(geometry: dict[str, Any]) -> tuple[np.ndarray, np.ndarray]:
    """Latitudes and longitudes of a Point or MultiPoint geometry, as float64 arrays.

    >>> lat, lon = coords_lat_lon(parse_coords("MULTIPOINT((10 20), (30 40))"))
    >>> lat.tolist(), lon.tolist()
    ([20.0, 40.0], [10.0, 30.0])
    """
    if geometry.get("type") not in ("Point", "MultiPoint"):
        raise InvalidInput(_PARAMETER, geometry.get("type"), _allowed(("Point", "MultiPoint")))
    positions = _positions_of(geometry)
    return positions[:, 1].copy(), positions[:, 0].copy()


def coords_area(text: str, max_vertices: int) -> Area:
    """The checked request area of a WKT POLYGON or MULTIPOLYGON.

    The polygon is read as the native polygon query reads GeoJSON (edges the short way
    round, so a ring may cross the antimeridian; holes kept; invalid polygons refused),
    and every error names ``coords``.

    >>> area = coords_area("POLYGON((-36.2 30.5, -36.0 30.5, -36.0 30.6, -36.2 30.5))", 100)
    >>> area.geometry["type"], area.vertices
    ('Polygon', 3)
    >>> coords_area("POLYGON((0 0, 1 1, 1 0, 0 1, 0 0))", 100)
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: coords is 'Self-intersection[0.5 0.5]'; allowed: a valid polygon (OGC simple features)
    """  # noqa: E501
    geometry = parse_coords(text, ("Polygon", "MultiPolygon"))
    try:
        return parse_polygon(geometry, max_vertices)
    except InvalidInput as exc:
        raise InvalidInput(_PARAMETER, exc.value, exc.allowed, index=exc.index) from None
