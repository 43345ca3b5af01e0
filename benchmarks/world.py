"""A seeded synthetic multi-country world of any size, written as a normal marchland scenario.

For the scale work of issue 19 (a continent on one machine): ``n`` Voronoi districts grouped in
provinces, the demo's four invented countries (TVR, OSK, MRW, QLN) each in its own admin-1 and
admin-2 files (own format and CRS, borders digitised so they do not line up), a population
GeoTIFF, weekly report CSVs per country with late rows and corrections, and an outbreak seeded
in several places that spreads over the district adjacency. Everything is invented.

The demo's building blocks are called wherever they are not fixed-size: the land outline,
Lloyd-relaxed Voronoi cells, fragment repair, shared-vertex densifying and adjacency
(``demo._world``), each country's perturbed copy and its files (``demo._boundaries``), the
report thinning and the monthly-transmission writer with its late rows, corrections and planted
dirt (``demo._reports``), depot picking (``demo._write``). New code here covers what the demo
holds at a fixed size: countries and provinces for any ``n``, names beyond the demo's pools, a
raster grid sized to the world, and a sparse outbreak model (the demo's is a dense n x n one).

    $ PYTHONPATH=src python benchmarks/world.py --units 10000 --out /tmp/world10k --seed 1
    $ PYTHONPATH=src marchland run /tmp/world10k/scenario.toml --month 2026-10

The scenario's month of interest is 2026-10, as in the demo.
"""

from __future__ import annotations

import argparse
import json
import shutil
import time
from pathlib import Path
from types import SimpleNamespace

import geopandas as gpd
import numpy as np
import pandas as pd
import pyproj
import scipy.sparse as sp
import shapely
from rasterio.features import rasterize
from rasterio.transform import Affine
from scipy.cluster.vq import kmeans2
from scipy.ndimage import binary_dilation, gaussian_filter
from shapely.geometry import LineString, Polygon

from marchland.demo import scenario_path
from marchland.demo._boundaries import FILES, country_copies, write_boundaries
from marchland.demo._names import name_pool
from marchland.demo._outbreak import N_WEEKS, START
from marchland.demo._population import CELL_DEG, NODATA, POP_MAX, POP_MIN, write_grid
from marchland.demo._reports import DIRT_COLUMNS, reported_counts, write_tvr
from marchland.demo._world import (
    GEN_CRS,
    N_LAND,
    World,
    _cells,
    _densify,
    _merge_fragments,
    _pairs,
    _wobbly_ring,
)
from marchland.demo._write import _depots

COUNTRIES = tuple(FILES)  # TVR OSK MRW QLN, each with its own file format and CRS
DISTRICT_KM2 = 50.0  # mean district area: 50k districts fit a ~1,600 km square of open ocean
PER_PROVINCE = 20  # districts per province, on average
DENSIFY_M = 500.0  # boundary vertices at least this often (real boundary files are dense)
LLOYD_ITERATIONS = 3  # fewer than the demo's 12: enough for even cells, cheap at 50k
MONTH = "2026-10"
# Outbreak model (sparse; per week): within-district transmission, coupling by shared border.
_BETA = 1.3
_SEASON = 0.3
_COUPLE = 0.04
_CROSS = 0.3
_POOL = 0.02  # share of people at risk
_CFR = 0.015
_WANE = 0.006


def _timed(log: dict, key: str, t0: float) -> float:
    now = time.perf_counter()
    log[key] = round(now - t0, 2)
    return now


def _domain(n: int, rng: np.random.Generator) -> Polygon:
    """The land: the demo's wobbly superellipse, scaled to ``n`` districts of DISTRICT_KM2."""
    ring = _wobbly_ring(0, 0, 1.2, 1.0, 4, 0.06, rng)
    scale = np.sqrt(n * DISTRICT_KM2 * 1e6 / ring.area)
    return shapely.affinity.scale(ring, scale, scale, origin=(0, 0))


def _tessellate(domain: Polygon, n: int, rng: np.random.Generator) -> np.ndarray:
    """Lloyd-relaxed Voronoi districts (the demo's cell and repair steps), densified."""
    minx, miny, maxx, maxy = domain.bounds
    envelope = shapely.box(minx - 1e5, miny - 1e5, maxx + 1e5, maxy + 1e5)
    pts = np.empty(0, dtype=object)
    while len(pts) < n:
        cand = shapely.points(rng.uniform(minx, maxx, 2 * n), rng.uniform(miny, maxy, 2 * n))
        pts = np.concatenate([pts, cand[shapely.contains(domain, cand)]])
    pts = pts[:n]
    for _ in range(LLOYD_ITERATIONS):
        pts = shapely.centroid(_cells(pts, domain, envelope))
    cells = _merge_fragments(_cells(pts, domain, envelope), pts)
    cells = shapely.set_precision(cells, 1.0)
    ok = (shapely.get_type_id(cells) == 3) & shapely.is_valid(cells) & (shapely.area(cells) > 0)
    return _densify(cells[ok], DENSIFY_M)


def _countries(geoms: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Four sectors around the middle, in the demo's shares, with wavy borders."""
    c = shapely.centroid(geoms)
    x, y = shapely.get_x(c), shapely.get_y(c)
    r = np.hypot(x, y)
    wave = 0.25 * np.sin(r / (r.max() / 2.5) + rng.uniform(0, 2 * np.pi))
    theta = np.mod(np.arctan2(y, x) + wave + rng.uniform(0, 2 * np.pi), 2 * np.pi)
    order = np.argsort(theta, kind="stable")
    order_c = ("OSK", "TVR", "MRW", "QLN")  # the demo's order around its lake
    share = np.array([N_LAND[k] for k in order_c], float)
    cuts = np.round(np.cumsum(share) / share.sum() * len(geoms)).astype(int)
    country = np.empty(len(geoms), dtype=object)
    for k, lo, hi in zip(order_c, np.r_[0, cuts[:-1]], cuts, strict=True):
        country[order[lo:hi]] = k
    return country


def _names(country: str, n: int, rng: np.random.Generator) -> np.ndarray:
    """``n`` distinct names: the demo's pool, then two-word names once the pool runs out."""
    base = np.array(name_pool(country, 150, rng))
    k = rng.permutation(n) if n <= len(base) else rng.permutation(len(base) * (len(base) + 1))[:n]
    first, second = base[k % len(base)], k // len(base)
    two = np.char.add(np.char.add(first, " "), base[np.maximum(second - 1, 0)])
    return np.where(second == 0, first, two)


def _label(geoms: np.ndarray, country: np.ndarray, rng: np.random.Generator):
    """Provinces (k-means on centroids) and ids/names numbered north to south, as the demo."""
    c = shapely.centroid(geoms)
    xy = np.column_stack([shapely.get_x(c), shapely.get_y(c)])
    prov = np.empty(len(geoms), dtype=object)
    for cc in COUNTRIES:
        idx = np.flatnonzero(country == cc)
        k = max(2, round(len(idx) / PER_PROVINCE))
        _, lab = kmeans2(xy[idx], k, seed=rng, minit="++")
        # Number provinces north to south (then west to east).
        py = pd.Series(xy[idx, 1]).groupby(lab).transform("mean").to_numpy()
        px = pd.Series(xy[idx, 0]).groupby(lab).transform("mean").to_numpy()
        rank = pd.Series(list(zip(-np.round(py, -4), px, strict=True))).rank(method="dense")
        prov[idx] = [f"{cc}-{int(p):02d}" for p in rank]
    frame = pd.DataFrame({"country": country, "prov": prov, "y": xy[:, 1], "x": xy[:, 0]})
    frame = frame.sort_values(["prov", "y", "x"], ascending=[True, False, True])
    frame["dn"] = frame.groupby("prov").cumcount() + 1
    frame = frame.sort_index()
    ids = frame["prov"] + "-" + frame["dn"].map("{:02d}".format)
    names = np.empty(len(geoms), dtype=object)
    prov_names = {}
    for cc in COUNTRIES:
        sel = country == cc
        provs = np.unique(prov[sel])
        pool = _names(cc, sel.sum() + len(provs), rng)
        names[sel] = pool[: sel.sum()]
        prov_names.update(zip(provs, pool[sel.sum() :], strict=True))
    districts = gpd.GeoDataFrame(
        {"name": names, "country": country, "province_id": prov},
        geometry=list(geoms),
        index=pd.Index(ids.to_numpy(), name="unit_id"),
        crs=GEN_CRS,
    ).sort_index()
    provinces = districts.dissolve("province_id")[["country", "geometry"]]
    provinces["name"] = provinces.index.map(prov_names)
    provinces.index.name = "unit_id"
    return districts, provinces


def build_world(n: int, rng: np.random.Generator) -> World:
    """Build the true geometry of an ``n``-district world.

    Parameters
    ----------
    n : int
        Districts wanted (a few may be dropped where a Voronoi cell cannot be repaired).
    rng : numpy.random.Generator

    Returns
    -------
    demo._world.World
        No lake or river: those fields hold empty geometries.
    """
    domain = _domain(n, rng)
    geoms = _tessellate(domain, n, rng)
    districts, provinces = _label(geoms, _countries(geoms, rng), rng)
    a, b, shared = _pairs(np.asarray(districts.geometry.values))
    keep = shared > 0
    ids, ctry = districts.index.to_numpy(), districts["country"].to_numpy()
    adjacency = pd.DataFrame(
        {
            "a": ids[a[keep]],
            "b": ids[b[keep]],
            "cross_border": ctry[a[keep]] != ctry[b[keep]],
            "shared_m": np.round(shared[keep], 1),
        }
    )
    return World(districts, provinces, domain, Polygon(), LineString(), LineString(), adjacency)


def _grid(world: World):
    """A north-up EPSG:4326 grid of the demo's cell size over the world, with cell centres."""
    to_ll = pyproj.Transformer.from_crs(GEN_CRS, "EPSG:4326", always_xy=True)
    ring = np.asarray(world.land.exterior.coords)
    lon, lat = to_ll.transform(ring[:, 0], ring[:, 1])
    west, north = np.floor(lon.min() * 10) / 10 - 0.1, np.ceil(lat.max() * 10) / 10 + 0.1
    ncol = int(np.ceil((lon.max() + 0.1 - west) / CELL_DEG))
    nrow = int(np.ceil((north - lat.min() + 0.1) / CELL_DEG))
    transform = Affine(CELL_DEG, 0.0, west, 0.0, -CELL_DEG, north)
    return transform, nrow, ncol, to_ll


def build_population(world: World, rng: np.random.Generator):
    """People per cell (smooth countryside plus one town per district) and district totals.

    Returns
    -------
    values : numpy.ndarray
        float32 grid; NODATA off land except a 3-cell ring of zeros (as in the demo).
    transform : affine.Affine
    towns : pandas.DataFrame
        ``unit_id name x y population`` (GEN_CRS metres), for depot candidates.
    totals : numpy.ndarray
        People per district, in the order of ``world.districts``.
    """
    transform, nrow, ncol, to_ll = _grid(world)
    d = world.districts
    geoms_ll = shapely.transform(
        d.geometry.values, lambda xy: np.column_stack(to_ll.transform(xy[:, 0], xy[:, 1]))
    )
    labels = rasterize(
        zip(geoms_ll, range(len(d)), strict=True),
        out_shape=(nrow, ncol),
        transform=transform,
        fill=-1,
        dtype="int32",
    )
    rows, cols = np.mgrid[0:nrow, 0:ncol]
    lat = transform.f - CELL_DEG * (rows + 0.5)
    area = (CELL_DEG * 111.32 * np.cos(np.radians(lat))) * (CELL_DEG * 110.57)
    wave = sum(
        np.cos(cols / rng.uniform(20, 80) + rng.uniform(0, 6.3))
        * np.cos(rows / rng.uniform(20, 80) + rng.uniform(0, 6.3))
        for _ in range(4)
    )
    people = (4 + 18 * (1 + wave / 4) ** 2) * area
    rp = shapely.point_on_surface(d.geometry.values)
    tx, ty = shapely.get_x(rp), shapely.get_y(rp)
    tpop = rng.lognormal(np.log(9_000), 0.8, len(d))
    tc, tr = ~transform @ to_ll.transform(tx, ty)
    tr, tc = np.clip(tr.astype(int), 0, nrow - 1), np.clip(tc.astype(int), 0, ncol - 1)
    town = np.zeros((nrow, ncol))
    np.add.at(town, (tr, tc), tpop)
    people += gaussian_filter(town, 1.5)
    land = labels >= 0
    lab = labels[land]
    tot = np.bincount(lab, weights=people[land], minlength=len(d))
    factor = np.clip(tot, POP_MIN, POP_MAX) / np.maximum(tot, 1e-9)
    values = np.full((nrow, ncol), NODATA, dtype="float32")
    values[land] = people[land] * factor[lab]
    values[binary_dilation(land, iterations=3) & ~land] = 0.0
    totals = np.bincount(lab, weights=values[land].astype(float), minlength=len(d))
    towns = pd.DataFrame(
        {"unit_id": d.index, "name": d["name"].to_numpy(), "x": tx, "y": ty, "population": tpop}
    )
    return values, transform, towns, totals


def simulate(world: World, population: np.ndarray, rng: np.random.Generator):
    """A weekly stochastic metapopulation outbreak over the adjacency, as a sparse model.

    The demo's model holds a dense n x n coupling matrix (20 GB at 50k districts); here the
    coupling is a scipy.sparse matrix by shared border length, weaker across countries. Seeds:
    one district per country in the first weeks, and one more per 600 districts at random
    weeks in the first year, so a large world has several foci.

    Returns
    -------
    weeks : pandas.DatetimeIndex
    cases, deaths : numpy.ndarray
        int64, districts x weeks.
    """
    d = world.districts
    n = len(d)
    pos = pd.Series(np.arange(n), index=d.index)
    adj = world.adjacency
    a, b = pos[adj["a"]].to_numpy(), pos[adj["b"]].to_numpy()
    shared = adj["shared_m"].to_numpy(float)
    perim = np.bincount(a, shared, n) + np.bincount(b, shared, n)
    mult = np.where(adj["cross_border"].to_numpy(bool), _CROSS, 1.0)
    w_ab = _COUPLE * shared * mult / np.maximum(perim[a], 1)
    w_ba = _COUPLE * shared * mult / np.maximum(perim[b], 1)
    eps = sp.csr_matrix((np.r_[w_ab, w_ba], (np.r_[a, b], np.r_[b, a])), shape=(n, n))
    pool = np.maximum(np.round(population * _POOL), 1)
    weeks = pd.date_range(START, periods=N_WEEKS, freq="7D")
    woy = weeks.isocalendar().week.to_numpy()
    season = 1 + _SEASON * np.cos(2 * np.pi * (woy - 6) / 52)
    country = d["country"].to_numpy()
    seeds = [(rng.choice(np.flatnonzero(country == c)), rng.integers(0, 4)) for c in COUNTRIES]
    extra = n // 600
    seeds += list(zip(rng.choice(n, extra), rng.integers(0, 52, extra), strict=True))
    seed_at = pd.DataFrame(seeds, columns=["pos", "t"])
    cases = np.zeros((n, N_WEEKS), dtype=np.int64)
    s = pool.copy()
    for t in range(N_WEEKS):  # the loop over weeks only; each week is vectorised over units
        prev = cases[:, t - 1] if t >= 1 else 0
        prev2 = cases[:, t - 2] if t >= 2 else 0
        x = (prev + 0.4 * prev2) / pool
        lam = _BETA * season[t] * (x + eps @ x)
        c = rng.binomial(s.astype(np.int64), 1 - np.exp(-lam))
        now = seed_at.loc[seed_at["t"] == t, "pos"].to_numpy()
        np.add.at(c, now, 5)
        cases[:, t] = c
        s = np.maximum(s - c + _WANE * (pool - s), 0)
    deaths = rng.binomial(cases, _CFR)
    return weeks, cases, deaths


def _config(world_name: str, seed: int, reach_km: float) -> str:
    """The scenario's TOML; every key is documented in demo_data/scenario.toml."""
    out = [
        "# Synthetic benchmark world (benchmarks/world.py); invented, for speed and memory runs.",
        "# Keys as documented in demo_data/scenario.toml.",
        "[region]",
        f'name = "{world_name}"',
        'calendar = "iso"',
        f"seed = {seed}",
        "as_of_lag_days = 3",
    ]
    for c, (suffix, _crs, cols2, cols1) in FILES.items():
        for level, cols in ((1, cols1), (2, cols2)):
            out += [
                "",
                "[[boundaries]]",
                f'path = "boundaries/{c.lower()}_adm{level}{suffix}"',
                f'id = "{cols[0]}"',
                f'name = "{cols[1]}"',
                f'country = "{c}"',
                f"level = {level}",
            ]
            out += [f'parent = "{cols[2]}"'] if level == 2 else [f'country_name = "{c}"']
    out += ["", "[population]", 'raster = "population.tif"']
    for c in COUNTRIES:
        out += [
            "",
            "[[reports]]",
            f'name = "{c.lower()}-weekly"',
            f'path = "reports/{c.lower()}_weekly_*.csv"',
            f'country = "{c}"',
            'shape = "weekly"',
            "level = 2",
            'zeros = "explicit"',
            'calendar = "iso"',
            'week_format = "date"',
            "[reports.columns]",
            'place = "district"',
            'code = "district_code"',
            'week = "week_start"',
            'cases = "cases"',
            'deaths = "deaths"',
            'received = "received"',
        ]
    out += [
        "",
        "[graph]",
        "tolerance_m = 300",
        "min_shared_m = 500",
        'weighting = "shared"',
        "",
        "[analysis]",
        "permutations = 999",
        "fdr = 0.05",
        "",
        "[supplies]",
        'items = "supply_items.csv"',
        'depots = "depots.csv"',
        "k = 3",
        f"reach_km = {reach_km:.0f}",
        "",
        "[output]",
        'dir = "out"',
        "",
    ]
    return "\n".join(out)


def generate(n: int, out: str | Path, *, seed: int = 1) -> dict:
    """Write an ``n``-district world as a scenario under ``out``; return a summary.

    Parameters
    ----------
    n : int
        Districts wanted.
    out : str or pathlib.Path
        Folder for ``scenario.toml``, ``boundaries/``, ``population.tif``, ``reports/``,
        ``depots.csv``, ``supply_items.csv`` and ``truth/`` (dirt planted, true incidence).
    seed : int
        Seed of the one random stream.

    Returns
    -------
    dict
        Districts per country, provinces, affected districts, planted dirt, stage times (s).
    """
    out = Path(out)
    rng = np.random.default_rng(seed)
    times: dict[str, float] = {}
    t0 = start = time.perf_counter()
    world = build_world(n, rng)
    t0 = _timed(times, "geometry", t0)
    values, transform, towns, totals = build_population(world, rng)
    t0 = _timed(times, "population", t0)
    weeks, cases, deaths = simulate(world, totals, rng)
    t0 = _timed(times, "outbreak", t0)
    for sub in ("boundaries", "reports", "truth"):
        shutil.rmtree(out / sub, ignore_errors=True)
        (out / sub).mkdir(parents=True)
    write_boundaries(world, country_copies(world, rng), out / "boundaries")
    t0 = _timed(times, "boundaries", t0)
    write_grid(
        values, out / "population.tif", "people per cell, synthetic benchmark world", transform
    )
    t0 = _timed(times, "raster", t0)
    d = world.districts.assign(population=totals, island=False)
    sc = SimpleNamespace(
        districts=d,
        outbreak=SimpleNamespace(weeks=weeks, cases=cases, deaths=deaths),
        population=SimpleNamespace(towns=towns),
    )
    rep_cases, rep_deaths = reported_counts(sc, rng)
    dirt: list[dict] = []
    for c in COUNTRIES:
        write_tvr(sc, rep_cases, rep_deaths, out / "reports", rng, dirt, country=c)
    t0 = _timed(times, "reports", t0)
    _depots(sc).to_csv(out / "depots.csv", index=False, lineterminator="\n")
    shutil.copy(scenario_path().parent / "supply_items.csv", out / "supply_items.csv")
    pd.DataFrame(dirt, columns=DIRT_COLUMNS).to_csv(out / "truth" / "dirt.csv", index=False)
    first = np.where((cases > 0).any(axis=1), (cases > 0).argmax(axis=1), -1)
    pd.DataFrame(
        {
            "unit_id": d.index,
            "population": np.round(totals).astype(int),
            "cases": cases.sum(axis=1),
            "first_week": np.where(first >= 0, weeks[np.maximum(first, 0)].strftime("%F"), ""),
        }
    ).to_csv(out / "truth" / "districts.csv", index=False)
    side_km = np.sqrt(world.land.area) / 1e3
    (out / "scenario.toml").write_text(
        _config(f"Synthetic world, {len(d)} districts", seed, max(60.0, side_km / 5)),
        encoding="utf-8",
    )
    _timed(times, "tables", t0)
    times["total"] = round(time.perf_counter() - start, 2)
    summary = {
        "districts": len(d),
        "districts_per_country": d["country"].value_counts().sort_index().to_dict(),
        "provinces": len(world.provinces),
        "side_km": round(side_km),
        "affected": int((first >= 0).sum()),
        "true_cases": int(cases.sum()),
        "dirt": len(dirt),
        "times_s": times,
    }
    (out / "truth" / "summary.json").write_text(json.dumps(summary, indent=1), encoding="utf-8")
    return summary


def main() -> None:
    """Command line: ``python benchmarks/world.py --units N --out DIR [--seed S]``."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--units", type=int, default=1000, help="number of districts")
    ap.add_argument("--out", required=True, help="folder to write the scenario into")
    ap.add_argument("--seed", type=int, default=1, help="seed of the random stream")
    a = ap.parse_args()
    summary = generate(a.units, a.out, seed=a.seed)
    print(json.dumps(summary, indent=1))
    print(f"run it: marchland run {Path(a.out) / 'scenario.toml'} --month {MONTH}")


if __name__ == "__main__":
    main()
