"""Aperture-4 area weights between levels: children, descendants, and coarsening.

A zone's children (``alveary.grid.zone_children``) are its central child, wholly inside
it (weight 1), and six edge children, each shared half-and-half with a neighbour
(weight 1/2). Every zone of level r+1 is the central child of one zone or an edge child
of two, so the weights a finer zone receives from all coarser zones sum to one: a
partition of unity. Iterating it ``d`` times gives the weights of level r+d descendants.
Both the area-mean resampling and the pyramid use these weights, multiplied by each
finer zone's relative area (5/6 for the twelve pentagons), so that area means and
totals over the whole sphere agree exactly between levels.

Inside a strip the iterated weights are one fixed stencil on the lattice (the layout
keeps ``(a, b) -> (2a, 2b)``); near strip edges, where the lattice is folded across
seams, the weights are computed through the grid's own ``zone_children``.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from alveary import grid

__all__ = ["aggregate_children", "child_weights", "descendant_weights", "stencil"]

# lattice offsets (dA, dB) of the six edge children around the central child (2a, 2b)
_EDGE = ((1, 0), (0, 1), (-1, 1), (-1, 0), (0, -1), (1, -1))


@lru_cache(maxsize=8)
def stencil(depth: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Lattice offsets ``(dA, dB)`` and weights of the depth-``d`` descendants.

    A zone at lattice point ``(a, b)`` has descendants ``(2**d * a + dA, 2**d * b + dB)``
    with these weights (hexagons away from pentagons).

    Examples
    --------
    >>> dA, dB, w = stencil(1)
    >>> len(w), float(w.sum())
    (7, 4.0)
    >>> float(stencil(3)[2].sum()) == 4.0**3
    True
    """
    cur: dict[tuple[int, int], float] = {(0, 0): 1.0}
    for _ in range(int(depth)):
        nxt: dict[tuple[int, int], float] = {}
        for (p, q), share in cur.items():
            c = (2 * p, 2 * q)
            nxt[c] = nxt.get(c, 0.0) + share
            for dp, dq in _EDGE:
                k = (c[0] + dp, c[1] + dq)
                nxt[k] = nxt.get(k, 0.0) + 0.5 * share
        cur = nxt
    keys = sorted(cur)
    dA = np.array([k[0] for k in keys], dtype=np.int64)
    dB = np.array([k[1] for k in keys], dtype=np.int64)
    w = np.array([cur[k] for k in keys], dtype=np.float64)
    return dA, dB, w


def child_weights(zones: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Children ``(N, 7)`` and their area weights: share x relative area (padding 0)."""
    ids, w = grid.zone_children(np.asarray(zones, dtype=np.uint64))
    ids = np.atleast_2d(ids)
    w = np.atleast_2d(np.asarray(w, dtype=np.float64)).copy()
    pent = np.zeros(ids.shape, dtype=bool)
    live = w > 0
    if live.any():
        pent[live] = np.asarray(grid.is_pentagon(ids[live]))
    w[pent] *= grid.PENTAGON_SHARE
    return ids, w


def _recursive(zones: np.ndarray, depth: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sparse (row, fine id, weight) of descendants through zone_children (any zone).

    The shares (1 and 1/2) are iterated as they are; the relative area of each fine
    zone is applied once, at the end.
    """
    rows = np.arange(zones.size, dtype=np.int64)
    ids = zones.astype(np.uint64)
    w = np.ones(zones.size)
    for _ in range(depth):
        uniq, inv = np.unique(ids, return_inverse=True)
        cids, cw = grid.zone_children(uniq)
        cids, cw = np.atleast_2d(cids), np.atleast_2d(np.asarray(cw, dtype=np.float64))
        r = np.repeat(rows, cids.shape[1])
        ww = (w[:, None] * cw[inv]).ravel()
        cc = cids[inv].ravel()
        keep = ww > 0
        r, cc, ww = r[keep], cc[keep], ww[keep]
        fine, finv = np.unique(cc, return_inverse=True)
        key = r * fine.size + finv
        ukey, kinv = np.unique(key, return_inverse=True)
        w = np.bincount(kinv, weights=ww).astype(np.float64)
        rows = ukey // fine.size
        ids = fine[ukey % fine.size]
    w = w * np.where(np.asarray(grid.is_pentagon(ids)), grid.PENTAGON_SHARE, 1.0)
    return rows, ids, w


def descendant_weights(
    level: int, zones: np.ndarray, depth: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Descendants at ``level + depth`` of zones at ``level``, as sparse weights.

    Returns ``(rows, fine_ids, weights)``: ``weights[k]`` is the share of fine zone
    ``fine_ids[k]`` in zone ``zones[rows[k]]``, times the fine zone's relative area.
    Each zone's weights sum to ``4**depth`` times its own relative area.

    Examples
    --------
    >>> z = grid.all_zones(2)
    >>> rows, fine, w = descendant_weights(2, z, 2)
    >>> bool(np.allclose(np.bincount(rows, w, minlength=z.size)[:3], 16.0))
    True
    """
    zones = np.asarray(zones, dtype=np.uint64).ravel()
    depth = int(depth)
    if depth == 0:
        return np.arange(zones.size), zones.copy(), np.ones(zones.size)
    _, region, i, j = (np.asarray(x, dtype=np.int64) for x in grid.zone_to_index(zones))
    n = 1 << level
    m = 1 << depth
    nf = n * m
    dA, dB, sw = stencil(depth)
    a = i + 1
    A = a[:, None] * m + dA[None, :]
    B = j[:, None] * m + dB[None, :]
    inside = (region[:, None] < 5) & (A > 0) & (A <= 2 * nf) & (B >= 0) & (B < nf)
    interior = inside.all(axis=1)
    # pentagons sit on strip corners, never in the interior set
    rows_i = np.repeat(np.flatnonzero(interior), dA.size)
    fine_i = grid.index_to_zone(
        level + depth,
        np.repeat(region[interior], dA.size),
        (A[interior] - 1).ravel(),
        B[interior].ravel(),
    )
    w_i = np.tile(sw, int(interior.sum()))
    edge = np.flatnonzero(~interior)
    if edge.size:
        r_e, f_e, w_e = _recursive(zones[edge], depth)
        rows_i = np.concatenate([rows_i, edge[r_e]])
        fine_i = np.concatenate([np.asarray(fine_i, dtype=np.uint64), f_e])
        w_i = np.concatenate([w_i, w_e])
    return rows_i.astype(np.int64), np.asarray(fine_i, dtype=np.uint64), w_i


def aggregate_children(
    values: np.ndarray,
    weights: np.ndarray,
    how: str = "mean",
    min_coverage: float = 0.5,
) -> np.ndarray:
    """Combine finer values ``(T, N, K)`` with area weights ``(N, K)`` into ``(T, N)``.

    ``how="mean"``: the area-weighted mean of the finer values that have data, where
    they cover at least ``min_coverage`` of the zone's area (else NaN). ``how="sum"``:
    the weighted total (edge children count half to each parent), NaN if none has data.
    No-data never enters as a number.

    Examples
    --------
    >>> w = np.array([[1.0, 0.5, 0.5, 0.5, 0.5, 0.5, 0.5]])
    >>> v = np.array([[[2.0, 4.0, np.nan, 4.0, 4.0, 4.0, 4.0]]])
    >>> aggregate_children(v, w).round(4).tolist()
    [[3.4286]]
    >>> aggregate_children(v, w, "sum").tolist()
    [[12.0]]
    """
    valid = np.isfinite(values)
    vz = np.where(valid, values, 0.0)
    total = weights.sum(axis=-1)
    wv = np.where(valid, weights[None, :, :], 0.0)
    covered = wv.sum(axis=-1)
    if how == "sum":
        out = (vz * weights[None, :, :]).sum(axis=-1)
        out[covered == 0] = np.nan
        return np.asarray(out, dtype=np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = (vz * wv).sum(axis=-1) / covered
        frac = covered / total[None, :]
    out[~(frac >= min_coverage) | (covered == 0)] = np.nan
    return np.asarray(out, dtype=np.float64)
