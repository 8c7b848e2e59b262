"""Aperture-4 hierarchy: parents, children and their area weights.

Zone (a, b) at level r has its central child at (2a, 2b) on level r + 1, wholly inside it,
and six edge children at (2a, 2b) + offset, centred on its edge midpoints and cut in half
by the edge. An edge child's centre is equidistant from two zones of level r; its parent
is the one of the two with the smaller id (the tie rule).
"""

from __future__ import annotations

import numpy as np

from alveary.grid._lattice import OFFSETS, _drop_repeats, chart_to_ids, ids_to_chart


def parents(ids: np.ndarray) -> np.ndarray:
    level, strip, a, b = ids_to_chart(ids)
    out = np.empty(ids.shape, dtype=np.uint64)
    for lv in np.unique(level):
        sel = level == lv
        sa, sb, ss = a[sel], b[sel], strip[sel]
        odd_a, odd_b = sa % 2 == 1, sb % 2 == 1
        # The two candidate parents p1, p2 with p1 + p2 = (a, b), a lattice step apart.
        da = np.where(odd_a, 1, 0)
        db = np.where(odd_b & ~odd_a, 1, np.where(odd_a & odd_b, -1, 0))
        c1 = chart_to_ids(int(lv) - 1, ss, (sa - da) // 2, (sb - db) // 2)
        c2 = chart_to_ids(int(lv) - 1, ss, (sa + da) // 2, (sb + db) // 2)
        out[sel] = np.minimum(c1, c2)
    return out


def children(ids: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(N, 7) child ids (central first, then edge children CCW) and weights.

    Pentagons have six children: the last column holds id 0 with weight 0.
    """
    level, strip, a, b = ids_to_chart(ids)
    out = np.empty((*ids.shape, 7), dtype=np.uint64)
    for lv in np.unique(level):
        sel = level == lv
        ca = 2 * a[sel][:, None] + np.concatenate([[0], OFFSETS[:, 0]])
        cb = 2 * b[sel][:, None] + np.concatenate([[0], OFFSETS[:, 1]])
        out[sel] = chart_to_ids(int(lv) + 1, strip[sel][:, None], ca, cb)
    out[..., 1:] = _drop_repeats(out[..., 1:])
    weights = np.where(out == 0, 0.0, 0.5)
    weights[..., 0] = 1.0
    return out, weights
