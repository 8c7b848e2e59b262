"""Per-time-step statistics over a set of zones.

Every zone of the grid has the same area except the twelve pentagons (5/6 of a hexagon),
so the plain mean over zones is the area mean; the functions here weight each zone by its
area, which only differs from the plain mean when a pentagon is in the selection. Zones
without data (NaN) are left out of every statistic; ``count`` says how many had data and
``area_m2`` how much area they cover.
"""

from __future__ import annotations

import numpy as np

__all__ = ["STATISTICS", "parse_stats", "zone_statistics"]

from alveary._errors import InvalidInput

#: The statistics a request may ask for, in their output order.
STATISTICS = ("mean", "min", "max", "sum", "count", "std")


def parse_stats(text: str | None) -> tuple[str, ...]:
    """Parse ``stats=mean,max`` into a tuple in canonical order (empty for no statistics).

    >>> parse_stats("max,mean")
    ('mean', 'max')
    >>> parse_stats("all")
    ('mean', 'min', 'max', 'sum', 'count', 'std')
    >>> parse_stats("median")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: stats is 'median'; allowed: a comma-separated subset of mean,min,max,sum,count,std (or all)
    """  # noqa: E501
    if text is None or not text.strip():
        return ()
    names = {t.strip() for t in text.split(",") if t.strip()}
    if names == {"all"}:
        return STATISTICS
    unknown = sorted(names - set(STATISTICS))
    if unknown:
        allowed = f"a comma-separated subset of {','.join(STATISTICS)} (or all)"
        raise InvalidInput("stats", ",".join(unknown), allowed)
    return tuple(s for s in STATISTICS if s in names)


def zone_statistics(
    values: np.ndarray, areas: np.ndarray, stats: tuple[str, ...] = STATISTICS
) -> dict[str, np.ndarray]:
    """Area-weighted statistics of ``values`` (time, zone) over zones, per time step.

    Parameters
    ----------
    values:
        float64 array (time, zone); NaN means no data.
    areas:
        float64 array (zone,), each zone's area in m².
    stats:
        Names from :data:`STATISTICS`. ``area_m2`` (area with data) is always returned.

    Returns
    -------
    dict
        name -> float64 array (time,); NaN where no zone had data (``count`` is 0 then).
        ``std`` is the population standard deviation (area-weighted, ddof = 0).

    Examples
    --------
    >>> v = np.array([[1.0, 2.0, 3.0, np.nan], [np.nan] * 4])
    >>> out = zone_statistics(v, np.full(4, 10.0))
    >>> out["mean"].tolist(), out["count"].tolist(), out["area_m2"].tolist()
    ([2.0, nan], [3.0, 0.0], [30.0, 0.0])
    >>> round(float(out["std"][0]), 6)  # numpy.std([1, 2, 3]) = sqrt(2/3)
    0.816497
    """
    values = np.asarray(values, dtype=np.float64)
    areas = np.asarray(areas, dtype=np.float64)
    have = ~np.isnan(values)
    w = np.where(have, areas[None, :], 0.0)
    x = np.where(have, values, 0.0)
    count = have.sum(axis=1).astype(np.float64)
    wsum = w.sum(axis=1)
    empty = count == 0
    out: dict[str, np.ndarray] = {}
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = (w * x).sum(axis=1) / wsum
    mean[empty] = np.nan
    for name in stats:
        if name == "mean":
            out[name] = mean
        elif name == "min":
            out[name] = np.where(
                empty, np.nan, np.where(have, values, np.inf).min(axis=1, initial=np.inf)
            )
        elif name == "max":
            out[name] = np.where(
                empty, np.nan, np.where(have, values, -np.inf).max(axis=1, initial=-np.inf)
            )
        elif name == "sum":
            out[name] = np.where(empty, np.nan, x.sum(axis=1))
        elif name == "count":
            out[name] = count
        elif name == "std":
            with np.errstate(invalid="ignore", divide="ignore"):
                dev = np.where(have, values - mean[:, None], 0.0)
                var = (w * dev * dev).sum(axis=1) / wsum
            out[name] = np.where(empty, np.nan, np.sqrt(np.maximum(var, 0.0)))
    out["area_m2"] = wsum
    return out
