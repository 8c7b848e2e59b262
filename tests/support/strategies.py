"""Shared hypothesis strategies: places on the globe, levels and zone ids.

Zone ids are built from the contract's bit layout (support.samples.layout_id), so that
a strategy never depends on the code under test; only the grid's MAX_LEVEL is taken from
it (checked against the contract in tests/grid/test_grid_counts.py).
"""

from __future__ import annotations

import math

from hypothesis import strategies as st

from alveary.grid import MAX_LEVEL
from support.samples import NORTH_APEX, SOUTH_APEX, layout_id


def levels(min_level: int = 0, max_level: int = MAX_LEVEL) -> st.SearchStrategy[int]:
    return st.integers(min_value=min_level, max_value=max_level)


@st.composite
def lat_lons(draw, polar_margin: float = 0.0) -> tuple[float, float]:
    """(lat, lon) in degrees, uniform in area (lat through asin), plus the odd exact pole."""
    z = draw(st.floats(min_value=-1.0, max_value=1.0, allow_nan=False))
    lat = math.degrees(math.asin(z))
    if polar_margin:
        lat = max(min(lat, 90.0 - polar_margin), -90.0 + polar_margin)
    lon = draw(st.floats(min_value=-180.0, max_value=180.0, allow_nan=False))
    return lat, lon


@st.composite
def zone_indices(draw, levels_=None) -> tuple[int, int, int, int]:
    """(level, region, i, j) of a valid zone; apexes come up about one draw in twenty."""
    level = draw(levels_ if levels_ is not None else levels())
    n = 1 << level
    if draw(st.integers(0, 19)) == 0:
        return level, draw(st.sampled_from([NORTH_APEX, SOUTH_APEX])), 0, 0
    region = draw(st.integers(0, 4))
    i = draw(st.integers(0, 2 * n - 1))
    j = draw(st.integers(0, n - 1))
    return level, region, i, j


def zones(levels_=None) -> st.SearchStrategy[int]:
    """Valid zone ids (Python ints) at the given levels."""
    return zone_indices(levels_).map(lambda t: layout_id(*t))


@st.composite
def edge_zones(draw, levels_=None) -> int:
    """Zones on a strip's edges or the face edges inside it, where seams are handled."""
    level = draw(levels_ if levels_ is not None else levels(1))
    n = 1 << level
    region = draw(st.integers(0, 4))
    m = draw(st.integers(0, n - 1))
    row = draw(st.integers(0, 2 * n - 1))
    kind = draw(st.sampled_from(["t0", "t1", "s0", "s2", "s1", "st1", "st2"]))
    i, j = {
        "t0": (row, 0),
        "t1": (row, n - 1),
        "s0": (0, m),
        "s2": (2 * n - 1, m),
        "s1": (n - 1, m),
        "st1": (n - m - 1, m),
        "st2": (2 * n - m - 1, m),
    }[kind]
    return layout_id(level, region, i, j)
