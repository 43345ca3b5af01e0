"""Synthetic lattices with a planted space-time excess, for tests and benchmarks only."""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
from shapely.geometry import box


def lattice_units(side: int, *, cell_m: float = 10_000.0) -> gpd.GeoDataFrame:
    """Square units ``u0000``... on a ``side`` x ``side`` grid in an equal-area CRS (metres)."""
    k = np.arange(side * side)
    x, y = (k % side) * cell_m, (k // side) * cell_m
    ids = pd.Index([f"u{i:04d}" for i in k], name="unit_id")
    geoms = [box(a, b, a + cell_m, b + cell_m) for a, b in zip(x, y, strict=True)]
    return gpd.GeoDataFrame({"population": 10_000}, geometry=geoms, index=ids, crs=3035)


def planted_panel(
    side: int,
    *,
    weeks: int = 12,
    rate: float = 2.0,
    rr: float = 3.0,
    planted_weeks: int = 2,
    seed: int | None = None,
) -> tuple[pd.DataFrame, list[str]]:
    """Poisson cases per unit-week with a plus-shaped excess of ``rr`` over the last weeks.

    Unit means vary (gamma, shape 4) and the region follows a mild weekly trend, so the
    permutation scan's margins matter. ``rr=1`` plants nothing. Returns the panel and the
    five planted unit ids (centre of the grid and its four neighbours).
    """
    rng = np.random.default_rng(seed)
    n = side * side
    unit_mean = rng.gamma(4.0, rate / 4.0, n)
    trend = np.exp(0.05 * np.arange(weeks))
    mean = np.outer(unit_mean, trend)
    c = (side // 2) * side + side // 2
    planted = [c, c - 1, c + 1, c - side, c + side]
    mean[np.ix_(planted, np.arange(weeks - planted_weeks, weeks))] *= rr
    cases = rng.poisson(mean)
    cols = pd.date_range("2026-01-05", periods=weeks, freq="7D", name="week")
    ids = pd.Index([f"u{i:04d}" for i in range(n)], name="unit_id")
    return pd.DataFrame(cases, index=ids, columns=cols), [ids[i] for i in planted]


def long_counts(panel: pd.DataFrame, *, delay_days: int = 8) -> pd.DataFrame:
    """Turn the panel into a Counts table (one version per unit-week, received after the week)."""
    long = panel.stack().rename("cases").reset_index()
    long["cases"] = long["cases"].astype("Int64")
    long["deaths"] = pd.array([0] * len(long), dtype="Int64")
    long["received"] = long["week"] + pd.Timedelta(days=delay_days)
    long["source"] = "sim"
    long["row"] = np.arange(1, len(long) + 1)
    return long[["unit_id", "week", "cases", "deaths", "received", "source", "row"]]
