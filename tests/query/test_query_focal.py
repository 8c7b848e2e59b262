"""Neighbourhood statistics, judged three ways:

- a brute-force loop over ``grid.zone_disk`` for every target zone (numpy reductions written
  here, area shares from ``grid.zone_areas``), on regions that cross strip seams, both
  apexes and pentagons, with NaN gaps;
- calculus on fields known in closed form in PROJ's ``+proj=isea`` plane, where zone
  centres form an exact triangular lattice (tests/grid/test_grid_projection.py checks that
  against PROJ): a linear field's disk mean is the centre value, a quadratic field's is the
  centre value plus a quarter of its Laplacian times the disk's second moment;
- a plane a·x + b·y in PROJ's stereographic plane (``+proj=stere``) about a zone: the
  gradient returns (a, b) to 1 %.
"""

from __future__ import annotations

import math

import numpy as np
import pyproj
import pytest

from alveary import InvalidInput, grid
from alveary.query._focal import (
    FocalSpec,
    apply_focal,
    focal_gradient,
    focal_kernel,
    focal_statistic,
    parse_focal,
)
from support.samples import icosahedron_vertices, layout_id, pentagons

R_Q = 6371007.18091875  # the authalic radius of WGS84 (R for PROJ's sphere)
STATISTICS = ("mean", "min", "max", "sum", "std", "count")


def authalic_lat(lat: np.ndarray) -> np.ndarray:
    """Authalic latitude from PROJ's ellipsoidal cylindrical equal-area projection
    (+proj=cea, k0 = 1: y = a q(phi) / 2, so beta = asin(y / y(90)))."""
    cea = pyproj.Transformer.from_pipeline("+proj=cea +ellps=WGS84")
    _, y = cea.transform(np.zeros_like(lat), lat)
    _, y_pole = cea.transform(0.0, 90.0)
    return np.degrees(np.arcsin(np.clip(np.asarray(y) / y_pole, -1, 1)))


def seam_region(level: int, radius: int) -> np.ndarray:
    """Disks around both apexes, a strip-corner pentagon, a band seam zone and a southern
    seam zone (design notes, section 2), ids from the layout's bit formula."""
    n = 1 << level
    h = max(n // 2, 1)
    centres = [
        layout_id(level, 5, 0, 0),  # northern apex: five northern cap seams meet there
        layout_id(level, 6, 0, 0),  # southern apex
        layout_id(level, 2, n - 1, 0),  # pentagon N_3 on strip 2's edge t = 0
        layout_id(level, 1, n + h - 1, 0),  # band seam t = 0, 1 < s < 2
        layout_id(level, 3, 2 * n - 1, h),  # southern cap seam s = 2
        layout_id(level, 0, h - 1, n - 1),  # beside the band seam t = 1, s < 1
    ]
    return np.unique(np.concatenate([grid.zone_disk(c, radius) for c in centres]))


def brute_force(targets, k, value_of, universe):
    """Every statistic of every target's disk, zone by zone over grid.zone_disk."""
    shape = (value_of.shape[0], len(targets))
    out = {s: np.full(shape, np.nan) for s in STATISTICS}
    level = int(grid.zone_level(targets[0]))
    for col, z in enumerate(targets):
        ids = grid.zone_disk(z, k)
        v = value_of[:, np.searchsorted(universe, ids)]
        area = grid.zone_areas(ids) / grid.zone_area(level)  # 1, or 5/6 for pentagons
        has = ~np.isnan(v)
        w = np.where(has, area, 0.0)
        some = has.any(axis=1)
        x = np.where(has, v, 0.0)
        mean = (w * x).sum(axis=1) / np.where(some, w.sum(axis=1), 1.0)
        spread = (w * (x - mean[:, None]) ** 2).sum(axis=1) / np.where(some, w.sum(axis=1), 1.0)
        out["count"][:, col] = has.sum(axis=1)
        out["mean"][some, col] = mean[some]
        out["std"][some, col] = np.sqrt(spread[some])
        out["sum"][some, col] = x.sum(axis=1)[some]
        out["min"][some, col] = np.where(has, v, np.inf).min(axis=1)[some]
        out["max"][some, col] = np.where(has, v, -np.inf).max(axis=1)[some]
    return out


def field_on(
    universe: np.ndarray, ntime: int, seed: int, blank=(), gaps: bool = True
) -> np.ndarray:
    """Random values per zone of the universe, with scattered NaN (if ``gaps``), and none
    on ``blank``."""
    rng = np.random.default_rng(seed)
    values = rng.normal(50.0, 10.0, size=(ntime, universe.size))
    if gaps:
        values[rng.random(values.shape) < 0.15] = np.nan
    values[:, np.searchsorted(universe, np.asarray(blank, dtype=np.uint64))] = np.nan
    return values


CASES = [
    # (level, k, tile, gaps): all zones of coarse levels; seam/apex/pentagon regions finer;
    # with NaN gaps, or dense (the code takes a shorter path when no value is missing)
    (2, 1, 128, True),
    (2, 3, 128, True),
    (3, 1, 4, True),
    (3, 1, 4, False),
    (3, 2, 128, True),
    (3, 5, 128, True),
    (4, 3, 8, True),
    (5, 1, 8, True),
    (5, 3, 128, True),
    (5, 3, 128, False),
    (6, 1, 16, True),
    (6, 2, 8, True),
    (6, 2, 8, False),
    (6, 3, 128, True),
    (7, 4, 32, True),
]


@pytest.mark.parametrize(("level", "k", "tile", "gaps"), CASES)
def test_statistics_match_a_loop_over_zone_disk(level, k, tile, gaps):
    if level <= 4:
        targets = grid.all_zones(level)
    else:
        targets = seam_region(level, radius=min((1 << level) // 8, 6))
        rng = np.random.default_rng(level)
        targets = targets[rng.random(targets.size) < 0.7]  # holes and ragged edges
        rng.shuffle(targets)  # any order
    universe = np.unique(np.concatenate([grid.zone_disk(z, k) for z in targets]))
    blank = grid.zone_disk(targets[len(targets) // 2], k) if gaps else []  # a disk without data
    values = field_on(universe, 2, seed=level * 10 + k, blank=blank, gaps=gaps)
    windows = grid.disk_windows(targets, k, tile=tile)
    assert set(windows.needed.tolist()) <= set(universe.tolist())
    given = values[:, np.searchsorted(universe, windows.needed)]
    expected = brute_force(targets, k, values, universe)
    for statistic in STATISTICS:
        got = focal_statistic(given, windows, statistic)
        np.testing.assert_allclose(
            got, expected[statistic], rtol=1e-9, atol=1e-9, err_msg=statistic
        )
    assert (expected["count"] == 0).any() == gaps, "gaps: a disk without data; else none"


@pytest.mark.parametrize(
    ("level", "k", "gaps"), [(3, 2, True), (5, 3, True), (5, 3, False), (6, 2, True)]
)
def test_kernel_matches_a_ring_weighted_loop(level, k, gaps):
    targets = grid.all_zones(level) if level <= 3 else seam_region(level, 6)
    universe = np.unique(np.concatenate([grid.zone_disk(z, k) for z in targets]))
    values = field_on(universe, 2, seed=level, gaps=gaps)
    weights = np.exp(-0.5 * (np.arange(k + 1) / 1.3) ** 2)  # a Gaussian by ring
    weights[1] = 0.0  # a ring with no weight
    windows = grid.disk_windows(targets, k, tile=16)
    got = focal_kernel(values[:, np.searchsorted(universe, windows.needed)], windows, weights)
    expected = np.full(got.shape, np.nan)
    for col, z in enumerate(targets):
        ids, steps = grid.zone_disk(z, k, return_steps=True)
        v = values[:, np.searchsorted(universe, ids)]
        w = weights[steps] * grid.zone_areas(ids) / grid.zone_area(level)
        has = ~np.isnan(v)
        num = np.where(has, v, 0.0) @ w
        den = has @ w
        expected[:, col] = np.where(den > 0, num / np.where(den > 0, den, 1), np.nan)
    np.testing.assert_allclose(got, expected, rtol=1e-10, atol=1e-10)


def test_statistics_of_a_single_zone_disk_by_hand():
    # a hexagon: 7 at the centre, 1 on its six neighbours -> mean 13/7, std, sum 13, count 7
    z = grid.point_to_zone(-20.0, 140.0, 11)
    w = grid.disk_windows(z, 1)
    v = np.where(w.needed == z, 7.0, 1.0)[None, :]
    assert focal_statistic(v, w, "mean")[0, 0] == pytest.approx(13 / 7)
    assert focal_statistic(v, w, "sum")[0, 0] == 13
    assert focal_statistic(v, w, "count")[0, 0] == 7
    assert focal_statistic(v, w, "std")[0, 0] == pytest.approx(np.std([7, 1, 1, 1, 1, 1, 1]))
    # a pentagon weighs 5/6 of a hexagon in the mean: centre 6 on a pentagon, 0 around it
    p = np.uint64(pentagons(11)[3])
    wp = grid.disk_windows(p, 1)
    vp = np.where(wp.needed == p, 6.0, 0.0)[None, :]
    assert focal_statistic(vp, wp, "mean")[0, 0] == pytest.approx(5 / (5 / 6 + 5))
    assert focal_statistic(vp, wp, "count")[0, 0] == 6


def test_all_missing_gives_nan_and_zero_count():
    w = grid.disk_windows(grid.zones_in_bbox(10.0, 10.0, 12.0, 12.0, 7), 2)
    v = np.full((3, w.needed.size), np.nan)
    for statistic in ("mean", "min", "max", "sum", "std"):
        assert np.isnan(focal_statistic(v, w, statistic)).all()
    assert (focal_statistic(v, w, "count") == 0).all()
    assert np.isnan(focal_gradient(v, w)[0]).all()


# -- closed-form fields in PROJ's isea plane ----------------------------------------------

#: Snyder (1992): g = 37.37736814 deg (face centre to vertex), R'/R = 0.91038328153090290025.
#: The face's planar triangle has circumradius R' tan g, so its edge is sqrt(3) times that.
EDGE = math.sqrt(3.0) * R_Q * 0.91038328153090290025 * math.tan(math.radians(37.37736814))


def face_interior_region(level: int, radius: int) -> np.ndarray:
    """A disk of zones about the centre of the face (P, N_0, N_1), well inside it: the face
    centre is the normalised sum of its vertices (standard orientation)."""
    v = icosahedron_vertices()
    c = v[0] + v[1] + v[2]
    c /= np.linalg.norm(c)
    lat, lon = np.degrees(np.arcsin(c[2])), np.degrees(np.arctan2(c[1], c[0]))
    # (authalic and geodetic latitude differ by < 0.2 deg, immaterial for a centre here)
    return grid.zone_disk(grid.point_to_zone(lat, lon, level), radius)


def isea_xy(zones: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    lat, lon = grid.zone_to_point(zones)
    sphere = pyproj.CRS.from_proj4(f"+proj=longlat +R={R_Q} +no_defs")
    plane = pyproj.CRS.from_proj4(f"+proj=isea +R={R_Q} +no_defs")
    fwd = pyproj.Transformer.from_crs(sphere, plane, always_xy=True)
    x, y = fwd.transform(lon, authalic_lat(lat))
    return np.asarray(x), np.asarray(y)


def hex_second_moment(k: int, spacing: float) -> float:
    """Mean squared distance of the 3k(k+1) + 1 points of a hexagonal disk from its centre:
    |a u + b v|^2 = h^2 (a^2 + a b + b^2) for unit vectors at 60 degrees."""
    total, count = 0.0, 0
    for a in range(-k, k + 1):
        for b in range(-k, k + 1):
            if max(abs(a), abs(b), abs(a + b)) <= k:
                total += a * a + a * b + b * b
                count += 1
    assert count == 3 * k * (k + 1) + 1
    return spacing**2 * total / count


@pytest.mark.parametrize(("level", "k"), [(7, 1), (7, 3), (8, 5)])
def test_linear_and_quadratic_fields_in_the_face_plane(level, k):
    targets = face_interior_region(level, 12)
    windows = grid.disk_windows(targets, k)
    assert len(windows.exact) == 0  # far from every pentagon
    x, y = isea_xy(windows.needed)
    x0, y0 = x.mean(), y.mean()
    dx, dy = x - x0, y - y0
    at = np.searchsorted(windows.needed, targets)
    # linear: the disk is symmetric about its centre, so its mean is the centre value
    linear = 3.0 + 2e-6 * dx - 5e-6 * dy
    mean = focal_statistic(linear[None, :], windows, "mean")[0]
    np.testing.assert_allclose(mean, linear[at], rtol=0, atol=1e-7)  # PROJ agrees to < 1 mm
    # quadratic: mean = f(c) + (laplacian / 4) * M2 (the hexagonal disk's second-moment
    # tensor is isotropic, M2 / 2 per axis)
    al, be, ga = 3e-10, -1e-10, 2e-10
    quad = al * dx**2 + be * dx * dy + ga * dy**2
    m2 = hex_second_moment(k, EDGE / (1 << level))
    expected = quad[at] + (2 * al + 2 * ga) / 4 * m2
    mean = focal_statistic(quad[None, :], windows, "mean")[0]
    assert (2 * al + 2 * ga) / 4 * m2 > 0.1  # the term is well above the tolerance
    np.testing.assert_allclose(mean, expected, rtol=0, atol=1e-6)


# -- the gradient of a plane ----------------------------------------------------------------


def stereographic(lat0: float, lon0: float, zones: np.ndarray):
    """Stereographic coordinates (PROJ, authalic sphere) about (lat0, lon0) geodetic."""
    beta0 = float(authalic_lat(np.array([lat0]))[0])
    sphere = pyproj.CRS.from_proj4(f"+proj=longlat +R={R_Q} +no_defs")
    plane = pyproj.CRS.from_proj4(f"+proj=stere +lat_0={beta0} +lon_0={lon0} +R={R_Q} +no_defs")
    lat, lon = grid.zone_to_point(zones)
    x, y = pyproj.Transformer.from_crs(sphere, plane, always_xy=True).transform(
        lon, authalic_lat(lat)
    )
    return np.asarray(x), np.asarray(y)


GRADIENT_CENTRES = {
    "ordinary hexagon": lambda lv: int(grid.point_to_zone(-37.5, 144.9, lv)),
    "band seam": lambda lv: layout_id(lv, 1, (1 << lv) + (1 << lv) // 2 - 1, 0),
    "southern cap seam": lambda lv: layout_id(lv, 3, 2 * (1 << lv) - 1, (1 << lv) // 3),
    "pentagon": lambda lv: pentagons(lv)[4],
    "northern apex": lambda lv: layout_id(lv, 5, 0, 0),
    "beside a pentagon": lambda lv: layout_id(lv, 2, (1 << lv) - 1, 1),
}


@pytest.mark.parametrize("place", sorted(GRADIENT_CENTRES))
@pytest.mark.parametrize(("level", "k"), [(9, 1), (12, 1), (12, 2)])
def test_gradient_of_a_plane(place, level, k):
    centre = np.uint64(GRADIENT_CENTRES[place](level))
    region = grid.zone_disk(centre, 3)
    windows = grid.disk_windows(region, k)
    lat0, lon0 = grid.zone_to_point(centre)
    x, y = stereographic(float(lat0), float(lon0), windows.needed)
    planes = [(2e-3, -1e-3), (-4e-4, 7e-4)]  # units per metre, east then north
    values = np.stack([a * x + b * y + 10.0 for a, b in planes])
    values[1, np.searchsorted(windows.needed, grid.zone_neighbors(centre)[0])] = np.nan
    magnitude, direction = focal_gradient(values, windows)
    col = int(np.flatnonzero(region == centre)[0])
    for t, (a, b) in enumerate(planes):
        east = magnitude[t, col] * math.sin(math.radians(direction[t, col]))
        north = magnitude[t, col] * math.cos(math.radians(direction[t, col]))
        # asked: (a, b) to 1 %; held to 1e-4 here, which would catch a wrong Earth radius
        assert east == pytest.approx(a, rel=1e-4)
        assert north == pytest.approx(b, rel=1e-4)
        # every zone of the region: the same slope (a few zones from the centre, the plane
        # is still that of their own tangent plane to well under 1e-4)
        np.testing.assert_allclose(magnitude[t], math.hypot(a, b), rtol=1e-4)


def test_gradient_at_the_pole_has_no_direction():
    pole = grid.point_to_zone(90.0, 0.0, 6)
    lat, _ = grid.zone_to_point(pole)
    assert lat == pytest.approx(90.0)  # a zone centre sits on the pole (an edge midpoint)
    windows = grid.disk_windows(pole, 1)
    x, _ = stereographic(90.0, 0.0, windows.needed)
    magnitude, direction = focal_gradient((1e-3 * x)[None, :], windows)
    assert magnitude[0, 0] == pytest.approx(1e-3, rel=0.01)
    assert np.isnan(direction[0, 0])


def test_gradient_needs_three_zones():
    z = grid.point_to_zone(5.0, 5.0, 10)
    w = grid.disk_windows(z, 1)
    v = np.full((1, w.needed.size), np.nan)
    keep = np.searchsorted(w.needed, [z, grid.zone_neighbors(z)[0]])
    v[0, keep] = [1.0, 2.0]
    magnitude, direction = focal_gradient(v, w)
    assert np.isnan(magnitude[0, 0]) and np.isnan(direction[0, 0])


# -- parameters -------------------------------------------------------------------------------


def test_parse_focal_and_apply():
    assert parse_focal(None) is None
    assert parse_focal("std", 4) == FocalSpec("std", 4)
    assert parse_focal("gradient") == FocalSpec("gradient", 1)
    assert parse_focal(None, None, [1, 2, 3]) == FocalSpec("kernel", 2, (1.0, 2.0, 3.0))
    assert parse_focal(None, "2", "1,2,3").k == 2
    w = grid.disk_windows(grid.point_to_zone(1.0, 1.0, 8), 2)
    out = apply_focal(np.ones((1, w.needed.size)), w, parse_focal("gradient", 2))
    assert sorted(out) == ["gradient_direction", "gradient_magnitude"]
    assert list(apply_focal(np.ones((1, w.needed.size)), w, parse_focal(None, None, "1,1,1"))) == [
        "kernel"
    ]


@pytest.mark.parametrize(
    ("args", "parameter"),
    [
        (("avg", 1, None), "focal"),
        (("mean", 0, None), "focal_k"),
        (("mean", 17, None), "focal_k"),
        (("mean", "2.5", None), "focal_k"),
        (("mean", True, None), "focal_k"),
        ((None, 2, None), "focal_k"),
        (("mean", None, "1,1"), "kernel"),
        ((None, None, "1"), "kernel"),
        ((None, None, "1,-1"), "kernel"),
        ((None, None, "1,nan"), "kernel"),
        ((None, None, "0,0"), "kernel"),
        ((None, None, "a,b"), "kernel"),
        ((None, 3, "1,1"), "focal_k"),
    ],
)
def test_parse_focal_errors_name_the_parameter(args, parameter):
    with pytest.raises(InvalidInput) as err:
        parse_focal(*args)
    assert err.value.parameter == parameter
    assert err.value.allowed


def test_wrong_shapes_and_names_are_refused():
    w = grid.disk_windows(grid.point_to_zone(1.0, 1.0, 8), 1)
    with pytest.raises(InvalidInput) as err:
        focal_statistic(np.ones((1, w.needed.size + 1)), w, "mean")
    assert err.value.parameter == "values"
    with pytest.raises(InvalidInput) as err:
        focal_statistic(np.ones((1, w.needed.size)), w, "median")
    assert err.value.parameter == "focal"
    with pytest.raises(InvalidInput) as err:
        focal_kernel(np.ones((1, w.needed.size)), w, [1.0, 1.0, 1.0])
    assert err.value.parameter == "kernel"
    with pytest.raises(InvalidInput) as err:
        apply_focal(np.ones((1, w.needed.size)), w, FocalSpec("mean", 2))
    assert err.value.parameter == "focal_k"
