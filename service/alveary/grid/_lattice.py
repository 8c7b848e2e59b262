"""The strip lattice: charts, seams, rounding, and the zone <-> point maps.

Every zone is a point of the triangular lattice in one strip's chart: axial coordinates
(A, B) = (s n, t n) at level r, n = 2**r (see the ``_icosahedron`` docstring for the
chart). A strip owns 0 < A <= 2n, 0 <= B < n, stored at row i = A - 1, column j = B; the
two apexes P (0, 0) and Q (2n, n) are owned by no strip. Lattice points outside a strip
are carried to their owner by the seam rules in :func:`canonical`.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt

from alveary.grid import _ids
from alveary.grid._icosahedron import AXIAL_TO_CART, FACE_LATTICE, VERTICES
from alveary.grid._snyder import _ROT, CIRCUMRADIUS, face_of, forward_sector, inverse
from alveary.grid._xp import ARRAYS

Floats = npt.NDArray[np.float64]
Ints = npt.NDArray[np.int64]

NORTH, SOUTH = _ids.NORTH, _ids.SOUTH

# The six lattice offsets, counter-clockwise from the +s direction.
OFFSETS = np.array([(1, 0), (0, 1), (-1, 1), (-1, 0), (0, -1), (1, -1)], dtype=np.int64)
# Hexagon corners: centroids of the six unit triangles around a lattice point, in thirds,
# counter-clockwise from 30°.
CORNERS3 = np.array([(1, 1), (-1, 2), (-2, 1), (-1, -1), (1, -2), (2, -1)], dtype=np.int64)


def _chart_maps() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per face, the affine map plane (x, y) -> axial (s, t), and its inverse."""
    ang = np.radians([0.0, 120.0, 240.0])
    plane = CIRCUMRADIUS * np.stack([np.cos(ang), np.sin(ang)], axis=1)  # (3, 2)
    dp = np.stack([plane[1] - plane[0], plane[2] - plane[0]], axis=1)  # columns
    to_st, to_xy, offset = [], [], []
    for lat in FACE_LATTICE:
        dl = np.stack([lat[1] - lat[0], lat[2] - lat[0]], axis=1)
        m = dl @ np.linalg.inv(dp)
        # The chart must not mirror the face seen from outside.
        assert np.linalg.det(AXIAL_TO_CART @ m) > 0
        to_st.append(m)
        to_xy.append(np.linalg.inv(m))
        offset.append(lat.mean(axis=0))
    return np.array(to_st), np.array(to_xy), np.array(offset)


_TO_ST, _TO_XY, _OFFSET = _chart_maps()
# Plane -> chart maps composed with the 120° sector rotations: index 3 * face + sector.
_TO_ST_SECTOR = np.einsum("fij,sjk->fsik", _TO_ST, _ROT).reshape(60, 2, 2)


def canonical(strip: Any, a: Any, b: Any, n: int) -> tuple[Ints, Any, Any]:
    """Carry lattice points (a, b) of strip charts to their owner.

    Returns (region, a, b): region 0..4 with 0 < a <= 2n, 0 <= b < n, or NORTH / SOUTH
    (a = b = 0 then). Works for any integer scale n (e.g. 3n for corners in thirds), and
    for real-valued points too (they stay real-valued).
    """
    kind = np.float64 if np.result_type(a, b).kind == "f" else np.int64
    strip, a, b = np.broadcast_arrays(
        np.asarray(strip, dtype=np.int64), np.asarray(a, dtype=kind), np.asarray(b, dtype=kind)
    )
    a, b = a.copy(), b.copy()
    region = strip % 5
    n2 = 2 * n
    for _ in range(12):
        north = (a == 0) & (b == 0)
        south = (a == n2) & (b == n)
        owned = (a > 0) & (a <= n2) & (b >= 0) & (b < n)
        todo = ~(north | south | owned)
        if not todo.any():
            break
        r1 = todo & (a <= 0)
        rest = todo & ~r1
        r2 = rest & (b < 0) & (a <= n)
        r3 = rest & (b < 0) & (a > n) & (a <= n2)
        r4 = rest & (b >= n) & (a <= n)
        r5 = rest & (b >= n) & (a > n) & (a <= n2)
        r6 = rest & (a > n2) & ~r5
        na, nb, dk = a.copy(), b.copy(), np.zeros(a.shape, dtype=np.int64)
        # northern seam, to strip k-1: (s, t) -> (s+t, -s)
        na[r1], nb[r1], dk[r1] = a[r1] + b[r1], -a[r1], -1
        # northern seam, to strip k+1: (s, t) -> (-t, s+t)
        na[r2], nb[r2], dk[r2] = -b[r2], a[r2] + b[r2], 1
        # band seam, to strip k+1: (s, t) -> (s-1, t+1)
        na[r3], nb[r3], dk[r3] = a[r3] - n, b[r3] + n, 1
        # band seam, to strip k-1: (s, t) -> (s+1, t-1)
        na[r4], nb[r4], dk[r4] = a[r4] + n, b[r4] - n, -1
        # southern seams about Q, with (p, q) = (s-2, t-1)
        p, q = a - n2, b - n
        na[r5], nb[r5], dk[r5] = n2 - q[r5], n + p[r5] + q[r5], -1
        na[r6], nb[r6], dk[r6] = n2 + p[r6] + q[r6], n - p[r6], 1
        a, b, region = na, nb, (region + dk) % 5
    else:  # pragma: no cover - unreachable for points within a strip width
        raise AssertionError("lattice point not carried to an owner")
    north = (a == 0) & (b == 0)
    south = (a == n2) & (b == n)
    region = np.where(north, NORTH, np.where(south, SOUTH, region))
    a = np.where(north | south, 0, a)
    b = np.where(north | south, 0, b)
    return region, a, b


def chart_to_ids(level: Any, strip: Any, a: Any, b: Any) -> npt.NDArray[np.uint64]:
    """Ids of lattice points (a, b) in strip charts at a level (carried to owners)."""
    n = 1 << int(level)
    region, a, b = canonical(strip, a, b, n)
    apex = region >= NORTH
    return _ids.encode(level, region, np.where(apex, 0, a - 1), b)


def ids_to_chart(ids: npt.NDArray[np.uint64]) -> tuple[Ints, Ints, Ints, Ints]:
    """(level, strip, a, b) of validated ids; apexes in strip 0's chart."""
    level, region, i, j = _ids.decode(ids)
    n = np.left_shift(1, level)
    a = np.where(region == NORTH, 0, np.where(region == SOUTH, 2 * n, i + 1))
    b = np.where(region == NORTH, 0, np.where(region == SOUTH, n, j))
    strip = np.where(region >= NORTH, 0, region)
    return level, strip, a, b


def strip_face(strip: Any, s: Any, t: Any) -> Ints:
    """The face of a strip that holds chart point (s, t) (closed triangles)."""
    m = np.where(s + t <= 1.0, 0, np.where(s <= 1.0, 1, np.where(s + t < 2.0, 2, 3)))
    face: Ints = 4 * np.asarray(strip) + m
    return face


def chart_to_xyz(strip: Any, s: Any, t: Any) -> Floats:
    """Unit vectors of chart points (s, t) within the closed strip."""
    face = strip_face(strip, s, t)
    st = np.stack([s, t], axis=-1) - _OFFSET[face]
    xy = np.einsum("...ij,...j->...i", _TO_XY[face], st)
    return inverse(face, xy[..., 0], xy[..., 1])


def xyz_to_chart(xyz: Floats) -> tuple[Ints, Floats, Floats]:
    """(strip, s, t) of unit vectors, in the chart of the strip holding their face."""
    face = face_of(xyz)
    x, y, sector = forward_sector(xyz, face)
    m = _TO_ST_SECTOR[3 * face + sector.astype(np.int64)]
    off = _OFFSET[face]
    s = m[..., 0, 0] * x + m[..., 0, 1] * y + off[..., 0]
    t = m[..., 1, 0] * x + m[..., 1, 1] * y + off[..., 1]
    return face // 4, s, t


def round_hex(a: Any, b: Any, xp: Any) -> tuple[Any, Any]:
    """Nearest lattice point to axial (a, b): cube-coordinate rounding (common practice)."""
    c = -a - b
    ra, rb, rc = xp.rint(a), xp.rint(b), xp.rint(c)
    da, db, dc = xp.abs(ra - a), xp.abs(rb - b), xp.abs(rc - c)
    fix_a = (da > db) & (da > dc)
    fix_b = (db > dc) & (da <= db)  # not fix_a, given db > dc
    ra = xp.where(fix_a, -rb - rc, ra)
    rb = xp.where(fix_b, -ra - rc, rb)
    return ra, rb


def hex_round(a: Floats, b: Floats) -> tuple[Ints, Ints]:
    """:func:`round_hex` for arrays, as integers."""
    ra, rb = round_hex(a, b, ARRAYS)
    return ra.astype(np.int64), rb.astype(np.int64)


BLOCK = 1 << 14  # points per block: keeps the temporaries in cache


def xyz_to_ids(xyz: np.ndarray, level: int) -> np.ndarray:
    strip, s, t = xyz_to_chart(xyz)
    n = 1 << level
    a, b = hex_round(s * n, t * n)
    return chart_to_ids(level, strip, a, b)


def ids_to_xyz(ids: np.ndarray) -> np.ndarray:
    level, strip, a, b = ids_to_chart(ids)
    n = np.left_shift(1, level).astype(np.float64)
    xyz = chart_to_xyz(strip, a / n, b / n)
    # The apexes sit at P (0, 0) and Q (2n, n) of strip 0's chart, points no strip owns.
    north = (a == 0) & (b == 0)
    south = (strip == 0) & (a == 2 * n) & (b == n)
    xyz = np.where(north[..., None], VERTICES[0], xyz)
    return np.where(south[..., None], VERTICES[11], xyz)


def _drop_repeats(ids: np.ndarray) -> np.ndarray:
    """Per row of a ring (N, 6), zero the entry equal to its predecessor (pentagons).

    Rows keep their order, the zeroed entry moved to the end.
    """
    prev = np.roll(ids, 1, axis=-1)
    dup = ids == prev
    order = np.argsort(dup, axis=-1, kind="stable")
    out = np.take_along_axis(np.where(dup, 0, ids), order, axis=-1)
    return out


# The apexes' neighbours, counter-clockwise: row 0, column 0 of every strip around P
# (strips in decreasing order) and the last row and column of every strip around Q.
_NORTH_RING = np.array([0, 4, 3, 2, 1])
_SOUTH_RING = np.array([0, 1, 2, 3, 4])


def neighbors(ids: npt.NDArray[np.uint64]) -> npt.NDArray[np.uint64]:
    """(N, 6) neighbour ids counter-clockwise; pentagons have 0 in the last column."""
    level, strip, a, b = ids_to_chart(ids)
    region = _ids.decode(ids)[1]
    out = np.empty((*ids.shape, 6), dtype=np.uint64)
    for lv in np.unique(level):
        sel = level == lv
        na = a[sel][:, None] + OFFSETS[:, 0]
        nb = b[sel][:, None] + OFFSETS[:, 1]
        out[sel] = chart_to_ids(int(lv), strip[sel][:, None], na, nb)
    out = _drop_repeats(out)
    # Read the apexes' rings off the layout: at level 0 a chart step from an apex can
    # land on a strip corner from which the seam rules are ambiguous.
    for apex, ring in ((NORTH, _NORTH_RING), (SOUTH, _SOUTH_RING)):
        sel = region == apex
        if sel.any():
            n = np.left_shift(1, level[sel])[:, None]
            i = np.zeros_like(n) if apex == NORTH else 2 * n - 1
            j = np.zeros_like(n) if apex == NORTH else n - 1
            out[sel, :5] = _ids.encode(level[sel][:, None], ring[None, :], i, j)
            out[sel, 5] = 0
    return out
