"""True zone outlines: a zone's edges as they lie on the globe, to within a tolerance.

A zone is a hexagon (or pentagon) with straight edges in the plane of each face, and the
projection is smooth inside a face except along the three lines from the face's centre to
its vertices (Snyder's 120° sectors). So on the globe an edge is a smooth curve between the
points where it crosses a face edge or a sector line, and bends at those points. Near a
face centre and near a vertex the projection's distortion does not fade with the zone's
size, so a zone there is not its corners joined by geodesics at any level (a pentagon's
corner polygon is 3.9 % too large, the three hexagons around a face centre 1.3 % too
small); at coarse levels a long edge also sags away from the geodesic between its ends.

The outline is built in the zone's chart (corners in thirds of a lattice step): each edge
is cut where it crosses a face edge (lines s, t, s + t at multiples of n) or a median of a
face (lines s - t, 2s + t, s + 2t at multiples of n; the half from the centre to a vertex
is a sector line, the other half is harmless), and each piece is halved in the chart until
the midpoint of its true curve lies within the tolerance of the great circle through its
ends. Every point of the outline lies on the zone's true edge.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from alveary.grid._authalic import R_AUTHALIC
from alveary.grid._ids import NORTH
from alveary.grid._lattice import CORNERS3, canonical, chart_to_xyz, ids_to_chart
from alveary.grid._snyder import EDGE

Floats = npt.NDArray[np.float64]
Ints = npt.NDArray[np.int64]
Ids = npt.NDArray[np.uint64]

#: Largest distance (m) between an outline's geodesic chords and the true edge...
TOLERANCE_M = 0.25
#: ... or this share of the lattice spacing, whichever is smaller.
TOLERANCE_SHARE = 2e-5
_MAX_ROUNDS = 12
_MAX_SPLIT = 64  # pieces per round
_BLOCK = 4096  # zones per block: bounds the temporaries


def tolerance(level: int) -> float:
    """The outline tolerance at a level, metres."""
    return min(TOLERANCE_M, TOLERANCE_SHARE * EDGE * R_AUTHALIC / (1 << level))


def _lines(p: Floats) -> Floats:
    """The six line families through a chart point in thirds: face edges, then medians."""
    s, t = p[..., 0], p[..., 1]
    return np.stack([s, t, s + t, s - t, 2.0 * s + t, s + 2.0 * t], axis=-1)


def _crossings(p0: Floats, p1: Floats, n3: int) -> Floats:
    """Fractions in (0, 1) where segments p0 -> p1 cross a face edge or median, else inf.

    Values of every family change by at most one lattice step along a zone's edge and the
    lines of a family lie n steps apart, so each family is crossed at most once inside.
    """
    g0, g1 = _lines(p0), _lines(p1)
    lo, hi = np.minimum(g0, g1), np.maximum(g0, g1)
    line = (np.floor(lo / n3) + 1.0) * n3  # the first line strictly above the lower end
    with np.errstate(divide="ignore", invalid="ignore"):
        lam = np.where(line < hi, (line - g0) / (g1 - g0), np.inf)
    lam = np.sort(lam, axis=-1)
    repeat = np.zeros(lam.shape, dtype=bool)  # lines meeting in one point cut once
    repeat[..., 1:] = lam[..., 1:] == lam[..., :-1]
    return np.sort(np.where(repeat, np.inf, lam), axis=-1)


def _points(strip: Ints, p: Floats, n3: int) -> Floats:
    """Unit vectors of chart points in thirds (strip charts extended across seams)."""
    region, a, b = canonical(strip, p[..., 0], p[..., 1], n3)
    apex = region >= NORTH  # only an apex itself lands here; it lies in strip 0's chart
    south = region > NORTH
    region = np.where(apex, 0, region)
    a = np.where(south, 2 * n3, a)
    b = np.where(south, n3, b)
    return chart_to_xyz(region, a / n3, b / n3)


def _corners(strip: Ints, a: Ints, b: Ints, n3: int) -> tuple[Floats, npt.NDArray[np.bool_]]:
    """Zones' six corners in their strip's chart, in thirds (N, 6, 2), and which edges
    are real: a pentagon's corners k and k + 1 fold onto one point for one k."""
    corner = (3 * np.stack([a, b], axis=-1)[:, None, :] + CORNERS3).astype(np.float64)
    region, ka, kb = canonical(strip[:, None], corner[..., 0], corner[..., 1], n3)
    key = (region * n3 * 8 + ka) * n3 * 4 + kb
    return corner, key != np.roll(key, -1, axis=1)


def corners(ids: Ids) -> Floats:
    """(N, 6, 3) unit vectors of validated zones' corners, CCW; a pentagon's sixth is NaN."""
    level, strip, a, b = ids_to_chart(ids)
    out = np.full((ids.size, 6, 3), np.nan)
    for lv in np.unique(level).tolist():
        sel = level == lv
        n3 = 3 * (1 << int(lv))
        corner, real = _corners(strip[sel], a[sel], b[sel], n3)
        xyz = _points(np.repeat(strip[sel][:, None], 6, axis=1), corner, n3)
        xyz[~real] = np.nan
        order = np.argsort(~real, axis=-1, kind="stable")
        out[sel] = np.take_along_axis(xyz, order[..., None], axis=-2)
    return out


def _level_outlines(strip: Ints, a: Ints, b: Ints, level: int) -> tuple[Floats, Ints]:
    """(points (P, 3), zone number of each point) for zones of one level, CCW per zone."""
    n3 = 3 * (1 << level)
    count = strip.size
    corner, real = _corners(strip, a, b, n3)
    nxt = np.roll(corner, -1, axis=1)
    lam = _crossings(corner, nxt, n3)  # (N, 6, 6)
    breaks = np.concatenate([np.zeros((count, 6, 1)), lam], axis=-1)  # (N, 6, 7)
    ends = np.concatenate([lam, np.ones((count, 6, 1))], axis=-1)
    ends = np.sort(np.where(np.isfinite(ends), ends, np.inf), axis=-1)
    keep = np.isfinite(breaks) & real[..., None]
    zone, edge, _ = np.nonzero(keep)
    lam0, lam1 = breaks[keep], ends[keep]
    tol = tolerance(level) / R_AUTHALIC

    def at(zone_: Ints, edge_: Ints, lam_: Floats) -> Floats:
        c = corner[zone_, edge_]
        return _points(strip[zone_], c + lam_[:, None] * (nxt[zone_, edge_] - c), n3)

    start, stop = at(zone, edge, lam0), at(zone, edge, lam1)
    done: list[tuple[Ints, Floats, Floats]] = []
    for _ in range(_MAX_ROUNDS):
        mid = at(zone, edge, 0.5 * (lam0 + lam1))
        # mid's distance from the great circle through start and stop, from differences
        # (the cross product of two nearly equal unit vectors would lose the digits)
        normal = np.cross(start, stop - start)
        chord = np.linalg.norm(normal, axis=-1)
        short = chord <= tol  # a piece shorter than the tolerance cannot stray farther
        sag = np.abs(np.einsum("ij,ij->i", mid - start, normal))
        sag /= np.where(short, 1.0, chord) * tol
        fine = short | (sag <= 1.0)
        done.append((zone[fine], edge[fine] + lam0[fine], start[fine]))
        if fine.all():
            break
        # A smooth curve sags with the square of the chord: k pieces sag about 1/k² as
        # much; twice the measured sag leaves a margin, and every piece is measured again.
        rest = ~fine
        k = np.minimum(np.ceil(np.sqrt(2.0 * sag[rest])), _MAX_SPLIT).astype(np.int64)
        step = np.arange(int(k.sum())) - np.repeat(np.cumsum(k) - k, k)
        zone, edge = np.repeat(zone[rest], k), np.repeat(edge[rest], k)
        lo, span = np.repeat(lam0[rest], k), np.repeat(lam1[rest] - lam0[rest], k)
        kk = np.repeat(k, k)
        lam0, lam1 = lo + span * step / kk, lo + span * (step + 1) / kk
        points = np.empty((lam0.size, 3))
        head = step == 0
        points[head] = start[rest]
        points[~head] = at(zone[~head], edge[~head], lam0[~head])
        tail = np.empty_like(points)
        tail[:-1] = points[1:]
        last = np.flatnonzero(step == kk - 1)
        tail[last] = stop[rest]
        start, stop = points, tail
    else:  # pragma: no cover - the tolerance is met in two or three rounds
        raise AssertionError("zone outline did not converge")
    zones = np.concatenate([d[0] for d in done])
    order = np.lexsort((np.concatenate([d[1] for d in done]), zones))
    return np.concatenate([d[2] for d in done])[order], zones[order]


def outlines(ids: Ids) -> tuple[Floats, Ints]:
    """True outlines of validated zones: (points (P, 3), count of points per zone (N,)).

    Each zone's points are consecutive, in the order of ``ids``, counter-clockwise seen
    from outside the globe, the ring not closed.
    """
    level, strip, a, b = ids_to_chart(ids)
    counts = np.zeros(ids.size, dtype=np.int64)
    chunks: list[tuple[Ints, Floats, Ints]] = []
    for lv in np.unique(level).tolist():
        where = np.flatnonzero(level == lv)
        for s in range(0, where.size, _BLOCK):
            sel = where[s : s + _BLOCK]
            xyz, zone = _level_outlines(strip[sel], a[sel], b[sel], int(lv))
            counts[sel] = np.bincount(zone, minlength=sel.size)
            chunks.append((sel, xyz, zone))
    points = np.empty((int(counts.sum()), 3))
    first = np.concatenate([[0], np.cumsum(counts)[:-1]])
    for sel, xyz, zone in chunks:
        rank = np.arange(zone.size) - np.searchsorted(zone, zone)
        points[first[sel[zone]] + rank] = xyz
    return points, counts


def padded(points: Floats, counts: Ints) -> Floats:
    """Ragged outlines as one (N, M, 3) array, NaN after each zone's last point."""
    width = int(counts.max()) if counts.size else 0
    out = np.full((counts.size, width, 3), np.nan)
    rows = np.repeat(np.arange(counts.size), counts)
    cols = np.arange(points.shape[0]) - np.repeat(np.cumsum(counts) - counts, counts)
    out[rows, cols] = points
    return out
