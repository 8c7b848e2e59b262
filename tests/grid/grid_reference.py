"""A slow, independent model of the grid, built from the written contract only.

It knows the icosahedron (``_snyder.VERTICES`` / ``FACES``), the face-plane frame
documented for ``_snyder.project`` and the strip layout and id bit layout of the
contract, and nothing else of the implementation: lattice points are integer
barycentric triples on a face, neighbours and boundary corners are found by unfolding
the neighbouring face across an edge, and the owner of a lattice point is looked up
through every face that holds it. The projection itself is checked against PROJ in
test_grid_projection.py, which is what makes this model an outside reference.
"""

from __future__ import annotations

import math
from functools import cached_property

import numpy as np

from support.samples import layout_id, layout_index

#: Snyder (1992) constants for the icosahedron, also in the design notes:
#: g = arc from face centre to vertex, R'/R.
G_DEG = 37.37736814
R_PRIME_RATIO = 0.91038328153090290025

#: The six steps between neighbouring lattice points, as barycentric triples.
STEPS = np.array([[1, -1, 0], [1, 0, -1], [0, 1, -1], [-1, 1, 0], [-1, 0, 1], [0, -1, 1]])
#: Three times the offsets from a lattice point to the centroids of its six unit triangles.
CORNERS3 = np.array([[2, -1, -1], [1, 1, -2], [-1, 2, -1], [-2, 1, 1], [-1, -1, 2], [1, -2, 1]])

NORTH_APEX_REGION = 5
SOUTH_APEX_REGION = 6


spec_id = layout_id
spec_index = layout_index


_F = 1 / 298.257223563  # WGS84 flattening, common practice
_E2 = _F * (2 - _F)
_E = math.sqrt(_E2)
_QP = 1 + (1 - _E2) / (2 * _E) * math.log((1 + _E) / (1 - _E))  # Snyder 1987, eq. 3-12
_GL_X, _GL_W = np.polynomial.legendre.leggauss(48)


def _dq(phi):
    """Snyder's dq/dphi = 2 (1 - e^2) cos(phi) / (1 - e^2 sin^2 phi)^2."""
    return 2 * (1 - _E2) * np.cos(phi) / (1 - _E2 * np.sin(phi) ** 2) ** 2


def _q_to_pole(colat):
    """q_p - q(phi) for colatitudes (rad) in [0, pi/2], by Gauss-Legendre quadrature."""
    half = colat / 2
    t = np.pi / 2 - half[..., None] * (1 + _GL_X)
    return half * (_dq(t) @ _GL_W)


def geodetic_to_authalic(lat_deg):
    """Authalic latitude (degrees) without cancellation near the poles: integrate dq/dphi
    from phi to the pole, then 1 - sin(beta) = (q_p - q) / q_p gives the colatitude as
    2 asin(sqrt((q_p - q) / (2 q_p)))."""
    lat = np.asarray(lat_deg, float)
    colat = np.radians(90.0 - np.abs(lat))
    colat_b = 2 * np.arcsin(np.sqrt(_q_to_pole(colat) / (2 * _QP)))
    return np.sign(lat) * (90.0 - np.degrees(colat_b))


def authalic_to_geodetic(beta_deg):
    """Inverse of :func:`geodetic_to_authalic` by Newton steps on the colatitude."""
    beta = np.asarray(beta_deg, float)
    target = np.sin(np.radians(90.0 - np.abs(beta)) / 2)  # sqrt((q_p - q) / (2 q_p))
    colat = np.radians(90.0 - np.abs(beta))
    for _ in range(8):
        h = np.sqrt(_q_to_pole(colat) / (2 * _QP))
        with np.errstate(divide="ignore", invalid="ignore"):
            slope = _dq(np.pi / 2 - colat) / (4 * _QP * h)
            step = np.where(h > 0, (h - target) / slope, 0.0)
        colat = np.clip(colat - step, 0.0, np.pi / 2)
    return np.sign(beta) * (90.0 - np.degrees(colat))


def unit(lat_deg, lon_deg):
    """Unit vectors of (lat, lon) in degrees on a sphere."""
    lat = np.radians(np.asarray(lat_deg, dtype=float))
    lon = np.radians(np.asarray(lon_deg, dtype=float))
    return np.stack([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)], -1)


def latlon(v):
    """(lat, lon) in degrees of (non-zero) vectors."""
    v = np.asarray(v, dtype=float)
    v = v / np.linalg.norm(v, axis=-1, keepdims=True)
    return np.degrees(np.arcsin(np.clip(v[..., 2], -1, 1))), np.degrees(
        np.arctan2(v[..., 1], v[..., 0])
    )


class ReferenceGrid:
    """Lattice bookkeeping of the contract, on top of the projection under test."""

    def __init__(self) -> None:
        from alveary.grid import _snyder

        self.snyder = _snyder
        self.V = np.asarray(_snyder.VERTICES, dtype=float)
        self.F = np.asarray(_snyder.FACES, dtype=np.int64)
        # Contract: vertex k of a face sits at C (cos 120k, sin 120k).
        self.C = _snyder.R_AUTHALIC * R_PRIME_RATIO * math.tan(math.radians(G_DEG))
        ang = np.radians([0.0, 120.0, 240.0])
        self.corners = self.C * np.stack([np.cos(ang), np.sin(ang)], 1)  # (3, 2)
        m = np.vstack([self.corners.T, np.ones(3)])  # [x, y, 1] = m @ w
        self.to_bary = np.linalg.inv(m)
        self.faces_of_vertex = [np.flatnonzero((self.F == v).any(1)) for v in range(12)]
        self._strips()

    # -- the strip layout ----------------------------------------------------------------

    def _strips(self) -> None:
        F = self.F
        strips_of_vertex = [set(f // 4 for f in self.faces_of_vertex[v]) for v in range(12)]
        apexes = [v for v in range(12) if len(strips_of_vertex[v]) == 5]
        assert len(apexes) == 2, f"expected two apex vertices, got {apexes}"
        p, q = sorted(apexes, key=lambda v: -self.V[v, 2])
        self.P, self.Q = int(p), int(q)
        self.face_st = np.zeros((20, 3, 2), dtype=np.int64)
        self.n_of_strip = []
        self.s_of_strip = []
        for k in range(5):
            faces = list(range(4 * k, 4 * k + 4))
            cap_n = [f for f in faces if p in F[f]]
            cap_s = [f for f in faces if q in F[f]]
            assert len(cap_n) == 1 and len(cap_s) == 1, f"strip {k} needs one cap at each apex"
            cap_n, cap_s = cap_n[0], cap_s[0]
            bands = [f for f in faces if f not in (cap_n, cap_s)]
            band1 = [f for f in bands if len(set(F[f]) & set(F[cap_n])) == 2]
            assert len(band1) == 1, f"strip {k}: one band face must share an edge with the cap"
            band1 = band1[0]
            band2 = next(f for f in bands if f != band1)
            n_next = (set(F[cap_n]) & set(F[band2])).pop()
            n_this = (set(F[cap_n]) - {p, n_next}).pop()
            s_this = (set(F[band1]) & set(F[cap_s])).pop()
            s_next = (set(F[cap_s]) - {q, s_this}).pop()
            st = {p: (0, 0), n_next: (1, 0), s_next: (2, 0), n_this: (0, 1), s_this: (1, 1)}
            st[q] = (2, 1)
            for f in faces:
                self.face_st[f] = [st[v] for v in F[f]]
            self.n_of_strip.append(n_this)
            self.s_of_strip.append(s_this)
        # strip k's N_{k+1} is strip k+1's N_k (the strips go round in order)
        for k in range(5):
            nxt = (k + 1) % 5
            cap = F[4 * k : 4 * k + 4][(F[4 * k : 4 * k + 4] == p).any(1)][0]
            assert self.n_of_strip[nxt] in cap, "strips are not numbered in order around P"

    # -- lattice points and their representations -------------------------------------

    def other_face(self, f: int, a: int, b: int) -> int:
        """The face other than f holding vertices a and b (global vertex ids)."""
        for g in self.faces_of_vertex[a]:
            if g != f and b in self.F[g]:
                return int(g)
        raise AssertionError("edge without a second face")

    def normal_forms(self, f: int, w: np.ndarray) -> list[tuple[int, tuple[int, ...]]]:
        """Every (face, triple) naming the point with integer weights w on face f.

        w may have one negative weight (a point just beyond an edge); the neighbouring face
        is then unfolded onto f's plane (reflection of the far vertex: V' = Vj + Vk - Vi).
        """
        w = [int(x) for x in w]
        neg = [i for i in range(3) if w[i] < 0]
        if neg:
            assert len(neg) == 1, "cannot unfold past two edges"
            i = neg[0]
            j, k = (i + 1) % 3, (i + 2) % 3
            vj, vk = self.F[f, j], self.F[f, k]
            g = self.other_face(f, vj, vk)
            new = {int(v): 0 for v in self.F[g]}
            far = next(v for v in self.F[g] if v not in (vj, vk))
            new[int(far)] = -w[i]
            new[int(vj)] = w[j] + w[i]
            new[int(vk)] = w[k] + w[i]
            return self.normal_forms(g, np.array([new[int(v)] for v in self.F[g]]))
        out = {(int(f), tuple(w))}
        zeros = [i for i in range(3) if w[i] == 0]
        if len(zeros) == 1:
            i = zeros[0]
            j, k = (i + 1) % 3, (i + 2) % 3
            g = self.other_face(f, self.F[f, j], self.F[f, k])
            weights = {int(self.F[f, j]): w[j], int(self.F[f, k]): w[k]}
            out.add((g, tuple(weights.get(int(v), 0) for v in self.F[g])))
        elif len(zeros) == 2:
            i = next(i for i in range(3) if w[i] != 0)
            v = self.F[f, i]
            for g in self.faces_of_vertex[v]:
                out.add((int(g), tuple(w[i] if u == v else 0 for u in self.F[g])))
        return sorted(out)

    def owner(self, f: int, w, n: int) -> int:
        """Zone id of the lattice point with weights w (sum n) on face f."""
        forms = self.normal_forms(f, np.asarray(w))
        for g, b in forms:
            nz = [x for x in b if x]
            if len(nz) == 1:
                v = self.F[g][next(i for i in range(3) if b[i])]
                if v == self.P:
                    return spec_id(n.bit_length() - 1, NORTH_APEX_REGION, 0, 0)
                if v == self.Q:
                    return spec_id(n.bit_length() - 1, SOUTH_APEX_REGION, 0, 0)
        level = n.bit_length() - 1
        owners = set()
        for g, b in forms:
            s, t = np.asarray(b) @ self.face_st[g]
            if 0 < s <= 2 * n and 0 <= t < n:
                owners.add(spec_id(level, g // 4, int(s) - 1, int(t)))
        assert len(owners) == 1, f"lattice point {f, w} has owners {owners}"
        return owners.pop()

    def form_of_zone(self, zone: int) -> tuple[int, np.ndarray, int]:
        """(face, weights, n) of a zone id, from the contract's layout."""
        level, region, i, j = spec_index(zone)
        n = 1 << level
        if region in (NORTH_APEX_REGION, SOUTH_APEX_REGION):
            v = self.P if region == NORTH_APEX_REGION else self.Q
            g = int(self.faces_of_vertex[v][0])
            return g, np.array([n if u == v else 0 for u in self.F[g]]), n
        s, t = i + 1, j
        for g in range(4 * region, 4 * region + 4):
            m = np.vstack([self.face_st[g].T, np.ones(3)]).astype(float)
            w = np.linalg.solve(m, [s, t, n])
            wr = np.rint(w)
            if np.allclose(w, wr, atol=1e-9) and (wr >= 0).all():
                return g, wr.astype(np.int64), n
        raise AssertionError(f"zone {zone} not in its strip")

    # -- geometry -------------------------------------------------------------------------

    def plane_to_geodetic(self, f, x, y):
        beta, lon = self.snyder.unproject(f, x, y)
        return authalic_to_geodetic(beta), np.asarray(lon, float)

    def point_of(self, f: int, w, d: int) -> tuple[float, float]:
        """Geodetic (lat, lon) of the point with weights w/d on face f."""
        xy = np.asarray(w, float) @ self.corners / d
        lat, lon = self.plane_to_geodetic(np.array([f]), xy[None, 0], xy[None, 1])
        return float(lat[0]), float(lon[0])

    def centre(self, zone: int) -> tuple[float, float]:
        f, w, n = self.form_of_zone(zone)
        return self.point_of(f, w, n)

    def is_vertex(self, w) -> bool:
        return sum(1 for x in w if x) == 1

    def neighbors(self, zone: int) -> set[int]:
        f, w, n = self.form_of_zone(zone)
        if self.is_vertex(w):
            v = self.F[f][int(np.flatnonzero(w)[0])]
            out = set()
            for g in self.faces_of_vertex[v]:
                for u in self.F[g]:
                    if u != v:
                        b = [n - 1 if x == v else (1 if x == u else 0) for x in self.F[g]]
                        out.add(self.owner(int(g), b, n))
            return out
        return {self.owner(f, w + d, n) for d in STEPS}

    def boundary(self, zone: int) -> np.ndarray:
        """Boundary corners as unit vectors (authalic sphere), counter-clockwise from outside."""
        f, w, n = self.form_of_zone(zone)
        pts = []
        if self.is_vertex(w):
            v = self.F[f][int(np.flatnonzero(w)[0])]
            for g in self.faces_of_vertex[v]:
                b = [3 * n - 2 if x == v else 1 for x in self.F[g]]
                pts.append((int(g), b))
        else:
            for d in CORNERS3:
                g, b = self.normal_forms(f, 3 * w + d)[0]
                pts.append((g, list(b)))
        vecs = []
        for g, b in pts:
            xy = np.asarray(b, float) @ self.corners / (3 * n)
            beta, lon = self.snyder.unproject(np.array([g]), xy[None, 0], xy[None, 1])
            vecs.append(unit(np.asarray(beta)[0], np.asarray(lon)[0]))
        vecs = np.array(vecs)
        lat_c, lon_c = self.point_of(f, w, n)
        c = unit(geodetic_to_authalic(lat_c), lon_c)
        return vecs[np.argsort(tangent_angles(c, vecs))]

    def children(self, zone: int) -> dict[int, float]:
        f, w, n = self.form_of_zone(zone)
        out = {self.owner(f, 2 * w, 2 * n): 1.0}
        if self.is_vertex(w):
            v = self.F[f][int(np.flatnonzero(w)[0])]
            for g in self.faces_of_vertex[v]:
                for u in self.F[g]:
                    if u != v:
                        b = [2 * n - 1 if x == v else (1 if x == u else 0) for x in self.F[g]]
                        out[self.owner(int(g), b, 2 * n)] = 0.5
            return out
        for d in STEPS:
            out[self.owner(f, 2 * w + d, 2 * n)] = 0.5
        return out

    def parent_candidates(self, zone: int) -> list[int]:
        """The zone(s) at level - 1 whose central or edge child this zone is."""
        f, w, n = self.form_of_zone(zone)
        assert n >= 2
        if (w % 2 == 0).all():
            return [self.owner(f, w // 2, n // 2)]
        odd = np.flatnonzero(w % 2)
        i, j = int(odd[0]), int(odd[1])
        cands = []
        for si, sj in ((1, -1), (-1, 1)):
            b = w.copy()
            b[i] += si
            b[j] += sj
            cands.append(self.owner(f, b // 2, n // 2))
        return cands

    def parent(self, zone: int) -> int:
        """Parent by the documented rule: the central child's zone, else the smaller id."""
        return min(self.parent_candidates(zone))

    # -- point to zone --------------------------------------------------------------------

    def locate(self, lat, lon, level: int):
        """Reference zone of geodetic points: (ids, margin_m).

        margin_m is how much nearer (in the face plane, metres) the chosen lattice point is
        than the next one; near zero means the point is on a zone edge (a tie).
        """
        lat = np.atleast_1d(np.asarray(lat, float))
        lon = np.atleast_1d(np.asarray(lon, float))
        n = 1 << level
        beta = geodetic_to_authalic(lat)
        f, x, y = self.snyder.project(beta, lon)
        f = np.asarray(f, np.int64)
        xy1 = np.stack([np.asarray(x, float), np.asarray(y, float), np.ones(lat.size)], 1)
        u = (xy1 @ self.to_bary.T) * n
        r = np.rint(u)
        err = np.abs(r - u)
        excess = r.sum(1) - n
        fix = np.argmax(err, 1)
        r[np.arange(r.shape[0]), fix] -= excess
        r = r.astype(np.int64)
        xy = np.stack([x, y], 1)
        best = np.linalg.norm(r @ self.corners / n - xy, axis=1)
        others = np.stack(
            [np.linalg.norm((r + d) @ self.corners / n - xy, axis=1) for d in STEPS], 1
        )
        margin = others.min(1) - best
        ids = np.array([self.owner(int(fi), ri, n) for fi, ri in zip(f, r, strict=True)])
        return ids.astype(np.uint64), margin

    @cached_property
    def vertex_geodetic(self) -> np.ndarray:
        """The 12 icosahedron vertices as geodetic (lat, lon), shape (12, 2)."""
        beta, lon = latlon(self.V)
        return np.stack([authalic_to_geodetic(beta), lon], 1)

    def all_lattice_ids(self, level: int) -> set[int]:
        """Owner ids of every lattice point of every face (checks ownership is a partition)."""
        n = 1 << level
        out = set()
        for f in range(20):
            for a in range(n + 1):
                for b in range(n + 1 - a):
                    out.add(self.owner(f, [a, b, n - a - b], n))
        return out


def tangent_angles(c: np.ndarray, vecs: np.ndarray) -> np.ndarray:
    """Angles of vecs around unit vector c, increasing counter-clockwise seen from outside."""
    helper = np.array([0.0, 0.0, 1.0]) if abs(c[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
    e = np.cross(helper, c)
    e /= np.linalg.norm(e)
    nn = np.cross(c, e)  # e x nn = c: a right-handed frame seen from outside
    return np.arctan2(vecs @ nn, vecs @ e)
