"""The icosahedron in the standard orientation, its 20 faces and the five strips.

Vertex numbering (see DEVELOPERS.md, "Grid conventions"): 0 is the northern apex P at
(90° − atan(2)/2, 11.25°) on the authalic sphere; 1..5 are its neighbours N_0..N_4 at
azimuths 0°, 72°, ... from P (clockwise seen from outside); 6..10 are S_0..S_4, the
neighbours of the southern apex, S_k between N_k and N_{k+1}; 11 is the southern apex Q.

Strip k holds four faces, numbered ``4 k + m``: m = 0 the northern cap (P, N_k, N_k+1),
1 and 2 the band faces (N_k, N_k+1, S_k) and (N_k+1, S_k, S_k+1), 3 the southern cap
(S_k, S_k+1, Q). In the strip's lattice chart (s, t) the vertices sit at
P (0,0), N_k+1 (1,0), S_k+1 (2,0), N_k (0,1), S_k (1,1), Q (2,1).
"""

from __future__ import annotations

import numpy as np

#: Arc from the north pole to the apex P: half the arc between neighbouring vertices.
APEX_LAT = 90.0 - np.degrees(np.arctan(2.0)) / 2.0
APEX_LON = 11.25


def _unit(lat_deg: float, lon_deg: float) -> np.ndarray:
    la, lo = np.radians(lat_deg), np.radians(lon_deg)
    return np.array([np.cos(la) * np.cos(lo), np.cos(la) * np.sin(lo), np.sin(la)])


def _vertices() -> np.ndarray:
    p = _unit(APEX_LAT, APEX_LON)
    la, lo = np.radians(APEX_LAT), np.radians(APEX_LON)
    north = np.array([-np.sin(la) * np.cos(lo), -np.sin(la) * np.sin(lo), np.cos(la)])
    east = np.array([-np.sin(lo), np.cos(lo), 0.0])
    arc = np.arctan(2.0)  # angle between neighbouring vertices of a regular icosahedron

    def direct(azimuth_deg: float, distance: float) -> np.ndarray:
        az = np.radians(azimuth_deg)
        heading = np.cos(az) * north + np.sin(az) * east
        out: np.ndarray = np.cos(distance) * p + np.sin(distance) * heading
        return out

    ns = [direct(72.0 * k, arc) for k in range(5)]
    ss = [direct(72.0 * k + 36.0, np.pi - arc) for k in range(5)]
    v = np.array([p, *ns, *ss, -p])
    out: np.ndarray = v / np.linalg.norm(v, axis=1, keepdims=True)
    return out


#: (12, 3) unit vectors of the vertices on the authalic sphere.
VERTICES = _vertices()

_P, _Q = 0, 11


def _n(k: int) -> int:
    return 1 + k % 5


def _s(k: int) -> int:
    return 6 + k % 5


def _faces() -> tuple[np.ndarray, np.ndarray]:
    faces, lattice = [], []
    for k in range(5):
        spec = [
            ((_P, _n(k), _n(k + 1)), ((0, 0), (0, 1), (1, 0))),
            ((_n(k), _n(k + 1), _s(k)), ((0, 1), (1, 0), (1, 1))),
            ((_n(k + 1), _s(k), _s(k + 1)), ((1, 0), (1, 1), (2, 0))),
            ((_s(k), _s(k + 1), _Q), ((1, 1), (2, 0), (2, 1))),
        ]
        for verts, coords in spec:
            a, b, c = (VERTICES[i] for i in verts)
            if np.dot(a, np.cross(b, c)) < 0:  # make it counter-clockwise seen from outside
                verts = (verts[0], verts[2], verts[1])
                coords = (coords[0], coords[2], coords[1])
            faces.append(verts)
            lattice.append(coords)
    return np.array(faces, dtype=np.int64), np.array(lattice, dtype=np.float64)


#: (20, 3) vertex indices per face, counter-clockwise seen from outside.
#: FACE_LATTICE[f, k] is the (s, t) strip coordinate of vertex k of face f.
FACES, FACE_LATTICE = _faces()

#: (20, 3) unit vectors of the face centres.
FACE_CENTERS = VERTICES[FACES].sum(axis=1)
FACE_CENTERS /= np.linalg.norm(FACE_CENTERS, axis=1, keepdims=True)

# A tangent frame per face: E1 towards the face's vertex 0, E2 = centre x E1, so that
# (E1, E2, centre) is right-handed and azimuths grow counter-clockwise seen from outside.
_v0 = VERTICES[FACES[:, 0]]
FACE_E1 = _v0 - np.sum(_v0 * FACE_CENTERS, axis=1, keepdims=True) * FACE_CENTERS
FACE_E1 /= np.linalg.norm(FACE_E1, axis=1, keepdims=True)
FACE_E2 = np.cross(FACE_CENTERS, FACE_E1)

# Lattice chart: axial (s, t) with unit vectors u = (1, 0) and v = (1/2, sqrt(3)/2).
AXIAL_TO_CART = np.array([[1.0, 0.5], [0.0, np.sqrt(3.0) / 2.0]])
