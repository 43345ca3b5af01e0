"""Synthetic outbreaks drawn from the endemic-epidemic model on a square lattice.

For tests and benchmarks only (parameter recovery, PIT calibration, speed): the true
parameters are known, so a fit can be checked against them.
"""

from __future__ import annotations

from dataclasses import dataclass

import geopandas
import numpy as np
import pandas as pd
import shapely
from libpysal.graph import Graph

from ..graph.border import as_border_graph
from ._simulate import simulate_paths
from ._weights import OrderMatrix


@dataclass(frozen=True)
class Synthetic:
    """A simulated outbreak: units, long counts, the graph and the true parameters."""

    units: pd.DataFrame
    counts: pd.DataFrame
    graph: Graph
    truth: dict
    panel: pd.DataFrame


def lattice(side: int, countries: int = 2) -> tuple[pd.DataFrame, Graph]:
    """Build a ``side`` x ``side`` grid of square units (queen contiguity) in countries."""
    x, y = np.meshgrid(np.arange(side), np.arange(side))
    x, y = x.ravel(), y.ravel()
    ids = pd.Index([f"U{i:05d}" for i in range(side * side)], name="unit_id")
    geoms = shapely.box(x, y, x + 1, y + 1)
    g = Graph.build_contiguity(geopandas.GeoSeries(geoms, index=ids), rook=False)
    country = np.array([f"C{k}" for k in range(countries)])[x * countries // side]
    rng = np.random.default_rng(side)
    units = pd.DataFrame(
        {
            "name": ids,
            "country": country,
            "level": 2,
            "parent_id": [f"{c}-P" for c in country],
            "population": rng.integers(20_000, 400_000, len(ids)),
        },
        index=ids,
    )
    return units, g


def simulate_outbreak(
    side: int = 10,
    weeks: int = 30,
    *,
    intercept: float = -1.0,
    lam: float = 0.5,
    phi: float = 0.3,
    d: float = 1.5,
    psi: float | dict[str, float] = 3.0,
    max_order: int = 5,
    seed: int | None = None,
    report_lag_days: int = 8,
) -> Synthetic:
    """Draw ``weeks`` weeks of counts on a ``side`` x ``side`` lattice from the model.

    ``psi`` is one negative binomial size, or one per country (``{"C0": ..., "C1": ...}``);
    the truth then holds ``psi_C0``, ``psi_C1`` (the fitted parameters' names).
    """
    units, g = lattice(side)
    ids = units.index
    bg = as_border_graph(g, countries=units["country"])
    orders = OrderMatrix.from_graph(bg, ids, max_order)
    e = units["population"].to_numpy() / 100_000
    rng = np.random.default_rng(seed)
    start = rng.poisson(2.0, len(ids)).astype(float)
    endemic = np.broadcast_to(e * np.exp(intercept), (weeks, len(ids)))
    sizes = units["country"].map(psi).to_numpy(dtype=float) if isinstance(psi, dict) else float(psi)
    kw = dict(lam=lam, phi=phi, d=d, psi=sizes, orders=orders, n_paths=1, rng=rng)
    y = simulate_paths(start, endemic, **kw)[:, :, 0]
    week0 = pd.Timestamp("2025-01-06")
    wk = pd.date_range(week0, periods=weeks + 1, freq="7D")
    panel = pd.DataFrame(np.column_stack([start, y.T]), index=ids, columns=wk)
    long = panel.stack().rename("cases").reset_index()
    long.columns = ["unit_id", "week", "cases"]
    long["cases"] = long["cases"].astype("Int64")
    long["deaths"] = pd.array([pd.NA] * len(long), dtype="Int64")
    long["received"] = long["week"] + pd.Timedelta(days=report_lag_days)
    long["source"] = "synthetic"
    long["row"] = np.arange(1, len(long) + 1)
    truth = {"intercept": intercept, "lambda": lam, "phi": phi, "d": d}
    truth.update({f"psi_{c}": v for c, v in psi.items()} if isinstance(psi, dict) else {"psi": psi})
    return Synthetic(units, long, g, truth, panel)
