"""The zones under every point of a raster (a grid of latitudes by longitudes, such as a
map tile's pixel centres), equal to :func:`point_to_zone` at every point but cheaper.

A raster's points are separable: a point's unit vector is (cos β_r cos λ_c,
cos β_r sin λ_c, sin β_r), so the authalic latitude and the sines and cosines are worked
out once per row and once per column, never per point.

The chart coordinates of a raster's points change smoothly from point to point except
where the face or the 120° sector of Snyder's projection changes. So the projection is
run exactly only on every ``step``-th row and column; inside each cell of that coarse
raster whose four corners share one face and one sector, the points' lattice
coordinates are interpolated (bilinearly: linear along rows, then along columns). The
error of that interpolation in a cell is at most (h_r²·max|f_rr| + h_c²·max|f_cc|)/8;
each cell's bound is taken from the second differences (h²·f'') of the coarse triples
that touch it, and from the gap between the interpolated and the exact coordinates at
the cell's middle point, whichever is larger, doubled. Every point whose interpolated
coordinates lie within its cell's bound of the edge of the hexagon they round to, every
point of a cell that spans two faces or sectors (or whose middle point lies on another),
and every point of a cell with no second difference to bound it, is projected exactly.
The per-point steps work on offsets from an integer base per cell, in float32 (the
bound grows by their rounding), and add the cell's part of the id once per cell.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt

from alveary.grid._authalic import _beta_half_colat
from alveary.grid._checks import check_lat_lon
from alveary.grid._ids import check_level
from alveary.grid._lattice import _OFFSET, _TO_ST_SECTOR, BLOCK, chart_to_ids, round_hex, xyz_to_ids
from alveary.grid._snyder import face_of, forward_sector
from alveary.grid._xp import ARRAYS

__all__ = ["raster_to_zone"]

Ids = npt.NDArray[np.uint64]
Floats = npt.NDArray[np.float64]

#: Rows and columns of the coarse raster: every STEP-th one (and the last).
STEP = 8
#: Past this bound (lattice units) interpolation is not worth it: the cell is exact.
_MAX_ERROR = 0.05
#: Least margin (lattice units): covers the rounding of the exact path's own arithmetic.
_FLOOR = 1e-7
#: Added to the bound for the float32 arithmetic of the per-point steps.
_FLOOR32 = 1e-5


class _Parts:
    """Per row cos and sin of the authalic latitude, per column of the longitude: the
    factors of the points' unit vectors, each computed as ``geodetic_unit`` does."""

    def __init__(self, la: Floats, lo: Floats) -> None:
        half = _beta_half_colat(la, ARRAYS)
        self.cb = np.sin(2.0 * half)
        self.sb = np.copysign(np.cos(2.0 * half), la)
        rad = np.radians(lo)
        self.cl, self.sl = np.cos(rad), np.sin(rad)

    def xyz(self, r: Any, c: Any) -> Floats:
        """Unit vectors (..., 3) of the points (row r, column c); r and c broadcast."""
        cb = self.cb[r]
        x, y = cb * self.cl[c], cb * self.sl[c]
        z = np.broadcast_to(self.sb[r], x.shape)
        return np.stack([x, y, z], axis=-1)

    def ids(self, r: Any, c: Any, level: int) -> Ids:
        """point_to_zone's own path for points (row r, column c), flat index arrays."""
        out = np.empty(np.shape(r), dtype=np.uint64)
        for s in range(0, out.size, BLOCK):
            block = slice(s, s + BLOCK)
            out[block] = xyz_to_ids(self.xyz(r[block], c[block]), level)
        return out


def _chart(xyz: Floats, n: int) -> tuple[Any, Floats, Floats]:
    """(key, a, b): lattice coordinates (chart coordinates times n) of unit vectors, with
    the face and sector that gave them as key = 3 * face + sector."""
    face = face_of(xyz)
    x, y, sector = forward_sector(xyz, face)
    key = 3 * face + sector.astype(np.int64)
    m = _TO_ST_SECTOR[key]
    off = _OFFSET[face]
    s = m[..., 0, 0] * x + m[..., 0, 1] * y + off[..., 0]
    t = m[..., 1, 0] * x + m[..., 1, 1] * y + off[..., 1]
    return key, s * n, t * n


def _spans(size: int, step: int) -> tuple[npt.NDArray[np.int64], npt.NDArray[np.int64], Floats]:
    """Coarse positions, and for every fine position its coarse cell and place in it."""
    coarse = np.unique(np.r_[np.arange(0, size, step), size - 1]).astype(np.int64)
    fine = np.arange(size)
    cell = np.clip(np.searchsorted(coarse, fine, side="right") - 1, 0, coarse.size - 2)
    frac = (fine - coarse[cell]) / (coarse[cell + 1] - coarse[cell])
    return coarse, cell.astype(np.int64), frac


def _curvature(v: Floats, key: Any, axis: int) -> Floats:
    """Per coarse cell, the largest |second difference| along an axis over the coarse
    triples within one face and sector that touch the cell (NaN where there is none)."""
    u = np.moveaxis(v, axis, 0)
    k = np.moveaxis(key, axis, 0)
    t = np.full(u.shape, np.nan)
    if u.shape[0] >= 3:
        d2 = np.abs(u[:-2] - 2.0 * u[1:-1] + u[2:])
        ok = (k[:-2] == k[1:-1]) & (k[1:-1] == k[2:])
        t[1:-1] = np.where(ok, d2, np.nan)
    # a cell between coarse lines i and i+1 is touched by the triples centred on both
    along = np.fmax(t[:-1], t[1:])
    cells = np.fmax(along[:, :-1], along[:, 1:])
    return np.moveaxis(cells, 0, axis)


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
    parts = _Parts(la, lo)
    if h < 2 * step or w < 2 * step or step < 2:
        rr, cc = np.divmod(np.arange(h * w), w)
        return parts.ids(rr, cc, level).reshape(h, w)
    n = 1 << level
    rows, rcell, rfrac = _spans(h, step)
    cols, ccell, cfrac = _spans(w, step)
    key, a, b = _chart(parts.xyz(rows[:, None], cols[None, :]), n)
    # cells whose four corners share a face and a sector
    along_r = key[:-1, :] == key[1:, :]
    along_c = key[:, :-1] == key[:, 1:]
    uniform = along_r[:, :-1] & along_r[:, 1:] & along_c[:-1, :] & along_c[1:, :]
    # each cell's error bound: second differences, and the error at its middle point
    bound = (
        np.maximum(
            _curvature(a, key, 0) + _curvature(a, key, 1),
            _curvature(b, key, 0) + _curvature(b, key, 1),
        )
        / 8.0
    )
    mr, mc = (rows[:-1] + rows[1:]) // 2, (cols[:-1] + cols[1:]) // 2
    mkey, ma, mb = _chart(parts.xyz(mr[:, None], mc[None, :]), n)
    fr = ((mr - rows[:-1]) / (rows[1:] - rows[:-1]))[:, None]
    fc = ((mc - cols[:-1]) / (cols[1:] - cols[:-1]))[None, :]

    def at_middle(v: Floats) -> Floats:
        top = v[:-1, :-1] * (1.0 - fc) + v[:-1, 1:] * fc
        bottom = v[1:, :-1] * (1.0 - fc) + v[1:, 1:] * fc
        out: Floats = top * (1.0 - fr) + bottom * fr
        return out

    gap = np.maximum(np.abs(at_middle(a) - ma), np.abs(at_middle(b) - mb))
    bound = 2.0 * np.maximum(bound, gap) + _FLOOR
    smooth = uniform & (mkey == key[:-1, :-1]) & (bound <= _MAX_ERROR)  # NaN fails too
    if not smooth.any():
        rr, cc = np.divmod(np.arange(h * w), w)
        return parts.ids(rr, cc, level).reshape(h, w)

    # Each cell gets an integer base (its corners' least coordinates, floored), so the
    # points' offsets from it are small and float32 holds them to about 1e-6: half the
    # memory traffic of float64 in the per-point steps. The bound grows by _FLOOR32.
    def corners_min(v: Floats) -> Floats:
        out: Floats = np.floor(np.minimum(np.minimum(v[:-1, :-1], v[:-1, 1:]), v[1:, :-1]))
        return np.minimum(out, np.floor(v[1:, 1:]))

    base_a, base_b = corners_min(a), corners_min(b)
    # linear along rows (small arrays: every row by the coarse columns), then along
    # columns (= bilinear in each cell)
    rf = rfrac[:, None]
    cf = cfrac.astype(np.float32)

    def interpolate(v: Floats, base: Floats) -> npt.NDArray[np.float32]:
        v_r = v[rcell] * (1.0 - rf) + v[rcell + 1] * rf
        left = (v_r[:, :-1] - base[rcell]).astype(np.float32)
        slope = np.diff(v_r, axis=1).astype(np.float32)
        out: npt.NDArray[np.float32] = np.take(left, ccell, axis=1)
        out += np.take(slope, ccell, axis=1) * cf
        return out

    al, bl = interpolate(a, base_a), interpolate(b, base_b)
    ra, rb = round_hex(al, bl, ARRAYS)
    # Where the lattice point (ra, rb) is nearest, its hexagon in the offsets (u, v) is
    # |2u + v| <= 1, |u + 2v| <= 1, |u - v| <= 1; an error up to m in both a and b moves
    # 2u + v and u + 2v by up to 3m, u - v by up to 2m.
    u, v = al - ra, bl - rb
    reach = np.maximum(np.abs(u + u + v), np.abs(u + v + v))
    cell_margin = np.where(smooth, bound + _FLOOR32, np.inf).astype(np.float32)
    margin = np.take(cell_margin[rcell], ccell, axis=1)
    risky = (reach > 1.0 - 3.0 * margin) | (np.abs(u - v) > 1.0 - 2.0 * margin)
    # ids as _ids.encode of points their strip owns (0 < a <= 2n, 0 <= b < n), with the
    # cell's part added once per cell
    strip = key[:-1, :-1] // 12
    ia, ib = base_a.astype(np.int64), base_b.astype(np.int64)
    cell_id = (strip << (2 * level + 1)) + ((ia - 1) << level) + ib + (1 << (2 * level + 4))
    out = np.take(cell_id[rcell], ccell, axis=1)
    # the offsets in a cell span at most span + 2 lattice steps: int32 when that fits
    span_a = np.ceil(np.max([a[:-1, :-1], a[:-1, 1:], a[1:, :-1], a[1:, 1:]], axis=0) - base_a)
    span_b = np.ceil(np.max([b[:-1, :-1], b[:-1, 1:], b[1:, :-1], b[1:, 1:]], axis=0) - base_b)
    widest = float(np.max(np.where(smooth, np.maximum(span_a, span_b), 0.0))) + 2.0
    small = np.int32 if widest * (1 << level) < 2.0**30 else np.int64
    offset = ra.astype(small) << level
    offset += rb.astype(small)
    out += offset
    # cells whose points may round beyond their strip (a seam, or an apex): those points
    # go through the seam rules
    near = (ia < 2) | (ia + span_a + 1 > 2 * n) | (ib < 1) | (ib + span_b + 1 >= n)
    near &= smooth
    if near.any():
        rr, cc = np.nonzero(np.take(near[rcell], ccell, axis=1) & ~risky)
        pa = ra[rr, cc].astype(np.int64) + ia[rcell[rr], ccell[cc]]
        pb = rb[rr, cc].astype(np.int64) + ib[rcell[rr], ccell[cc]]
        out[rr, cc] = chart_to_ids(level, strip[rcell[rr], ccell[cc]], pa, pb).view(np.int64)
    ids: Ids = out.view(np.uint64)
    rr, cc = np.nonzero(risky)
    if rr.size:
        ids[rr, cc] = parts.ids(rr, cc, level)
    return ids
