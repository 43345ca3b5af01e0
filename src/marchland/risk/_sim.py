"""Synthetic diffusion from a known cloglog hazard, for the risk tests and benchmarks.

Invented data only (rule 3: for property tests and benchmarks, never as evidence of a
statistic's correctness against the world). A grid of square units split between two invented
countries; each week every candidate unit (within two steps of an affected one) gets its first
case with probability ``1 - exp(-exp(eta))``, where ``eta`` is a known linear function of the
very features :mod:`marchland.risk._features` computes; affected units then follow a rise-and-fall
case curve. Fitting the model to such data should recover the coefficients.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from . import _features as rf

#: Weekly hazard coefficients per unit of each raw feature (invented for the simulation).
TRUE_WEEKLY = {
    "intercept": -4.5 - 0.5 * np.log(1e5),
    "near_pressure": 0.45,
    "far_pressure": 0.25,
    "cross_share": 0.6,
    "growth": 0.3,
    "distance_km": -0.08,
    "log_population": 0.5,
}


@dataclass(frozen=True)
class Simulation:
    """Counts (every unit, every week, received a week later), units, graph, true hazards."""

    counts: pd.DataFrame
    units: object
    graph: object
    eta: pd.DataFrame  # weeks x units: true weekly linear predictor (NaN when not at risk)
    first: pd.Series  # true first-case week per unit (NaT if never)


def grid_region(
    nx: int,
    ny: int,
    *,
    side_m: float = 10_000.0,
    seed: int = 0,
    stripe: int | None = None,
    countries: tuple[str, ...] = ("TVR", "OSK"),
):
    """Square units on an ``nx`` by ``ny`` grid in (by default two) countries.

    The countries take turns every ``stripe`` columns (default: the left half and the right).
    """
    import geopandas as gpd
    from shapely import box

    from ..graph.border import BorderGraph

    rng = np.random.default_rng(seed)
    ix, iy = np.meshgrid(np.arange(nx), np.arange(ny), indexing="ij")
    ix, iy = ix.ravel(), iy.ravel()
    ids = pd.Index([f"U{i:03d}-{j:03d}" for i, j in zip(ix, iy, strict=True)], name="unit_id")
    stripe = max(nx // 2, 1) if stripe is None else stripe
    country = np.asarray(countries)[(ix // stripe) % len(countries)]
    pop = np.round(np.exp(rng.normal(np.log(8e4), 0.6, len(ids))))
    units = gpd.GeoDataFrame(
        {"country": country, "population": pop},
        geometry=box(ix * side_m, iy * side_m, (ix + 1) * side_m, (iy + 1) * side_m),
        index=ids,
        crs="EPSG:3035",
    )
    k = np.arange(len(ids)).reshape(nx, ny)
    right = np.column_stack([k[:-1, :].ravel(), k[1:, :].ravel()])
    up = np.column_stack([k[:, :-1].ravel(), k[:, 1:].ravel()])
    pairs = np.vstack([right, up])
    f = np.concatenate([pairs[:, 0], pairs[:, 1]])
    n = np.concatenate([pairs[:, 1], pairs[:, 0]])
    edges = pd.DataFrame(
        {
            "focal": ids[f],
            "neighbor": ids[n],
            "shared_m": side_m,
            "gap_m": 0.0,
            "cross_border": country[f] != country[n],
            "kind": "shared-boundary",
        }
    )
    return units, BorderGraph(edges, ids)


def simulate(
    nx: int = 20,
    ny: int = 20,
    *,
    weeks: int = 40,
    seed: int = 0,
    coefficients: dict | None = None,
    n_seeds: int = 2,
    peak_incidence: float = 40.0,
    recent_weeks: int = 3,
    start: str = "2026-01-05",
    stripe: int | None = None,
    countries: tuple[str, ...] = ("TVR", "OSK"),
) -> Simulation:
    """Run the diffusion; features are recomputed each week from the cases so far."""
    coef = dict(TRUE_WEEKLY if coefficients is None else coefficients)
    rng = np.random.default_rng(seed)
    units, graph = grid_region(nx, ny, seed=seed, stripe=stripe, countries=countries)
    static = rf.build_static(units, graph)
    n = len(static.ids)
    grid = rf.week_grid(pd.Timestamp(start), pd.Timestamp(start) + rf.WEEK * (weeks - 1))
    first = np.full(n, weeks, dtype=np.int64)
    # Seeds next to a border, so cross-border exposure varies in every run.
    col = np.arange(n) // ny
    stripe = max(nx // 2, 1) if stripe is None else stripe
    near_border = np.flatnonzero((col % stripe == stripe - 1) & (col < nx - 1))
    first[rng.choice(near_border, n_seeds, replace=False)] = 0
    cases = np.zeros((n, weeks))
    # Affected units follow s * exp(-s / 3) weeks after their first case, scaled to reach about
    # ``peak_incidence`` per 100,000 and varying between units.
    scale = static.population / 1e5 * peak_incidence * rng.gamma(4.0, 0.25, n) / (3 * np.exp(-1))
    eta_out = np.full((weeks, n), np.nan)
    names = rf.FEATURES
    b = np.array([coef[f] for f in names])
    for t in range(weeks):
        s = t - first
        lam = np.where(s >= 0, scale * (s + 1) * np.exp(-(s + 1) / 3), 0.0)
        cases[:, t] = rng.poisson(lam)
        cases[first == t, t] = np.maximum(cases[first == t, t], 1)
        if t == weeks - 1:
            break
        panel = _panel(cases[:, : t + 1], first, static, grid[: t + 1], recent_weeks)
        risk = np.flatnonzero(panel.at_risk[:, t])
        x = rf.matrix(panel, names, risk, np.full(len(risk), t))
        eta = coef["intercept"] + x @ b
        eta_out[t, risk] = eta
        hit = rng.random(len(risk)) < -np.expm1(-np.exp(eta))
        first[risk[hit]] = t + 1
    uid = np.repeat(static.ids.to_numpy(), weeks)
    wk = np.tile(grid.to_numpy(), n)
    counts = pd.DataFrame(
        {
            "unit_id": uid,
            "week": wk,
            "cases": pd.array(cases.ravel().astype(np.int64), dtype="Int64"),
            "deaths": pd.array(np.zeros(n * weeks, dtype=np.int64), dtype="Int64"),
            "received": wk + np.timedelta64(7, "D"),
            "source": "simulation",
            "row": np.arange(1, n * weeks + 1),
        }
    )
    fw = pd.Series(
        [grid[i] if i < weeks else pd.NaT for i in first], index=static.ids, name="first_week"
    )
    eta = pd.DataFrame(eta_out, index=grid, columns=static.ids)
    return Simulation(counts, units, graph, eta, fw)


def with_delays(
    sim: Simulation,
    mean_delay_weeks: dict[str, float],
    *,
    only_cases: tuple[str, ...] = (),
    seed: int = 0,
) -> Simulation:
    """Report the simulated weeks late, by country, and leave out zero weeks of some countries.

    Each unit-week is received ``1 + D`` weeks after it starts, ``D`` geometric on 0, 1, ...
    with the country's mean ``mean_delay_weeks``; countries in ``only_cases`` send a row only
    for weeks with cases (a week without a row is then unreported, though it had none).
    """
    rng = np.random.default_rng(seed)
    c = sim.counts
    country = sim.units["country"].reindex(c["unit_id"]).to_numpy()
    mean = pd.Series(mean_delay_weeks).reindex(country).fillna(0.0).to_numpy(dtype=float)
    d = rng.geometric(1.0 / (1.0 + mean)) - 1
    received = c["week"] + pd.to_timedelta(7 * (1 + d), unit="D")
    out = c.assign(received=received.to_numpy())
    drop = np.isin(country, list(only_cases)) & (out["cases"].to_numpy(dtype=float) == 0)
    out = out[~drop].reset_index(drop=True)
    out["row"] = np.arange(1, len(out) + 1)
    return Simulation(out, sim.units, sim.graph, sim.eta, sim.first)


def _panel(cases, first, static, weeks, recent_weeks) -> rf.Panel:
    nt = cases.shape[1]
    n = len(static.ids)
    uid = np.repeat(static.ids.to_numpy(), nt)
    wk = np.tile(weeks.to_numpy(), n)
    view = pd.DataFrame({"unit_id": uid, "week": wk, "cases": cases.ravel()})
    fw = pd.Series(
        [weeks[i] if i < nt else pd.NaT for i in first], index=static.ids, dtype="datetime64[ns]"
    )
    return rf.build_panel(view, fw, static, weeks, recent_weeks=recent_weeks)
