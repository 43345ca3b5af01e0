"""choose_depots (spopt's MCLP + CBC) against exhaustive search over every k-subset of sites.

Source of truth: brute-force enumeration with itertools.combinations of all k-subsets of 10
candidate sites (at most C(10, 5) = 252 subsets), scoring each by the weight of the 30
districts whose centre lies within reach of a chosen site. The enumeration shares no code with
marchland or spopt: distances come from scipy's cdist on the box centres we placed.

Covered: several random instances (fixed seeds), k = 1..5, with and without existing depots
(which every subset must then contain). Ties are possible, so the covered weight is compared,
and the chosen sites are checked to really cover what the result claims.
"""

from __future__ import annotations

from itertools import combinations

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import cdist
from shapely.geometry import box

from marchland.supplies import assign_depots, choose_depots

CRS = "EPSG:3035"
N_UNITS, N_SITES = 30, 10
HALF = 3_000.0  # half the side of each square district, metres


def _instance(seed: int, n_existing: int):
    rng = np.random.default_rng(seed)
    centres = rng.uniform(0, 300_000, size=(N_UNITS, 2))
    units = gpd.GeoDataFrame(
        {
            "probability": rng.uniform(0, 1, N_UNITS),
            "population": rng.integers(1_000, 80_000, N_UNITS),
        },
        geometry=[box(x - HALF, y - HALF, x + HALF, y + HALF) for x, y in centres],
        index=pd.Index([f"U{i:02d}" for i in range(N_UNITS)], name="unit_id"),
        crs=CRS,
    )
    site_xy = centres[rng.choice(N_UNITS, N_SITES, replace=False)] + rng.uniform(
        -20_000, 20_000, (N_SITES, 2)
    )
    existing = np.zeros(N_SITES, dtype=bool)
    existing[:n_existing] = True
    sites = gpd.GeoDataFrame(
        {"name": [f"site {i}" for i in range(N_SITES)], "existing": existing},
        geometry=gpd.points_from_xy(site_xy[:, 0], site_xy[:, 1]),
        index=pd.Index([f"S{i}" for i in range(N_SITES)], name="site"),
        crs=CRS,
    )
    return units, sites, centres, site_xy


def _brute_force(centres, site_xy, weights, reach_km, k, existing):
    within = cdist(centres, site_xy) / 1000.0 <= reach_km  # units x sites
    fixed = list(np.flatnonzero(existing))
    free = [j for j in range(len(site_xy)) if j not in fixed]
    best = -1.0
    for extra in combinations(free, k):
        chosen = fixed + list(extra)
        best = max(best, float(weights[within[:, chosen].any(axis=1)].sum()))
    return best, within


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("n_existing", [0, 2])
@pytest.mark.parametrize("reach_km", [40.0, 75.0])
def test_mclp_equals_exhaustive_search(seed, n_existing, reach_km):
    units, sites, centres, site_xy = _instance(seed, n_existing)
    weights = (units["probability"] * units["population"]).to_numpy()
    for k in range(1, 6):
        expected, within = _brute_force(
            centres, site_xy, weights, reach_km, k, sites["existing"].to_numpy()
        )
        out = choose_depots(units, sites, k=k, reach_km=reach_km)
        assert len(out) == n_existing + k
        assert out["existing"].sum() == n_existing
        assert out["covered_weight"].sum() == pytest.approx(expected, rel=1e-9)
        # the chosen sites really cover what is claimed (ties may pick another optimal set)
        chosen = [sites.index.get_loc(s) for s in out.index]
        really = float(weights[within[:, chosen].any(axis=1)].sum())
        assert really == pytest.approx(expected, rel=1e-9)
        assign = assign_depots(units, out)
        assert assign.loc[assign["covered"], "weight"].sum() == pytest.approx(expected, rel=1e-9)
        assert assign["covered"].to_numpy().tolist() == within[:, chosen].any(axis=1).tolist()


# --- distance along the graph, against networkx ----------------------------------------------
# Source of truth: networkx.shortest_path_length (Dijkstra) on a graph we build here from the
# same description: unit centres joined along rook neighbours, each site joined to the unit it
# lies in; edge lengths are straight lines between those points. A "lake" removes the links
# between columns 1 and 2 in rows 0-3, so the way round is through row 4.
SIDE = 20_000.0
GRID = 5


def _grid_instance(seed: int):
    rng = np.random.default_rng(seed)
    cells = [(r, c) for r in range(GRID) for c in range(GRID)]
    ids = pd.Index([f"G{r}{c}" for r, c in cells], name="unit_id")
    units = gpd.GeoDataFrame(
        {
            "probability": rng.uniform(0, 1, len(cells)),
            "population": rng.integers(1_000, 50_000, len(cells)),
        },
        geometry=[box(c * SIDE, r * SIDE, (c + 1) * SIDE, (r + 1) * SIDE) for r, c in cells],
        index=ids,
        crs=CRS,
    )
    pairs = []
    for r, c in cells:
        for dr, dc in ((0, 1), (1, 0)):
            rr, cc = r + dr, c + dc
            if rr >= GRID or cc >= GRID:
                continue
            if dc == 1 and c == 1 and r <= 3:  # the lake
                continue
            pairs.append((f"G{r}{c}", f"G{rr}{cc}"))
    focal = [a for a, b in pairs] + [b for a, b in pairs]
    neighbor = [b for a, b in pairs] + [a for a, b in pairs]
    edges = pd.DataFrame(
        {
            "focal": focal,
            "neighbor": neighbor,
            "shared_m": SIDE,
            "gap_m": 0.0,
            "cross_border": False,
            "kind": "shared-boundary",
        }
    )
    from marchland.graph import BorderGraph

    graph = BorderGraph(edges, ids)
    site_xy = rng.uniform(0, GRID * SIDE, size=(8, 2))
    sites = gpd.GeoDataFrame(
        {"name": [f"site {i}" for i in range(8)], "existing": False},
        geometry=gpd.points_from_xy(site_xy[:, 0], site_xy[:, 1]),
        index=pd.Index([f"S{i}" for i in range(8)], name="site"),
        crs=CRS,
    )
    return units, sites, graph, pairs, site_xy


def _networkx_km(units, pairs, site_xy):
    import networkx as nx

    centre = {u: (g.centroid.x, g.centroid.y) for u, g in units.geometry.items()}
    g = nx.Graph()
    for a, b in pairs:
        g.add_edge(a, b, length=float(np.hypot(*np.subtract(centre[a], centre[b]))) / 1000)
    out = np.empty((len(units), len(site_xy)))
    for j, (x, y) in enumerate(site_xy):
        c, r = min(int(x // SIDE), GRID - 1), min(int(y // SIDE), GRID - 1)
        host = f"G{r}{c}"
        g.add_edge(
            "site", host, length=float(np.hypot(x - centre[host][0], y - centre[host][1])) / 1000
        )
        lengths = nx.shortest_path_length(g, "site", weight="length")
        out[:, j] = [lengths[u] for u in units.index]
        g.remove_node("site")
    return out


@pytest.mark.parametrize("seed", [4, 5])
def test_graph_distance_equals_networkx(seed):
    units, sites, graph, pairs, site_xy = _grid_instance(seed)
    expected = _networkx_km(units, pairs, site_xy)
    straight = cdist(np.column_stack([units.centroid.x, units.centroid.y]), site_xy) / 1000
    assert (expected >= straight - 1e-9).all()
    assert (expected > straight + 1).any()  # the lake matters somewhere
    assign = assign_depots(units, sites, reach_km=50, distance="graph", graph=graph)
    np.testing.assert_allclose(assign["distance_km"], expected.min(axis=1), rtol=1e-12)
    nearest = np.asarray(sites.index)[expected.argmin(axis=1)]
    assert assign["depot"].tolist() == nearest.tolist()
    weights = (units["probability"] * units["population"]).to_numpy()
    within = expected <= 50
    for k in (1, 2, 3):
        best = max(
            float(weights[within[:, list(c)].any(axis=1)].sum())
            for c in combinations(range(len(sites)), k)
        )
        out = choose_depots(units, sites, k=k, reach_km=50, distance="graph", graph=graph)
        assert out["covered_weight"].sum() == pytest.approx(best, rel=1e-9)
