"""The population raster: sparse countryside, a denser river corridor and lake shore, towns."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
import pyproj
import rasterio
import shapely
from rasterio.features import rasterize
from rasterio.transform import Affine
from scipy.ndimage import binary_dilation, distance_transform_edt

from ._world import GEN_CRS, World

CELL_DEG = 0.01  # about 1.1 km
WEST, NORTH, NCOL, NROW = -22.0, -13.0, 600, 500
NODATA = -9999.0
_TRANSFORM = Affine(CELL_DEG, 0.0, WEST, 0.0, -CELL_DEG, NORTH)  # north-up grid
POP_MIN, POP_MAX = 8_000, 800_000  # kept inside the 5,000-900,000 range with a margin


@dataclass(frozen=True)
class Population:
    """The raster grid, its values, and district totals."""

    values: np.ndarray  # float32 (NROW, NCOL), NODATA outside land, 0 on the lake
    labels: np.ndarray  # int (NROW, NCOL): district position in world.districts, -1 elsewhere
    totals: pd.Series  # people per district (cell-centre sums), index unit_id
    towns: pd.DataFrame  # unit_id name x y population (GEN_CRS metres)


def _grid_xy():
    lon = WEST + CELL_DEG * (np.arange(NCOL) + 0.5)
    lat = NORTH - CELL_DEG * (np.arange(NROW) + 0.5)
    glon, glat = np.meshgrid(lon, lat)
    tr = pyproj.Transformer.from_crs("EPSG:4326", GEN_CRS, always_xy=True)
    x, y = tr.transform(glon, glat)
    area_km2 = (CELL_DEG * 111.32 * np.cos(np.radians(glat))) * (CELL_DEG * 110.57)
    return x, y, area_km2


def _water(world: World, labels: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Lake cells, and each cell's distance (m) to the Senn and to the lake shore."""
    transform = _TRANSFORM
    to_ll = pyproj.Transformer.from_crs(GEN_CRS, "EPSG:4326", always_xy=True)
    lake_ll = shapely.transform(
        world.lake, lambda xy: np.column_stack(to_ll.transform(xy[:, 0], xy[:, 1]))
    )
    lake = rasterize(
        [(lake_ll, 1)], out_shape=(NROW, NCOL), transform=transform, fill=0, dtype="uint8"
    ).astype(bool) & (labels < 0)
    # Distances to the Senn and the lake shore by a Euclidean distance transform on the grid
    # (cell sizes in metres), much faster than exact point-to-line distances and as good here.
    sampling = (CELL_DEG * 110_570.0, CELL_DEG * 111_320.0 * np.cos(np.radians(-15.5)))
    river_ll, arm_ll, shore_ll = (
        shapely.transform(g, lambda xy: np.column_stack(to_ll.transform(xy[:, 0], xy[:, 1])))
        for g in (world.river, world.arm, world.lake.exterior)
    )
    on_river = rasterize(
        [river_ll, arm_ll],
        out_shape=(NROW, NCOL),
        transform=transform,
        all_touched=True,
        dtype="uint8",
    )
    on_shore = rasterize(
        [shore_ll], out_shape=(NROW, NCOL), transform=transform, all_touched=True, dtype="uint8"
    )
    d_river = distance_transform_edt(on_river == 0, sampling=sampling)
    d_lake = distance_transform_edt(on_shore == 0, sampling=sampling)
    return lake, d_river, d_lake


def build_population(world: World, rng: np.random.Generator) -> Population:
    """Simulate people per cell and their district totals.

    Parameters
    ----------
    world : World
    rng : numpy.random.Generator

    Returns
    -------
    Population
    """
    x, y, area = _grid_xy()
    transform = _TRANSFORM
    d = world.districts
    to_ll = pyproj.Transformer.from_crs(GEN_CRS, "EPSG:4326", always_xy=True)
    geoms_ll = shapely.transform(
        d.geometry.values, lambda xy: np.column_stack(to_ll.transform(xy[:, 0], xy[:, 1]))
    )
    labels = rasterize(
        ((g, i) for i, g in enumerate(geoms_ll)),
        out_shape=(NROW, NCOL),
        transform=transform,
        fill=-1,
        dtype="int32",
    )
    lake, d_river, d_lake = _water(world, labels)
    # Countryside: 4-40 people per km2 varying smoothly; more along the Senn and the lake.
    waves = sum(
        np.cos(x / rng.uniform(2e4, 8e4) + rng.uniform(0, 6.3))
        * np.cos(y / rng.uniform(2e4, 8e4) + rng.uniform(0, 6.3))
        for _ in range(4)
    )
    dens = 4 + 18 * (1 + waves / 4) ** 2
    dens += 70 * np.exp(-((d_river / 5_000) ** 2)) + 40 * np.exp(-((d_lake / 6_000) ** 2))
    # Towns: one per district, larger on the river; a handful of cities.
    rp = shapely.point_on_surface(d.geometry.values)
    tx, ty = shapely.get_x(rp), shapely.get_y(rp)
    tpop = rng.lognormal(np.log(9_000), 0.7, len(d))
    river_idx = np.flatnonzero(d["river"].values)
    cities = rng.choice(river_idx, size=min(10, len(river_idx)), replace=False)
    tpop[cities] = rng.uniform(60_000, 380_000, len(cities))
    tpop[d["island"].values] = 6_000.0
    people = dens * area
    col, row = ~transform @ to_ll.transform(tx, ty)
    for k in range(len(d)):  # generator only: one small window per town
        sigma = 1_800.0 if tpop[k] < 50_000 else 4_500.0
        r0, c0 = int(row[k]), int(col[k])
        h = int(4 * sigma / 1_000) + 2
        win = (slice(max(r0 - h, 0), r0 + h + 1), slice(max(c0 - h, 0), c0 + h + 1))
        r = (x[win] - tx[k]) ** 2 + (y[win] - ty[k]) ** 2
        w = np.exp(-r / (2 * sigma**2)) * (labels[win] == k)
        if w.sum() > 0:
            people[win] += tpop[k] * w / w.sum()
    people = np.where(labels >= 0, people, 0.0)
    # Keep every district inside the required range by rescaling its cells.
    tot = np.bincount(labels[labels >= 0], weights=people[labels >= 0], minlength=len(d))
    factor = np.clip(tot, POP_MIN, POP_MAX) / np.maximum(tot, 1e-9)
    people = np.where(labels >= 0, people * factor[np.maximum(labels, 0)], 0.0)
    values = np.where(labels >= 0, people, NODATA).astype("float32")
    # Water next to the land (the lake, a coastal strip) holds 0, not nodata, so districts
    # whose published outline runs a little past the true shore stay fully covered.
    near_land = binary_dilation(labels >= 0, iterations=3)
    values[(near_land | lake) & (labels < 0)] = 0.0
    tot = np.bincount(
        labels[labels >= 0], weights=values[labels >= 0].astype(float), minlength=len(d)
    )
    totals = pd.Series(np.round(tot).astype(int), index=d.index, name="population")
    towns = pd.DataFrame(
        {
            "unit_id": d.index,
            "name": d["name"].values,
            "x": tx,
            "y": ty,
            "population": np.round(tpop * factor).astype(int),
        }
    )
    return Population(values, labels, totals, towns)


def build_flood(world: World, labels: np.ndarray) -> np.ndarray:
    """Share of each cell flooded in the wet season: high along the Senn and the lake shore.

    Drawn from the geometry alone (no random numbers), so adding the layer leaves the seeded
    stream, and with it the outbreak, unchanged. It is one reason the simulation couples river
    districts more strongly: low ground along the Senn floods and mixes water sources.
    Water cells next to land take the nearest land cell's value (as the population raster
    holds 0 there), so a district outline running a little past the shore stays covered.
    """
    x, y, _ = _grid_xy()
    lake, d_river, d_lake = _water(world, labels)
    land = labels >= 0
    # Low ground: a gentle fixed swell, so the share is not a function of distance alone.
    low = 0.5 + 0.5 * np.cos(x / 47_000 + 1.3) * np.cos(y / 39_000 + 0.4)
    share = (
        0.02
        + 0.05 * low
        + 0.55 * np.exp(-((d_river / 2_500) ** 2))
        + 0.2 * np.exp(-((d_river / 9_000) ** 2))
        + 0.45 * np.exp(-((d_lake / 3_000) ** 2))
    )
    share = np.round(np.clip(share, 0.0, 1.0), 2)
    _, (ri, ci) = distance_transform_edt(~land, return_indices=True)
    nearest = share[ri, ci]
    near = (binary_dilation(land, iterations=3) | lake) & ~land
    out = np.full(share.shape, NODATA)
    out[land] = share[land]
    out[near] = nearest[near]
    return out.astype("float32")


def write_flood(values: np.ndarray, path: Path) -> None:
    """Write the flood-share grid beside the population raster (same grid and format)."""
    write_grid(values, path, "share of each cell flooded in the wet season, fictional scenario")


def write_raster(pop: Population, path: Path) -> None:
    """Write the raster as a deflate-compressed float32 GeoTIFF in EPSG:4326."""
    write_grid(pop.values, path, "people per cell, fictional Senn basin scenario")


def write_grid(
    values: np.ndarray, path: Path, description: str, transform: Affine = _TRANSFORM
) -> None:
    """Write a lon-lat grid as a deflate-compressed, tiled float32 GeoTIFF (EPSG:4326)."""
    path.parent.mkdir(parents=True, exist_ok=True)
    profile = dict(
        driver="GTiff",
        width=values.shape[1],
        height=values.shape[0],
        count=1,
        dtype="float32",
        crs="EPSG:4326",
        transform=transform,
        nodata=NODATA,
        compress="deflate",
        predictor=3,
        tiled=True,
        blockxsize=256,
        blockysize=256,
    )
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(values, 1)
        dst.update_tags(description=description)
