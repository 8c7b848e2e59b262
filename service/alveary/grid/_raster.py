"""The zones under every point of a raster (a grid of latitudes by longitudes, such as a
map tile's pixel centres), equal to :func:`point_to_zone` at every point but cheaper.

The chart coordinates of a raster's points change smoothly from point to point except
where the face or the 120° sector of Snyder's projection changes. So the projection is
run exactly only on every ``step``-th row and column; inside each cell of that coarse
raster whose four corners share one face and one sector, the points' lattice
coordinates are interpolated (bilinearly: linear along rows, then along columns). The
interpolation error is bounded from the coarse raster's own second differences (the
error of a linear interpolation over a span h is at most h²·|f''|/8, and a second
difference is h²·f''), taken over the whole raster and doubled; every point whose
interpolated coordinates lie within that bound of a place where hexagon rounding could
go another way (a half-integer, or a tie between the cube coordinates' distances), and
every point of a cell that spans two faces or sectors, is projected exactly.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt

from alveary.grid._authalic import geodetic_to_xyz
from alveary.grid._checks import check_lat_lon
from alveary.grid._ids import check_level
from alveary.grid._lattice import _OFFSET, _TO_ST_SECTOR, BLOCK, chart_to_ids, xyz_to_ids
from alveary.grid._snyder import face_of, forward_sector

__all__ = ["raster_to_zone"]

Ids = npt.NDArray[np.uint64]
Floats = npt.NDArray[np.float64]

#: Rows and columns of the coarse raster: every STEP-th one (and the last).
STEP = 4
#: Past this bound (lattice units) interpolation is not worth it: every point is exact.
_MAX_ERROR = 0.05


def _exact(lat: Floats, lon: Floats, level: int) -> Ids:
    """point_to_zone's own path for flat arrays of points."""
    out = np.empty(lat.shape, dtype=np.uint64)
    for s in range(0, lat.size, BLOCK):
        block = slice(s, s + BLOCK)
        out[block] = xyz_to_ids(geodetic_to_xyz(lat[block], lon[block]), level)
    return out


def _chart(xyz: Floats, n: int) -> tuple[Any, Any, Floats, Floats]:
    """(face, sector, a, b): lattice coordinates (chart coordinates times n) of unit
    vectors, with the face and sector that gave them."""
    face = face_of(xyz)
    x, y, sector = forward_sector(xyz, face)
    m = _TO_ST_SECTOR[3 * face + sector.astype(np.int64)]
    off = _OFFSET[face]
    s = m[..., 0, 0] * x + m[..., 0, 1] * y + off[..., 0]
    t = m[..., 1, 0] * x + m[..., 1, 1] * y + off[..., 1]
    return face, sector.astype(np.int64), s * n, t * n


def _spans(size: int, step: int) -> tuple[npt.NDArray[np.int64], npt.NDArray[np.int64], Floats]:
    """Coarse positions, and for every fine position its coarse cell and place in it."""
    coarse = np.unique(np.r_[np.arange(0, size, step), size - 1]).astype(np.int64)
    fine = np.arange(size)
    cell = np.clip(np.searchsorted(coarse, fine, side="right") - 1, 0, coarse.size - 2)
    frac = (fine - coarse[cell]) / (coarse[cell + 1] - coarse[cell])
    return coarse, cell.astype(np.int64), frac


def _second_difference(v: Floats, same: npt.NDArray[np.bool_], axis: int) -> float:
    """Largest |second difference| along an axis over triples within one face and sector."""
    if v.shape[axis] < 3:
        return 0.0
    lo = [slice(None)] * 2
    mid = [slice(None)] * 2
    hi = [slice(None)] * 2
    lo[axis], mid[axis], hi[axis] = slice(0, -2), slice(1, -1), slice(2, None)
    d2 = np.abs(v[tuple(lo)] - 2.0 * v[tuple(mid)] + v[tuple(hi)])
    first, second = [slice(None)] * 2, [slice(None)] * 2
    first[axis], second[axis] = slice(0, -1), slice(1, None)
    ok = same[tuple(first)] & same[tuple(second)]  # both pairs of the triple
    return float(d2[ok].max(initial=0.0))


def raster_to_zone(lat: Any, lon: Any, level: int, *, step: int = STEP) -> Ids:
    """Zone ids (uint64, shape (len(lat), len(lon))) of the points (lat[r], lon[c]).

    Equal to ``point_to_zone(lat[:, None], lon[None, :], level)``; cheaper for rasters
    whose neighbouring points are close compared with the zones (map tiles). Longitudes
    wrap.

    >>> import numpy as np
    >>> from alveary.grid import point_to_zone
    >>> lat, lon = np.linspace(40, 41, 60), np.linspace(7, 8.5, 80)
    >>> ids = raster_to_zone(lat, lon, 9)
    >>> ids.shape, bool((ids == point_to_zone(lat[:, None], lon[None, :], 9)).all())
    ((60, 80), True)
    """
    level = check_level(level)
    la = np.asarray(lat, dtype=np.float64).reshape(-1)
    lo = np.asarray(lon, dtype=np.float64).reshape(-1)
    la, _ = check_lat_lon(la, np.zeros_like(la))
    _, lo = check_lat_lon(np.zeros_like(lo), lo, wrap=True)
    h, w = la.size, lo.size
    if h < 2 * step or w < 2 * step or step < 2:
        full_lat, full_lon = np.broadcast_arrays(la[:, None], lo[None, :])
        return _exact(full_lat.reshape(-1), full_lon.reshape(-1), level).reshape(h, w)
    n = 1 << level
    rows, rcell, rfrac = _spans(h, step)
    cols, ccell, cfrac = _spans(w, step)
    glat, glon = np.broadcast_arrays(la[rows][:, None], lo[cols][None, :])
    face, sector, a, b = _chart(geodetic_to_xyz(glat, glon), n)
    key = face * 3 + sector
    # cells whose four corners share a face and a sector, and pairs along each axis
    along_r = key[:-1, :] == key[1:, :]
    along_c = key[:, :-1] == key[:, 1:]
    uniform = along_r[:, :-1] & along_r[:, 1:] & along_c[:-1, :] & along_c[1:, :]
    # interpolation error bound from the coarse raster's second differences
    err = 0.0
    for v in (a, b):
        err = max(err, _second_difference(v, along_r, 0) + _second_difference(v, along_c, 1))
    bound = 2.0 * err / 8.0 + 1e-9
    if bound > _MAX_ERROR or not uniform.any():
        full_lat, full_lon = np.broadcast_arrays(la[:, None], lo[None, :])
        return _exact(full_lat.reshape(-1), full_lon.reshape(-1), level).reshape(h, w)
    # linear along rows, then along columns (= bilinear in each cell)
    rf, cf = rfrac[:, None], cfrac[None, :]
    a_r = a[rcell] * (1.0 - rf) + a[rcell + 1] * rf
    b_r = b[rcell] * (1.0 - rf) + b[rcell + 1] * rf
    ai = a_r[:, ccell] * (1.0 - cf) + a_r[:, ccell + 1] * cf
    bi = b_r[:, ccell] * (1.0 - cf) + b_r[:, ccell + 1] * cf
    # hexagon rounding (as round_hex), keeping the distances for the margins
    ci = -ai - bi
    ra, rb, rc = np.rint(ai), np.rint(bi), np.rint(ci)
    da, db, dc = np.abs(ra - ai), np.abs(rb - bi), np.abs(rc - ci)
    fix_a = (da > db) & (da > dc)
    fix_b = (db > dc) & (da <= db)
    ra = np.where(fix_a, -rb - rc, ra).astype(np.int64)
    rb = np.where(fix_b, -ra - rc, rb).astype(np.int64)
    # points where an error up to `bound` in a and b could change the rounding
    risky = (da >= 0.5 - bound) | (db >= 0.5 - bound) | (dc >= 0.5 - 2.0 * bound)
    risky |= np.abs(da - db) <= 2.0 * bound
    risky |= np.abs(da - dc) <= 3.0 * bound
    risky |= np.abs(db - dc) <= 3.0 * bound
    risky |= ~uniform[rcell][:, ccell]
    strip = (face // 4)[rcell][:, ccell]  # the cell's face (all four corners share it)
    # ids of points their strip owns (0 < a <= 2n, 0 <= b < n) directly, as _ids.encode;
    # the others (beyond a seam, or an apex) through the seam rules
    out = (strip << (2 * level + 1)) + ((ra - 1) << level) + rb + (1 << (2 * level + 4))
    others = (ra <= 0) | (ra > 2 * n) | (rb < 0) | (rb >= n)
    if others.any():
        out[others] = chart_to_ids(level, strip[others], ra[others], rb[others])
    ids: Ids = np.asarray(out, dtype=np.uint64)
    rr, cc = np.nonzero(risky)
    if rr.size:
        ids[rr, cc] = _exact(la[rr], lo[cc], level)
    return ids
