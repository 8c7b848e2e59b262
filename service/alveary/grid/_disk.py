"""Disks and rings of zones: every zone within k lattice steps of a zone.

Away from the twelve pentagons the surface around a zone unfolds flat, so the disk is the
hexagon of 3k(k+1) + 1 lattice points of the zone's chart, each carried to its owner.
Where the disk would reach a pentagon (or wrap the globe) a breadth-first search over
neighbours is used instead.
"""

from __future__ import annotations

import numpy as np

from alveary.grid._lattice import chart_to_ids, ids_to_chart, neighbors


def _hex_offsets(k: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    r = np.arange(-k, k + 1)
    grid_a, grid_b = np.meshgrid(r, r, indexing="ij")
    da, db = grid_a.ravel(), grid_b.ravel()
    steps = np.maximum(np.maximum(np.abs(da), np.abs(db)), np.abs(da + db))
    keep = steps <= k
    return da[keep], db[keep], steps[keep]


def _reaches_vertex(a: int, b: int, n: int, k: int) -> bool:
    """Whether a coarse lattice point (an icosahedron vertex in any unfolding) is within k."""
    p0, q0 = a // n, b // n
    p, q = np.meshgrid(np.arange(p0 - 1, p0 + 3), np.arange(q0 - 1, q0 + 3), indexing="ij")
    da, db = p.ravel() * n - a, q.ravel() * n - b
    dist = np.maximum(np.maximum(np.abs(da), np.abs(db)), np.abs(da + db))
    return bool(dist.min() <= k)


def disk(zone: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """(ids ascending, steps) of every zone within k steps of one zone."""
    level, strip, a, b = (int(x) for x in ids_to_chart(np.asarray(zone)))
    n = 1 << level
    if 2 * k < n and not _reaches_vertex(a, b, n, k):
        da, db, steps = _hex_offsets(k)
        ids = chart_to_ids(level, strip, a + da, b + db)
        order = np.argsort(ids)
        return ids[order], steps[order]
    return _bfs(np.asarray(zone, dtype=np.uint64), k)


def _bfs(zone: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    seen = np.array([zone], dtype=np.uint64)
    steps = [np.zeros(1, dtype=np.int64)]
    rings = [seen]
    frontier = seen
    for step in range(1, k + 1):
        cand = neighbors(frontier).ravel()
        cand = np.unique(cand[cand != 0])
        cand = cand[~np.isin(cand, seen, assume_unique=True)]
        if cand.size == 0:
            break
        rings.append(cand)
        steps.append(np.full(cand.size, step, dtype=np.int64))
        seen = np.union1d(seen, cand)
        frontier = cand
    ids = np.concatenate(rings)
    st = np.concatenate(steps)
    order = np.argsort(ids)
    return ids[order], st[order]
