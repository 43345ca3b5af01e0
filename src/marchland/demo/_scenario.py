"""Put the scenario together: world, population, care, links, seed, hot area, outbreak."""

from __future__ import annotations

from dataclasses import dataclass

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely

from . import SEED
from ._outbreak import Outbreak, simulate
from ._population import Population, build_population
from ._world import World, build_world


@dataclass(frozen=True)
class Scenario:
    """Everything the file writers need."""

    world: World
    population: Population
    districts: gpd.GeoDataFrame  # world.districts plus population, care
    links: pd.DataFrame  # from_id to_id kind name
    seed_id: str
    hot_ids: list[str]
    outbreak: Outbreak
    rng: np.random.Generator  # continues the one stream, for the report files


def _shore(world: World, d: gpd.GeoDataFrame) -> np.ndarray:
    return shapely.distance(d.geometry.values, world.lake) < 1.0


def _links(world: World, d: gpd.GeoDataFrame) -> pd.DataFrame:
    """Two ferries across Lake Ivesse and two bridges over the lower Senn."""
    shore = _shore(world, d) & ~d["island"].to_numpy()
    g = np.asarray(d.geometry.values)
    adj = set(zip(world.adjacency["a"], world.adjacency["b"], strict=True))
    rows = []

    ids = d.index.to_numpy()
    country = d["country"].to_numpy()
    cx = shapely.get_x(shapely.centroid(g))

    def pairs(ca, cb, lo, hi):
        ia = np.flatnonzero(shore & (country == ca))
        ib = np.flatnonzero(shore & (country == cb))
        dist = shapely.distance(g[ia][:, None], g[ib][None, :])
        i, j = np.nonzero((dist > lo) & (dist < hi))
        return ia[i], ib[j], dist[i, j]

    for ca, cb, label in (("TVR", "QLN", "west-east"), ("OSK", "MRW", "north-south")):
        i, j, dist = pairs(ca, cb, 15_000, 60_000)
        k = np.argmin(dist)
        rows.append((ids[i[k]], ids[j[k]], "ferry", f"Ivesse ferry ({label} crossing)"))
    # Bridges over the lower Senn: the crossing nearest the lake and one far downstream.
    i, j, dist = pairs("OSK", "QLN", 1_000, 3_000)
    k = np.argmin(cx[i] + cx[j])
    rows.append((ids[i[k]], ids[j[k]], "bridge", "Lower Senn bridge"))
    k2 = np.argmax(cx[i] + cx[j])
    rows.append((ids[i[k2]], ids[j[k2]], "bridge", "Senn mouth bridge"))
    links = pd.DataFrame(rows, columns=["from_id", "to_id", "kind", "name"])
    for a, b in zip(links["from_id"], links["to_id"], strict=True):
        if (min(a, b), max(a, b)) in adj:  # pragma: no cover - the chosen pairs are apart
            raise RuntimeError(f"link {a}-{b} joins districts that already touch")
    return links


def _care(d: gpd.GeoDataFrame, pop: pd.Series, rng: np.random.Generator) -> np.ndarray:
    """Care quality in [0.05, 0.95]: better in populous places, worse in Marrowen's hills."""
    c = shapely.centroid(d.geometry.values)
    x, y = shapely.get_x(c), shapely.get_y(c)
    wave = np.cos(x / 70_000 + rng.uniform(0, 6.3)) * np.cos(y / 55_000 + rng.uniform(0, 6.3))
    offset = d["country"].map({"TVR": 0.1, "OSK": 0.15, "MRW": -0.15, "QLN": 0.0}).to_numpy()
    care = 0.5 + 0.2 * wave + offset + 0.08 * (np.log(pop.to_numpy()) - 10.5)
    care += rng.normal(0, 0.06, len(d))
    return np.clip(np.round(care, 2), 0.05, 0.95)


def build_scenario() -> Scenario:
    """Build the whole scenario from the fixed seed.

    Returns
    -------
    Scenario
    """
    rng = np.random.default_rng(SEED)
    world = build_world(rng)
    pop = build_population(world, rng)
    d = world.districts.copy()
    d["population"] = pop.totals
    d["care"] = _care(d, pop.totals, rng)
    links = _links(world, d)
    # Seed: the Tavrenne river district a quarter of the way down the upper Senn.
    tvr_river = d[(d["country"] == "TVR") & d["river"]]
    p = world.river.interpolate(0.25, normalized=True)
    seed_id = tvr_river.index[np.argmin(shapely.distance(tvr_river.geometry.values, p))]
    # Hot area: the district where the Senn enters the lake and its Tavrenne shore neighbours.
    mouth = world.river.interpolate(1.0, normalized=True)
    shore = pd.Series(_shore(world, d), index=d.index)
    tvr = d[d["country"] == "TVR"]
    mouth_id = tvr.index[np.argmin(shapely.distance(tvr.geometry.values, mouth))]
    adj = world.adjacency
    nb = pd.concat(
        [
            adj.loc[adj["a"] == mouth_id, ["b", "shared_m"]].rename(columns={"b": "n"}),
            adj.loc[adj["b"] == mouth_id, ["a", "shared_m"]].rename(columns={"a": "n"}),
        ]
    )
    nb = nb[nb["n"].map(d["country"]).eq("TVR")].assign(
        wet=lambda f: f["n"].map(shore) | f["n"].map(d["river"])
    )
    nb = nb.sort_values(["wet", "shared_m"], ascending=False)
    hot_ids = sorted([mouth_id, *nb["n"].head(3)])
    ob = simulate(
        d.index,
        d["country"].to_numpy(),
        d["population"].to_numpy(float),
        d["care"].to_numpy(),
        d["river"].to_numpy(bool),
        adj,
        links,
        seed_id,
        hot_ids,
        rng,
    )
    _ensure_prefixes(world, d, ob)
    return Scenario(world, pop, d, links, seed_id, hot_ids, ob, rng)


def _ensure_prefixes(world: World, d: gpd.GeoDataFrame, ob: Outbreak) -> None:
    """Make sure affected Marrowen districts carry "Saint" and "North" in their names.

    The line list abbreviates these words ("St.", "N."); the demo should exercise both, so if
    no affected district has one, the most affected district without a prefix gets it.
    """
    total = pd.Series(ob.cases.sum(axis=1), index=d.index)
    mrw = d.index[(d["country"] == "MRW") & (total > 0)]
    for word in ("Saint ", "North "):
        if d.loc[mrw, "name"].str.startswith(word).any():
            continue
        plain = [
            u
            for u in total[mrw].sort_values(ascending=False).index
            if not d.loc[u, "name"].startswith(("Saint ", "North ", "South ", "Upper "))
        ]
        new = word + d.loc[plain[0], "name"]
        d.loc[plain[0], "name"] = new
        world.districts.loc[plain[0], "name"] = new
