"""Per-time-step statistics, checked against numpy's nan-aware reductions."""

from __future__ import annotations

import numpy as np
import pytest

from alveary import InvalidInput
from alveary.query import parse_stats, zone_statistics


def test_equal_areas_match_numpy_nan_reductions():
    rng = np.random.default_rng(7)
    values = rng.normal(size=(5, 200))
    values[values > 1.5] = np.nan
    out = zone_statistics(values, np.full(200, 3.0))
    # Reference: numpy.nanmean / nanmin / nanmax / nansum / nanstd (ddof=0).
    np.testing.assert_allclose(out["mean"], np.nanmean(values, axis=1), rtol=1e-12)
    np.testing.assert_array_equal(out["min"], np.nanmin(values, axis=1))
    np.testing.assert_array_equal(out["max"], np.nanmax(values, axis=1))
    np.testing.assert_allclose(out["sum"], np.nansum(values, axis=1), rtol=1e-12)
    np.testing.assert_allclose(out["std"], np.nanstd(values, axis=1), rtol=1e-10)
    np.testing.assert_array_equal(out["count"], (~np.isnan(values)).sum(axis=1))
    np.testing.assert_allclose(out["area_m2"], 3.0 * (~np.isnan(values)).sum(axis=1))


def test_unequal_areas_match_numpy_average():
    # A pentagon has 5/6 of a hexagon's area; weights are areas.
    values = np.array([[1.0, 2.0, 4.0]])
    areas = np.array([1.0, 1.0, 5.0 / 6.0])
    out = zone_statistics(values, areas)
    mean = np.average(values[0], weights=areas)
    std = np.sqrt(np.average((values[0] - mean) ** 2, weights=areas))
    assert out["mean"][0] == pytest.approx(mean)
    assert out["std"][0] == pytest.approx(std)


def test_step_without_data():
    out = zone_statistics(np.full((1, 4), np.nan), np.ones(4))
    assert out["count"][0] == 0
    assert np.isnan(out["mean"][0]) and np.isnan(out["sum"][0]) and np.isnan(out["min"][0])
    assert out["area_m2"][0] == 0


def test_parse_stats():
    assert parse_stats("std, mean") == ("mean", "std")
    assert parse_stats(None) == ()
    with pytest.raises(InvalidInput) as info:
        parse_stats("mean,median")
    assert info.value.parameter == "stats"
