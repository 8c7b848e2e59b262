"""Neighbourhood (focal) statistics: every target zone's value over its k-disk.

Values arrive as a ``(time, len(windows.needed))`` array aligned with the needed-zone list
of :func:`alveary.grid.disk_windows`; results are ``(time, len(windows.targets))``. NaN is
"no data" and is left out of every statistic.

- ``mean``: the area-weighted mean (on the equal-area grid every hexagon weighs 1, a
  pentagon 5/6); ``std``: the area-weighted population standard deviation around it;
  ``sum``: the plain sum; ``min``/``max``; ``count``: how many zones had data.
  With no data in a disk all of them are NaN except ``count`` (0).
- a kernel ``w0, ..., wk`` weighs a zone i steps from the centre by ``wi`` (times its area
  share) and divides by the weights of the zones with data (a normalised convolution).
- ``gradient``: a least-squares plane ``v = c + gx x + gy y`` through the disk's zones with
  data (k = 1: the centre and its six neighbours, five at pentagons), in metres of the
  azimuthal equidistant plane of the centre on the authalic sphere (radius R_AUTHALIC):
  magnitude ``hypot(gx, gy)`` in units per metre, direction ``atan2(gx, gy)`` in degrees
  clockwise from north (where the value rises fastest). NaN with fewer than three
  non-collinear zones; the direction is NaN at the geographic poles and where the
  gradient is exactly zero.

Computation. Flat tiles read a ``(time, H, W)`` window gathered from the value array.
Sums and counts over a hexagon come from prefix sums along the window's rows: row da of
the hexagon is one contiguous run of columns, so a k-disk costs 2(2k + 1) array
operations. Minima and maxima use a sparse table of power-of-two runs along the rows (the
same count plus log2(2k + 1)); the standard deviation and the gradient visit the
3k(k + 1) + 1 offsets directly. Time is processed in blocks so that a window stays near
:data:`BLOCK_ELEMENTS` values. Targets near a pentagon are reduced segment by segment over
their exactly listed disks with ``numpy.ufunc.reduceat``.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass
from typing import Any, Protocol

import numpy as np
import numpy.typing as npt

from alveary._errors import InvalidInput
from alveary.grid import R_AUTHALIC

__all__ = [
    "FOCAL_STATISTICS",
    "MAX_FOCAL_K",
    "FocalSpec",
    "apply_focal",
    "focal_gradient",
    "focal_kernel",
    "focal_statistic",
    "parse_focal",
]

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]

#: The statistics of the ``focal`` parameter.
FOCAL_STATISTICS = ("count", "gradient", "max", "mean", "min", "std", "sum")
#: Default upper bound of ``focal_k`` (a deployment may configure another).
MAX_FOCAL_K = 16
#: Values per working block (a window times its time steps): 2**18 float64 = 2 MiB, which
#: measured faster than larger blocks (the arrays stay nearer the processor's caches).
BLOCK_ELEMENTS = 1 << 18


class DiskWindows(Protocol):
    """What the statistics read of :func:`alveary.grid.disk_windows`' answer."""

    @property
    def k(self) -> int: ...
    @property
    def targets(self) -> npt.NDArray[np.uint64]: ...
    @property
    def needed(self) -> npt.NDArray[np.uint64]: ...
    @property
    def tiles(self) -> Sequence[Any]: ...
    @property
    def exact(self) -> Any: ...
    @property
    def offsets(self) -> tuple[IntArray, IntArray, IntArray]: ...
    @property
    def unit_vectors(self) -> FloatArray: ...


@dataclass(frozen=True)
class FocalSpec:
    """A parsed neighbourhood operation.

    ``statistic`` is one of :data:`FOCAL_STATISTICS` or ``"kernel"`` (then ``kernel`` holds
    the ring weights w0..wk); ``k`` is the disk radius in steps.
    """

    statistic: str
    k: int
    kernel: tuple[float, ...] | None = None


def _parse_k(value: Any, max_k: int) -> int:
    allowed = f"an integer in [1, {max_k}]"
    if isinstance(value, bool):
        raise InvalidInput("focal_k", value, allowed)
    if isinstance(value, str):
        text = value.strip()
        if not text.isdigit():
            raise InvalidInput("focal_k", value, allowed)
        k = int(text)
    else:
        try:
            k = int(value)
        except (TypeError, ValueError, OverflowError):
            raise InvalidInput("focal_k", value, allowed) from None
        if k != value:
            raise InvalidInput("focal_k", value, allowed)
    if not 1 <= k <= max_k:
        raise InvalidInput("focal_k", value, allowed)
    return k


def _parse_kernel(value: str | Sequence[float], max_k: int) -> tuple[float, ...]:
    allowed = (
        f"comma-separated ring weights w0,w1,...,wK: 2 to {max_k + 1} finite numbers >= 0, "
        "not all zero"
    )
    try:
        parts = value.split(",") if isinstance(value, str) else list(value)
        weights = tuple(float(p) for p in parts)
    except (TypeError, ValueError):
        raise InvalidInput("kernel", value, allowed) from None
    w = np.asarray(weights, dtype=np.float64)
    if not 2 <= w.size <= max_k + 1 or not np.isfinite(w).all() or (w < 0).any() or w.sum() <= 0:
        raise InvalidInput("kernel", value, allowed)
    return weights


def parse_focal(
    focal: str | None,
    focal_k: int | str | None = None,
    kernel: str | Sequence[float] | None = None,
    *,
    max_k: int = MAX_FOCAL_K,
) -> FocalSpec | None:
    """Validate the ``focal``, ``focal_k`` and ``kernel`` parameters.

    Parameters
    ----------
    focal:
        One of :data:`FOCAL_STATISTICS`, or None.
    focal_k:
        Disk radius in steps, 1..``max_k`` (default 1; with a kernel, its length - 1).
    kernel:
        Ring weights ``"w0,w1,...,wK"`` (or a sequence), instead of ``focal``.
    max_k:
        The configured largest radius.

    Returns
    -------
    FocalSpec or None
        None when neither ``focal`` nor ``kernel`` is given.

    Examples
    --------
    >>> parse_focal("mean", "3")
    FocalSpec(statistic='mean', k=3, kernel=None)
    >>> parse_focal(None, kernel="1,0.5,0.25")
    FocalSpec(statistic='kernel', k=2, kernel=(1.0, 0.5, 0.25))
    >>> parse_focal("median")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: focal is 'median'; allowed: one of count, gradient, max, mean, min, std, sum
    >>> parse_focal("max", 40)
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: focal_k is 40; allowed: an integer in [1, 16]
    """  # noqa: E501
    if not isinstance(max_k, int) or max_k < 1:
        raise InvalidInput("max_k", max_k, "an integer >= 1")
    if focal is None and kernel is None:
        if focal_k is not None:
            raise InvalidInput("focal_k", focal_k, "only together with focal or kernel")
        return None
    if focal is not None and kernel is not None:
        raise InvalidInput("kernel", kernel, "either focal or kernel, not both")
    if kernel is not None:
        weights = _parse_kernel(kernel, max_k)
        k = len(weights) - 1
        if focal_k is not None and _parse_k(focal_k, max_k) != k:
            raise InvalidInput(
                "focal_k", focal_k, f"{k}: the number of kernel weights minus one (or omit it)"
            )
        return FocalSpec("kernel", k, weights)
    if focal not in FOCAL_STATISTICS:
        raise InvalidInput("focal", focal, "one of " + ", ".join(FOCAL_STATISTICS))
    k = 1 if focal_k is None else _parse_k(focal_k, max_k)
    return FocalSpec(str(focal), k, None)


# -- shared plumbing ----------------------------------------------------------------------


def _values(values: Any, windows: DiskWindows) -> FloatArray:
    arr = np.asarray(values, dtype=np.float64)
    if arr.ndim != 2 or arr.shape[1] != windows.needed.size:
        raise InvalidInput(
            "values", arr.shape, f"an array of shape (time, {windows.needed.size}) (needed zones)"
        )
    return arr


def _time_blocks(ntime: int, cells: int) -> Iterator[slice]:
    step = max(1, BLOCK_ELEMENTS // max(cells, 1))
    for t0 in range(0, ntime, step):
        yield slice(t0, min(t0 + step, ntime))


def _gather(values: FloatArray, source: IntArray) -> FloatArray:
    """``(time, H, W)`` window of values.

    A cell whose zone is not needed lies in no flat target's disk, so what it holds never
    reaches a result: it takes the first needed zone's value (keeping NaN out of windows
    whose data have none).
    """
    out = np.take(values, np.maximum(source, 0).ravel(), axis=1)
    return out.reshape(values.shape[0], *source.shape)


def _segment_blocks(ex: Any, ntime: int) -> Iterator[tuple[slice, slice, IntArray]]:
    """(segments, members, local starts) blocks of the exact disks, each about
    BLOCK_ELEMENTS / ntime members."""
    budget = max(1, BLOCK_ELEMENTS // max(ntime, 1))
    s0, m = 0, len(ex)
    start = ex.start
    while s0 < m:
        s1 = int(np.searchsorted(start, start[s0] + budget, side="right")) - 1
        s1 = min(max(s1, s0 + 1), m)
        p0, p1 = int(start[s0]), int(start[s1])
        yield slice(s0, s1), slice(p0, p1), start[s0:s1] - p0
        s0 = s1


def _row_runs(k: int, s: int) -> Iterator[tuple[int, int, int]]:
    """(da, lo, hi): row da of the s-disk holds columns db in [lo, hi]."""
    for da in range(-s, s + 1):
        yield da, max(-s, -s - da), min(s, s - da)


def _disk_sums(c: FloatArray, k: int, s: int, h: int, w: int) -> FloatArray:
    """Sums over the s-disk (s <= k) of every interior cell, from row prefix sums ``c``
    (``c[..., y]`` = sum of the first y cells of the row)."""
    acc: FloatArray | None = None
    for da, lo, hi in _row_runs(k, s):
        rows = slice(k + da, k + da + h)
        run = c[:, rows, k + hi + 1 : k + hi + 1 + w] - c[:, rows, k + lo : k + lo + w]
        if acc is None:
            acc = run
        else:
            acc += run
    assert acc is not None
    return acc


def _prefix(x: FloatArray) -> FloatArray:
    c = np.zeros((*x.shape[:-1], x.shape[-1] + 1))
    np.cumsum(x, axis=-1, out=c[..., 1:])
    return c


def _disk_size(s: int) -> int:
    return 3 * s * (s + 1) + 1


def _sums_counts(v: FloatArray, k: int, s: int) -> tuple[FloatArray, FloatArray | float]:
    """Sums of the values present and their counts over every interior cell's s-disk; the
    count is one number when no value is missing (every disk is full)."""
    h, w = v.shape[1] - 2 * k, v.shape[2] - 2 * k
    missing = np.isnan(v)
    if not missing.any():
        return _disk_sums(_prefix(v), k, s, h, w), float(_disk_size(s))
    z = _prefix(np.where(missing, 0.0, v))
    d = _prefix((~missing).astype(np.float64))
    return _disk_sums(z, k, s, h, w), _disk_sums(d, k, s, h, w)


def _tile_extreme(v: FloatArray, k: int, op: Callable[..., FloatArray]) -> FloatArray:
    """op (fmin or fmax) over the k-disk, with a sparse table of runs along the rows."""
    h, w = v.shape[1] - 2 * k, v.shape[2] - 2 * k
    table = [v]  # table[p][..., y] = op over the run of 2**p cells starting at y
    while 2 ** len(table) <= 2 * k + 1:
        half = 2 ** (len(table) - 1)
        prev = table[-1]
        table.append(op(prev[..., :-half], prev[..., half:]))
    acc = np.full((v.shape[0], h, w), np.nan)
    for da, lo, hi in _row_runs(k, k):
        p = int(np.log2(hi - lo + 1))
        run = table[p]
        rows = slice(k + da, k + da + h)
        a = run[:, rows, k + lo : k + lo + w]
        b = run[:, rows, k + hi - 2**p + 1 : k + hi - 2**p + 1 + w]
        acc = op(acc, op(a, b))
    return acc


def _tile_std(v: FloatArray, k: int, da: IntArray, db: IntArray) -> FloatArray:
    h, w = v.shape[1] - 2 * k, v.shape[2] - 2 * k
    total, count = _sums_counts(v, k, k)
    dense = not np.isnan(v).any()
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = total / count
    acc = np.zeros_like(mean)
    for a, b in zip(da.tolist(), db.tolist(), strict=True):
        dev = v[:, k + a : k + a + h, k + b : k + b + w] - mean
        dev *= dev
        acc += dev if dense else np.where(np.isnan(dev), 0.0, dev)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.asarray(np.sqrt(acc / count))


def _tile_statistic(v: FloatArray, k: int, statistic: str, windows: DiskWindows) -> FloatArray:
    if statistic in ("min", "max"):
        return _tile_extreme(v, k, np.fmin if statistic == "min" else np.fmax)
    if statistic == "std":
        da, db, _ = windows.offsets
        return _tile_std(v, k, da, db)
    total, count = _sums_counts(v, k, k)
    if statistic == "count":
        return np.broadcast_to(count, total.shape)
    with np.errstate(invalid="ignore", divide="ignore"):
        if statistic == "mean":
            total /= count
            return total
        return total if np.isscalar(count) else np.where(count > 0, total, np.nan)  # sum


def _tile_kernel(
    v: FloatArray, k: int, weights: FloatArray, steps: IntArray, da: IntArray, db: IntArray
) -> FloatArray:
    h, w = v.shape[1] - 2 * k, v.shape[2] - 2 * k
    missing = np.isnan(v)
    dense = not missing.any()
    z = v if dense else np.where(missing, 0.0, v)
    data = ~missing
    num = np.zeros((v.shape[0], h, w))
    den = np.zeros_like(num)
    for ring in range(k + 1):
        if weights[ring] == 0.0:
            continue
        ring_z, ring_d = np.zeros_like(num), np.zeros_like(num)
        for a, b in zip(da[steps == ring].tolist(), db[steps == ring].tolist(), strict=True):
            rows, cols = slice(k + a, k + a + h), slice(k + b, k + b + w)
            ring_z += z[:, rows, cols]
            if not dense:
                ring_d += data[:, rows, cols]
        num += weights[ring] * ring_z
        if dense:
            den += weights[ring] * max(6 * ring, 1)  # zones on the ring
        else:
            den += weights[ring] * ring_d
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / den, np.nan)


def _exact_statistic(
    vals: FloatArray, starts: IntArray, area: FloatArray, statistic: str
) -> FloatArray:
    """A statistic over segments ``starts`` of member values ``(time, members)``."""
    if statistic in ("min", "max"):
        op = np.fmin if statistic == "min" else np.fmax
        return np.asarray(op.reduceat(vals, starts, axis=1))
    data = ~np.isnan(vals)
    z = np.where(data, vals, 0.0)
    if statistic == "count":
        return np.add.reduceat(data.astype(np.float64), starts, axis=1)
    if statistic == "sum":
        count = np.add.reduceat(data.astype(np.float64), starts, axis=1)
        return np.where(count > 0, np.add.reduceat(z, starts, axis=1), np.nan)
    weight = np.add.reduceat(data * area, starts, axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.add.reduceat(z * area, starts, axis=1) / weight
        if statistic == "mean":
            return np.asarray(mean)
        sizes = np.diff(np.append(starts, vals.shape[1]))
        dev = vals - np.repeat(mean, sizes, axis=1)
        spread = np.add.reduceat(np.where(data, dev * dev, 0.0) * area, starts, axis=1)
        return np.asarray(np.sqrt(spread / weight))  # std


# -- geometry for the gradient --------------------------------------------------------------


def _frames(c: FloatArray) -> tuple[FloatArray, FloatArray, npt.NDArray[np.bool_]]:
    """East and north unit vectors at unit vectors ``c`` (axis 0 is x, y, z); at the poles
    some orthonormal pair (flagged)."""
    horiz = np.hypot(c[0], c[1])
    pole = ~(horiz > 1e-12)
    safe = np.where(pole, 1.0, horiz)
    east = np.stack(
        [np.where(pole, 0.0, -c[1] / safe), np.where(pole, 1.0, c[0] / safe), np.zeros_like(horiz)]
    )
    north = np.cross(c, east, axis=0)
    return east, north, pole


def _dot(a: FloatArray, b: FloatArray) -> FloatArray:
    return np.asarray(a[0] * b[0] + a[1] * b[1] + a[2] * b[2])


def _plane_xy(
    c: FloatArray, east: FloatArray, north: FloatArray, p: FloatArray
) -> tuple[FloatArray, FloatArray]:
    """Azimuthal equidistant coordinates (metres, authalic sphere) of unit vectors ``p`` in
    the plane of the centre ``c``: distance R * arc, along the azimuth of ``p``. A unit
    ``p`` is ``cos(arc) c + e east + n north`` with ``hypot(e, n) = sin(arc)``."""
    e, n = _dot(p, east), _dot(p, north)
    sin = np.hypot(e, n)
    with np.errstate(invalid="ignore", divide="ignore"):
        scale = R_AUTHALIC * np.arctan2(sin, _dot(p, c)) / sin
    scale[sin == 0] = R_AUTHALIC
    return scale * e, scale * n


def _plane_fit(s: list[FloatArray]) -> tuple[FloatArray, FloatArray]:
    """Slopes (gx, gy) of the least-squares plane from the sums of the normal equations."""
    n, sx, sy, sxx, sxy, syy, sv, sxv, syv = s
    with np.errstate(invalid="ignore", divide="ignore"):
        mx, my, mv = sx / n, sy / n, sv / n
        cxx, cxy, cyy = sxx - sx * mx, sxy - sx * my, syy - sy * my
        cxv, cyv = sxv - sx * mv, syv - sy * mv
        det = cxx * cyy - cxy * cxy
        ok = (n >= 3) & (det > 1e-9 * (cxx + cyy) ** 2)
        gx = np.where(ok, (cyy * cxv - cxy * cyv) / det, np.nan)
        gy = np.where(ok, (cxx * cyv - cxy * cxv) / det, np.nan)
    return gx, gy


def _add_terms(s: list[FloatArray], x: FloatArray, y: FloatArray, v: FloatArray) -> None:
    """Add one member's terms (NaN values left out) to the sums, in place. Without NaN the
    geometric sums (the first six) do not depend on time and are kept per cell."""
    d = ~np.isnan(v)
    if d.all():
        geometry: tuple[Any, ...] = (1.0, x, y, x * x, x * y, y * y)
        z = v
    else:
        df = d.astype(np.float64)
        geometry = (df, df * x, df * y, df * x * x, df * x * y, df * y * y)
        z = np.where(d, v, 0.0)
    for i, term in enumerate((*geometry, z, z * x, z * y)):
        if s[i].shape != np.shape(term) and np.ndim(term) > np.ndim(s[i]):
            s[i] = s[i] + term  # geometric sums gain the time axis once data go missing
        else:
            s[i] += term


def _reference(v: FloatArray) -> FloatArray:
    """Per time step, the mean of the values present (0 if none): subtracted before the
    sums, which leaves the slopes unchanged and keeps them accurate."""
    axes = tuple(range(1, v.ndim))
    data = ~np.isnan(v)
    count = data.sum(axis=axes)
    total = np.where(data, v, 0.0).sum(axis=axes)
    ref = np.where(count > 0, total / np.maximum(count, 1), 0.0)
    return ref.reshape(-1, *([1] * (v.ndim - 1)))


def _tile_gradient(
    v: FloatArray, k: int, geometry: FloatArray, da: IntArray, db: IntArray
) -> tuple[FloatArray, FloatArray, npt.NDArray[np.bool_]]:
    h, w = v.shape[1] - 2 * k, v.shape[2] - 2 * k
    c = geometry[:, k : k + h, k : k + w]
    east, north, pole = _frames(c)
    vr = v - _reference(v)
    s = [np.zeros((h, w)) for _ in range(6)] + [np.zeros((v.shape[0], h, w)) for _ in range(3)]
    for a, b in zip(da.tolist(), db.tolist(), strict=True):
        rows, cols = slice(k + a, k + a + h), slice(k + b, k + b + w)
        x, y = _plane_xy(c, east, north, geometry[:, rows, cols])
        _add_terms(s, x, y, vr[:, rows, cols])
    gx, gy = _plane_fit([np.broadcast_to(x, s[-1].shape) for x in s])
    return gx, gy, np.broadcast_to(pole, gx.shape)


def _exact_gradient(
    vals: FloatArray, starts: IntArray, c: FloatArray, p: FloatArray
) -> tuple[FloatArray, FloatArray, npt.NDArray[np.bool_]]:
    """Plane fits over segments; ``c`` and ``p`` are (3, members) centre / member vectors."""
    east, north, pole = _frames(c)
    x, y = _plane_xy(c, east, north, p)
    vr = vals - _reference(vals)
    d = ~np.isnan(vr)
    z = np.where(d, vr, 0.0)
    df = d.astype(np.float64)
    terms = (df, df * x, df * y, df * x * x, df * x * y, df * y * y, z, z * x, z * y)
    gx, gy = _plane_fit([np.add.reduceat(t, starts, axis=1) for t in terms])
    return gx, gy, np.broadcast_to(pole[starts], gx.shape)


# -- the driver -----------------------------------------------------------------------------

TileFn = Callable[[FloatArray, Any], tuple[FloatArray, ...]]
ExactFn = Callable[[FloatArray, slice, slice, IntArray], tuple[FloatArray, ...]]


def _run(
    values: FloatArray, windows: DiskWindows, nout: int, tile_fn: TileFn, exact_fn: ExactFn
) -> tuple[FloatArray, ...]:
    """Apply a per-tile and a per-segment computation; results ``(time, targets)``."""
    ntime = values.shape[0]
    outs = tuple(np.full((ntime, windows.targets.size), np.nan) for _ in range(nout))
    for tile in windows.tiles:
        for tt in _time_blocks(ntime, tile.source.size):
            results = tile_fn(_gather(values[tt], tile.source), tile)
            for out, res in zip(outs, results, strict=True):
                out[tt, tile.out] = res[:, tile.rows, tile.cols]
    ex = windows.exact
    for seg, mem, starts in _segment_blocks(ex, ntime):
        vals = values[:, ex.members[mem]]
        for out, res in zip(outs, exact_fn(vals, seg, mem, starts), strict=True):
            out[:, ex.out[seg]] = res
    return outs


def focal_statistic(values: Any, windows: DiskWindows, statistic: str) -> FloatArray:
    """A statistic of every target's k-disk: mean, min, max, sum, std or count.

    Parameters
    ----------
    values:
        ``(time, len(windows.needed))`` values aligned with ``windows.needed``; NaN = no data.
    windows:
        From :func:`alveary.grid.disk_windows` (targets, k).
    statistic:
        ``"mean"`` (area-weighted), ``"min"``, ``"max"``, ``"sum"``, ``"std"`` (area-weighted,
        population) or ``"count"`` (zones with data).

    Returns
    -------
    numpy.ndarray
        ``(time, len(windows.targets))`` float64.

    Examples
    --------
    >>> from alveary.grid import disk_windows, point_to_zone, zone_neighbors
    >>> z = point_to_zone(48.0, 2.0, 9)
    >>> w = disk_windows(z, 1)
    >>> v = np.where(w.needed == z, 7.0, 1.0)[None, :]  # 7 at the centre, 1 around it
    >>> focal_statistic(v, w, "mean"), focal_statistic(v, w, "max")
    (array([[1.85714286]]), array([[7.]]))
    >>> v[0, w.needed == zone_neighbors(z)[0]] = np.nan
    >>> focal_statistic(v, w, "count"), focal_statistic(v, w, "sum")
    (array([[6.]]), array([[12.]]))
    """
    allowed = tuple(s for s in FOCAL_STATISTICS if s != "gradient")
    if statistic not in allowed:
        raise InvalidInput("focal", statistic, "one of " + ", ".join(allowed))
    vals = _values(values, windows)
    k, ex = windows.k, windows.exact

    def tile_fn(v: FloatArray, tile: Any) -> tuple[FloatArray, ...]:
        return (_tile_statistic(v, k, statistic, windows),)

    def exact_fn(v: FloatArray, seg: slice, mem: slice, starts: IntArray) -> tuple[FloatArray]:
        return (_exact_statistic(v, starts, ex.area[mem], statistic),)

    return _run(vals, windows, 1, tile_fn, exact_fn)[0]


def focal_kernel(values: Any, windows: DiskWindows, weights: Sequence[float]) -> FloatArray:
    """A ring-weighted convolution: the zones i steps from the centre weigh ``weights[i]``
    (times their area share); normalised over the zones with data.

    Parameters
    ----------
    values:
        ``(time, len(windows.needed))`` values aligned with ``windows.needed``.
    windows:
        From :func:`alveary.grid.disk_windows`; ``len(weights)`` must be ``windows.k + 1``.
    weights:
        Finite weights >= 0, w0 for the centre.

    Examples
    --------
    >>> from alveary.grid import disk_windows, point_to_zone
    >>> z = point_to_zone(48.0, 2.0, 9)
    >>> w = disk_windows(z, 1)
    >>> v = np.where(w.needed == z, 7.0, 1.0)[None, :]
    >>> focal_kernel(v, w, [6.0, 1.0])  # (6 * 7 + 6 * 1) / (6 + 6)
    array([[4.]])
    """
    wt = np.asarray(weights, dtype=np.float64)
    if wt.shape != (windows.k + 1,) or not np.isfinite(wt).all() or (wt < 0).any() or wt.sum() <= 0:
        raise InvalidInput(
            "kernel", list(weights), f"{windows.k + 1} finite weights >= 0, not all zero"
        )
    vals = _values(values, windows)
    k, ex = windows.k, windows.exact
    da, db, steps = windows.offsets

    def tile_fn(v: FloatArray, tile: Any) -> tuple[FloatArray, ...]:
        return (_tile_kernel(v, k, wt, steps, da, db),)

    def exact_fn(v: FloatArray, seg: slice, mem: slice, starts: IntArray) -> tuple[FloatArray]:
        member_w = wt[ex.steps[mem]] * ex.area[mem]
        data = ~np.isnan(v)
        num = np.add.reduceat(np.where(data, v, 0.0) * member_w, starts, axis=1)
        den = np.add.reduceat(data * member_w, starts, axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            return (np.where(den > 0, num / den, np.nan),)

    return _run(vals, windows, 1, tile_fn, exact_fn)[0]


def focal_gradient(values: Any, windows: DiskWindows) -> tuple[FloatArray, FloatArray]:
    """Gradient magnitude (units per metre) and direction (degrees clockwise from north)
    of a least-squares plane through each target's k-disk.

    Distances are metres on the authalic sphere (radius ``R_AUTHALIC``), in the azimuthal
    equidistant plane of each target's centre. The direction is where the value rises
    fastest; NaN at the geographic poles and where the gradient is exactly zero. Both are
    NaN where fewer than three non-collinear zones have data.

    Examples
    --------
    >>> from alveary.grid import R_AUTHALIC, disk_windows, point_to_zone, zone_to_point
    >>> w = disk_windows(point_to_zone(0.0, 30.0, 10), 1)
    >>> lat, lon = zone_to_point(w.needed)
    >>> v = np.radians(lon)[None, :] * R_AUTHALIC * 1e-3  # rises eastward, 1e-3 per metre
    >>> magnitude, direction = focal_gradient(v, w)
    >>> round(float(magnitude[0, 0]) * 1e3, 4), round(float(direction[0, 0]), 2)
    (1.0, 90.0)
    """
    vals = _values(values, windows)
    k, ex = windows.k, windows.exact
    da, db, _ = windows.offsets
    uv = windows.unit_vectors.T  # (3, needed)

    def tile_fn(v: FloatArray, tile: Any) -> tuple[FloatArray, ...]:
        geometry = uv[:, np.maximum(tile.source, 0)]  # unneeded cells: see _gather
        gx, gy, pole = _tile_gradient(v, k, geometry, da, db)
        return gx, gy, pole.astype(np.float64)

    def exact_fn(v: FloatArray, seg: slice, mem: slice, starts: IntArray) -> tuple[FloatArray, ...]:
        sizes = np.diff(np.append(starts, v.shape[1]))
        c = np.repeat(uv[:, ex.centre[seg]], sizes, axis=1)
        gx, gy, pole = _exact_gradient(v, starts, c, uv[:, ex.members[mem]])
        return gx, gy, pole.astype(np.float64)

    gx, gy, pole = _run(vals, windows, 3, tile_fn, exact_fn)
    magnitude = np.hypot(gx, gy)
    direction = np.degrees(np.arctan2(gx, gy)) % 360.0
    direction = np.where((pole > 0) | (magnitude == 0), np.nan, direction)
    return magnitude, direction


def apply_focal(values: Any, windows: DiskWindows, spec: FocalSpec) -> dict[str, FloatArray]:
    """Run a parsed operation; the outputs by name.

    A statistic or kernel gives one output named after it (``"mean"``, ``"kernel"``, ...);
    the gradient gives ``"gradient_magnitude"`` and ``"gradient_direction"``.

    Examples
    --------
    >>> from alveary.grid import disk_windows, point_to_zone
    >>> w = disk_windows(point_to_zone(48.0, 2.0, 9), 2)
    >>> out = apply_focal(np.ones((1, w.needed.size)), w, parse_focal("count", 2))
    >>> list(out), out["count"].tolist()
    (['count'], [[19.0]])
    """
    if windows.k != spec.k:
        raise InvalidInput("focal_k", spec.k, f"{windows.k}, the k the windows were built for")
    if spec.statistic == "gradient":
        magnitude, direction = focal_gradient(values, windows)
        return {"gradient_magnitude": magnitude, "gradient_direction": direction}
    if spec.statistic == "kernel":
        assert spec.kernel is not None
        return {"kernel": focal_kernel(values, windows, spec.kernel)}
    return {spec.statistic: focal_statistic(values, windows, spec.statistic)}
