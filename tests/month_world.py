"""A small invented world for the CLI, map and bundle tests (invented data, property tests only).

A 10 x 6 grid of 20 km districts in two invented countries (AAA west, BBB east), each with two
provinces; an outbreak seeded in the south-west corner spreads east week by week, crossing the
border in the summer. Written to disk as a GeoPackage, a weekly CSV report, supply items and
depot sites, with a TOML config, so the CLI can be run on it. ``fake_region`` builds the
region object ``region.open_region`` returns (units, counts, rejects, graph) straight from the
grid, for use while that module is being written and for fast bundle tests.
"""

from __future__ import annotations

from pathlib import Path
from types import SimpleNamespace

import geopandas as gpd
import numpy as np
import pandas as pd
from shapely.geometry import box

from marchland.graph import BorderGraph

NX, NY = 10, 6
CELL = 20_000.0
X0, Y0 = 4_300_000.0, 3_200_000.0
CRS = "EPSG:3035"
WEEKS = pd.date_range("2026-03-02", "2026-10-26", freq="7D")  # Mondays (ISO weeks)


def _ids():
    out = []
    for i in range(NX):
        for j in range(NY):
            c = "AAA" if i < NX // 2 else "BBB"
            prov = 1 + (j >= NY // 2)
            out.append((i, j, c, f"{c}-{prov:02d}", f"{c}-{prov:02d}-{i:02d}{j:02d}"))
    return out


def grid_units(*, hostile_name: bool = True) -> gpd.GeoDataFrame:
    """Analysis units (level 2) in the working CRS; one district named ``<script>``."""
    rows = _ids()
    rng = np.random.default_rng(7)
    pop = rng.integers(8_000, 400_000, len(rows)).astype(float)
    units = gpd.GeoDataFrame(
        {
            "name": [f"Dist {i}-{j}" for i, j, *_ in rows],
            "country": [r[2] for r in rows],
            "level": 2,
            "parent_id": [r[3] for r in rows],
            "population": pop,
            "source": [f"{r[2].lower()}_adm2.gpkg" for r in rows],
        },
        geometry=[
            box(X0 + i * CELL, Y0 + j * CELL, X0 + (i + 1) * CELL, Y0 + (j + 1) * CELL)
            for i, j, *_ in rows
        ],
        index=pd.Index([r[4] for r in rows], name="unit_id"),
        crs=CRS,
    )
    if hostile_name:
        # The north-east corner is still unaffected in October: it is listed as a candidate.
        units.iloc[-1, units.columns.get_loc("name")] = "<script>alert('x')</script>"
    return units


def province_units() -> gpd.GeoDataFrame:
    units = grid_units()
    prov = units.dissolve("parent_id")[["country", "geometry"]]
    prov["name"] = [f"Prov {p}" for p in prov.index]
    prov["level"] = 1
    prov["parent_id"] = None
    prov["population"] = units.groupby("parent_id")["population"].sum()
    prov.index.name = "unit_id"
    return prov


def grid_graph(units: gpd.GeoDataFrame) -> BorderGraph:
    """Rook contiguity of the grid; cross-border where the countries differ."""
    pos = {(i, j): uid for i, j, _, _, uid in _ids()}
    f, n = [], []
    for (i, j), a in pos.items():
        for di, dj in ((1, 0), (-1, 0), (0, 1), (0, -1)):
            b = pos.get((i + di, j + dj))
            if b is not None:
                f.append(a)
                n.append(b)
    country = units["country"]
    edges = pd.DataFrame(
        {
            "focal": f,
            "neighbor": n,
            "shared_m": CELL,
            "gap_m": 0.0,
            "cross_border": country.loc[f].to_numpy() != country.loc[n].to_numpy(),
            "kind": "shared-boundary",
        }
    )
    return BorderGraph(edges, units.index)


def grid_counts(units: gpd.GeoDataFrame, *, seed: int = 3) -> pd.DataFrame:
    """Weekly counts: arrival grows with distance from the south-west corner."""
    rng = np.random.default_rng(seed)
    rows = _ids()
    arrival = {r[4]: 3 * r[0] + 2 * r[1] for r in rows}  # weeks after the first
    recs = []
    for uid in units.index:
        a = arrival[uid]
        for k, w in enumerate(WEEKS):
            if uid.startswith("BBB-02") and k in (20, 21):
                continue  # a reporting gap: not zero
            lam = 0.0 if k < a else 6.0 * np.exp(-0.04 * (k - a)) + 1.0
            cases = int(rng.poisson(lam)) if k >= a else 0
            if k == a:
                cases = max(cases, 2)
            deaths = int(rng.binomial(cases, 0.02))
            recs.append(
                (uid, w, cases, deaths, w + pd.Timedelta(days=8), "grid.csv", len(recs) + 1)
            )
    c = pd.DataFrame(
        recs, columns=["unit_id", "week", "cases", "deaths", "received", "source", "row"]
    )
    c["cases"] = c["cases"].astype("Int64")
    c["deaths"] = c["deaths"].astype("Int64")
    return c


def fake_region(cfg, today=None) -> SimpleNamespace:
    """What ``region.open_region`` gives, built from the grid (no file reading)."""
    units = grid_units()
    counts = grid_counts(units)
    rejects = pd.DataFrame(
        {
            "source": ["grid.csv", "grid.csv"],
            "row": [9001, 9002],
            "column": ["place", "cases"],
            "value": ["<b>Nowhere</b>", "-3"],
            "reason": ["unknown place", "negative count"],
            "candidates": [None, None],
        }
    )
    accounting = pd.DataFrame(
        {"rows_in": [len(counts) + 2], "counted": [len(counts)], "rejected": [2]},
        index=pd.Index(["grid.csv"], name="source"),
    )
    completeness = pd.DataFrame(
        {
            "share_reported": [1.0, 0.97],
            "last_received": pd.to_datetime(["2026-11-03", "2026-11-03"]),
        },
        index=pd.Index(["AAA", "BBB"], name="country"),
    )
    return SimpleNamespace(
        config=cfg,
        units=units,
        all_units=pd.concat([units, province_units()]),
        counts=counts,
        rejects=rejects,
        matches=None,
        completeness=completeness,
        accounting=accounting,
        graph=grid_graph(units),
    )


def write_world(root: Path) -> Path:
    """Write the grid world's files and a config; returns the config path."""
    root.mkdir(parents=True, exist_ok=True)
    units = grid_units()
    units.reset_index().rename(columns={"unit_id": "code"}).to_file(root / "grid.gpkg")
    prov = province_units()
    prov.reset_index().rename(columns={"unit_id": "code"})[
        ["code", "name", "country", "geometry"]
    ].to_file(root / "provinces.gpkg")
    units["population"].rename("population").to_csv(root / "pop.csv")
    counts = grid_counts(units)
    out = counts.assign(place=counts["unit_id"])[["place", "week", "cases", "deaths", "received"]]
    for country in ("AAA", "BBB"):
        part = out[out["place"].str.startswith(country)]
        part.to_csv(root / f"{country.lower()}.csv", index=False, date_format="%Y-%m-%d")
    (root / "items.csv").write_text(
        "# Example values for an invented test world, not guidance.\n"
        "item,unit,per_case,basis,buffer_share\n"
        "oral salts,sachet,10,all,0.2\ndrip fluid,litre,6,severe,0.1\n"
    )
    sites = gpd.GeoDataFrame(
        {"site": ["S1", "S2", "S3"], "name": ["West store", "Middle store", "East store"]},
        geometry=gpd.points_from_xy(
            [X0 + 2.5 * CELL, X0 + 5 * CELL, X0 + 8.5 * CELL], [Y0 + 3 * CELL] * 3
        ),
        crs=CRS,
    ).to_crs("EPSG:4326")
    pd.DataFrame(
        {
            "site": sites["site"],
            "name": sites["name"],
            "lon": sites.geometry.x,
            "lat": sites.geometry.y,
            "existing": ["no", "no", "no"],
        }
    ).to_csv(root / "depots.csv", index=False)
    (root / "world.toml").write_text(f"""
[region]
name = "Grid world (invented)"
seed = 11
as_of_lag_days = 3

[[boundaries]]
path = "provinces.gpkg"
id = "code"
name = "name"
country_column = "country"
level = 1

[[boundaries]]
path = "grid.gpkg"
id = "code"
name = "name"
country_column = "country"
level = 2
parent = "parent_id"

[population]
table = "pop.csv"

[[reports]]
name = "aaa-weekly"
path = "aaa.csv"
country = "AAA"
shape = "weekly"
level = 2
zeros = "explicit"
[reports.columns]
place = "place"
week = "week"
cases = "cases"
deaths = "deaths"
received = "received"

[[reports]]
name = "bbb-weekly"
path = "bbb.csv"
country = "BBB"
shape = "weekly"
level = 2
zeros = "explicit"
[reports.columns]
place = "place"
week = "week"
cases = "cases"
deaths = "deaths"
received = "received"

[analysis]
permutations = 99
reporting_delay_weeks = 2

[risk]
horizon_weeks = 4
top_k = 5

[supplies]
items = "items.csv"
depots = "depots.csv"
k = 2
reach_km = 60
planning_attack_rate = {{ low = 0.001, mid = 0.003, high = 0.008 }}

[output]
dir = "{(root / "out").as_posix()}"
""")
    return root / "world.toml"
