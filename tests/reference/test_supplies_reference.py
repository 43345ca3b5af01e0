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
