"""Depot sites: reading them, choosing new ones, assigning units, drawing their reach.

New sites are chosen by maximal covering location (spopt, in ``_covering``).
"""

from __future__ import annotations

import os
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
from libpysal.graph import Graph

from ..errors import InputError
from ..graph.border import BorderGraph
from . import _covering
from ._input import (
    _candidate_points,
    _check_inside,
    _check_k,
    _check_metric,
    _check_reach,
    _depots_from_frame,
    _file_name,
    _read_csv,
    _sites,
    _weights,
)


# --- depots ------------------------------------------------------------------------------
def read_depots(path: str | os.PathLike[str], crs: Any) -> gpd.GeoDataFrame:
    r"""Read candidate depot sites (CSV, WGS84 longitude/latitude) into the working CRS.

    Parameters
    ----------
    path : path-like
        CSV with columns ``site, name, lon, lat`` and optionally ``existing`` (true/false,
        yes/no, 1/0; empty = false). Lines starting with ``#`` are comments.
    crs : pyproj CRS or anything geopandas accepts
        The working CRS (e.g. ``units.crs``).

    Returns
    -------
    geopandas.GeoDataFrame
        Indexed by ``site``, columns ``name lon lat existing source row geometry`` (points in
        ``crs``); ``row`` is the data row in the file, from 1.

    Raises
    ------
    InputError
        Missing columns, an empty or repeated site id, a longitude/latitude that is not a
        number in range, an ``existing`` value that is not a yes/no.

    Examples
    --------
    >>> import io
    >>> text = "site,name,lon,lat,existing\nD1,Harbour store,10.0,50.0,yes\n"
    >>> read_depots(io.StringIO(text), "EPSG:3035")[["name", "existing"]]
                   name  existing
    site
    D1    Harbour store      True
    """
    name = _file_name(path)
    frame = _read_csv(path, name, "depot sites", comment="#")
    return _depots_from_frame(frame, crs, file=name)


def choose_depots(
    candidates: pd.DataFrame,
    sites: pd.DataFrame,
    *,
    k: int,
    reach_km: float,
    units: gpd.GeoDataFrame | None = None,
    weight: str | None = None,
    distance: str = "straight",
    graph: BorderGraph | Graph | None = None,
) -> gpd.GeoDataFrame:
    """Choose ``k`` depots to open, besides the existing ones, to cover the most risk.

    The maximal covering location problem (Church & ReVelle 1974), built by spopt and solved by
    its bundled CBC: open the existing sites plus ``k`` more so that the total weight of
    candidate districts whose centre lies within ``reach_km`` of an open depot is largest. A
    district weighs probability x population (0 without either). Distance is the straight
    line from the site to the district's centroid in the working equal-area CRS, or, with
    ``distance="graph"``, the way through the unit graph: straight to the centre of the unit
    the site lies in (or nearest to), then from centre to centre along graph edges, so a lake
    or a closed stretch of border without a link is gone around. Neither is road travel time.

    Parameters
    ----------
    candidates : pandas.DataFrame
        Candidate districts indexed by ``unit_id`` with ``probability`` and ``population``
        (e.g. :func:`prioritise` output); a GeoDataFrame, or give ``units`` for the geometry.
    sites : pandas.DataFrame or geopandas.GeoDataFrame
        Depot sites indexed by ``site`` (as :func:`read_depots` gives), with ``name`` and
        optionally ``existing``; a plain DataFrame needs ``site name lon lat`` (WGS84).
    k : int
        Number of new depots to open, 0 <= k <= number of sites not already open. With k = 0
        nothing is chosen: only the existing depots and their coverage are reported.
    reach_km : float
        A district is covered if its centre is at most this far from an open depot.
    units : geopandas.GeoDataFrame, optional
        The analysis units (working CRS): candidate geometry, and the region sites must serve.
    weight : str, optional
        A column of ``candidates`` to use as the weight instead of probability x population.
    distance : {"straight", "graph"}
        How distance is measured (see above).
    graph : BorderGraph or libpysal.graph.Graph, optional
        The unit graph, needed for ``distance="graph"``; its units must be in ``units``.

    Returns
    -------
    geopandas.GeoDataFrame
        One row per open depot (existing or new), indexed by ``site``, sorted by covered weight:
        ``name existing new lon lat x y reach_km distance covered_units covered_population
        covered_weight geometry`` (points, working CRS). Each covered district counts once, at
        its nearest open depot, so ``covered_weight`` sums to the covered total. What stays
        uncovered, and each district's depot, comes from :func:`assign_depots`.

    Raises
    ------
    InputError
        k negative, not whole, or larger than the sites not already open; reach not > 0; a
        site more than ``reach_km`` outside the region (the union of ``units``, or of the
        candidates without ``units``: such a site could serve nobody; a site just outside the
        border but within reach is allowed); a CRS that is not projected in metres.

    References
    ----------
    Church, R. and ReVelle, C. (1974). The maximal covering location problem. Papers of the
    Regional Science Association 32, 101-118.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> units = gpd.GeoDataFrame(
    ...     {"probability": [0.5, 0.2, 0.9], "population": [1000, 4000, 1000]},
    ...     geometry=[box(0, 0, 10_000, 10_000), box(50_000, 0, 60_000, 10_000),
    ...               box(100_000, 0, 110_000, 10_000)],
    ...     index=pd.Index(["A", "B", "C"], name="unit_id"), crs="EPSG:3035")
    >>> sites = gpd.GeoDataFrame({"name": ["west", "east"], "existing": [False, False]},
    ...     geometry=gpd.points_from_xy([5_000, 105_000], [5_000, 5_000]),
    ...     index=pd.Index(["S1", "S2"], name="site"), crs="EPSG:3035")
    >>> choose_depots(units, sites, k=1, reach_km=60)[["covered_units", "covered_weight"]]
          covered_units  covered_weight
    site
    S2                2          1700.0
    """
    reach = _check_reach(reach_km)
    centres, region = _candidate_points(candidates, units)
    site_table = _sites(sites, region.crs)
    n_existing = int(site_table["existing"].sum())
    k = _check_k(k, len(site_table) - n_existing)
    _check_inside(site_table, region, reach)
    w = _weights(candidates, weight)
    dist = _covering.site_distances(candidates.index, centres, region, site_table, distance, graph)
    xy_s = _covering.xy(site_table.geometry)
    fixed = site_table["existing"].to_numpy(dtype=bool)
    # k = 0: nothing to choose, the existing depots stay as they are.
    open_mask = fixed if k == 0 else _covering.solve_mclp(dist, w, reach, n_existing + k, fixed)
    pos, _, covered = _covering.assign(dist, open_mask, reach)
    pop = pd.to_numeric(
        candidates.get("population", pd.Series(np.nan, candidates.index)), errors="coerce"
    ).to_numpy(dtype=float)
    n_sites = len(site_table)
    hit = pos[covered]
    out = site_table.loc[open_mask, ["name", "existing"]].copy()
    out["new"] = ~out["existing"]
    wgs = site_table.geometry.to_crs("EPSG:4326")
    out["lon"] = wgs.x[open_mask].to_numpy()
    out["lat"] = wgs.y[open_mask].to_numpy()
    out["x"] = xy_s[open_mask, 0]
    out["y"] = xy_s[open_mask, 1]
    out["reach_km"] = reach
    out["distance"] = distance
    out["covered_units"] = np.bincount(hit, minlength=n_sites)[open_mask]
    out["covered_population"] = np.bincount(
        hit, weights=np.nan_to_num(pop[covered]), minlength=n_sites
    )[open_mask]
    out["covered_weight"] = np.bincount(hit, weights=w[covered], minlength=n_sites)[open_mask]
    out = gpd.GeoDataFrame(out, geometry=site_table.geometry[open_mask], crs=site_table.crs)
    return out.sort_values("covered_weight", ascending=False, kind="stable")


def assign_depots(
    candidates: pd.DataFrame,
    depots: gpd.GeoDataFrame,
    *,
    units: gpd.GeoDataFrame | None = None,
    reach_km: float | None = None,
    weight: str | None = None,
    distance: str | None = None,
    graph: BorderGraph | Graph | None = None,
) -> pd.DataFrame:
    """Give each candidate district its nearest open depot and say whether it is in reach.

    Parameters
    ----------
    candidates : pandas.DataFrame
        As for :func:`choose_depots`.
    depots : geopandas.GeoDataFrame
        Open depots: :func:`choose_depots` output (or any site table, e.g. the existing
        depots of :func:`read_depots`).
    units : geopandas.GeoDataFrame, optional
        Candidate geometry, as for :func:`choose_depots`.
    reach_km : float, optional
        Defaults to the ``reach_km`` column of ``depots``.
    weight : str, optional
        As for :func:`choose_depots`.
    distance : {"straight", "graph"}, optional
        Defaults to the ``distance`` column of ``depots``, else ``"straight"``.
    graph : BorderGraph or libpysal.graph.Graph, optional
        As for :func:`choose_depots`.

    Returns
    -------
    pandas.DataFrame
        Indexed by ``unit_id`` in the candidates' order: ``depot`` (site id; missing if no
        depot is open), ``depot_name``, ``distance_km`` (to the nearest open depot, reach or
        not), ``covered`` (distance <= reach), ``weight``. The uncovered districts are
        ``result[~result["covered"]]``; ``totals(..., by=result["depot"])`` sums per catchment.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> units = gpd.GeoDataFrame(
    ...     {"probability": [0.5, 0.2, 0.9], "population": [1000, 4000, 1000]},
    ...     geometry=[box(0, 0, 10_000, 10_000), box(50_000, 0, 60_000, 10_000),
    ...               box(100_000, 0, 110_000, 10_000)],
    ...     index=pd.Index(["A", "B", "C"], name="unit_id"), crs="EPSG:3035")
    >>> sites = gpd.GeoDataFrame({"name": ["west", "east"], "existing": [False, False]},
    ...     geometry=gpd.points_from_xy([5_000, 105_000], [5_000, 5_000]),
    ...     index=pd.Index(["S1", "S2"], name="site"), crs="EPSG:3035")
    >>> depots = choose_depots(units, sites, k=1, reach_km=60)
    >>> assign_depots(units, depots)[["depot", "distance_km", "covered"]]
            depot  distance_km  covered
    unit_id
    A          S2        100.0    False
    B          S2         50.0     True
    C          S2          0.0     True
    """
    if reach_km is None:
        if "reach_km" not in depots.columns or len(depots) == 0:
            raise InputError("give reach_km= (the depots table has no reach_km column)")
        reach_km = float(depots["reach_km"].iloc[0])
    reach = _check_reach(reach_km)
    if distance is None:
        has_column = "distance" in depots.columns and len(depots)
        distance = str(depots["distance"].iloc[0]) if has_column else "straight"
    centres, region = _candidate_points(candidates, units)
    table = _sites(depots, region.crs)
    w = _weights(candidates, weight)
    dist = _covering.site_distances(candidates.index, centres, region, table, distance, graph)
    pos, nearest, covered = _covering.assign(dist, np.ones(len(table), dtype=bool), reach)
    site_ids = np.asarray(table.index, dtype=object)
    names = np.asarray(table["name"], dtype=object)
    has = pos >= 0
    depot = np.where(has, site_ids[np.maximum(pos, 0)] if len(table) else None, None)
    depot_name = np.where(has, names[np.maximum(pos, 0)] if len(table) else None, None)
    return pd.DataFrame(
        {
            "depot": pd.array(depot, dtype="str"),
            "depot_name": pd.array(depot_name, dtype="str"),
            "distance_km": nearest,
            "covered": covered,
            "weight": w,
        },
        index=pd.Index(candidates.index, name="unit_id"),
    )


def reach_areas(depots: gpd.GeoDataFrame, *, resolution: int = 32) -> gpd.GeoDataFrame:
    """Circles of each depot's reach, for maps.

    Parameters
    ----------
    depots : geopandas.GeoDataFrame
        :func:`choose_depots` output (needs ``reach_km`` and point geometry in metres).
    resolution : int
        Segments per quarter circle (shapely's ``quad_segs``).

    Returns
    -------
    geopandas.GeoDataFrame
        Indexed by ``site``: ``name existing new reach_km geometry`` (circle polygons). With
        ``distance = "graph"`` the circle is an outer bound: the way along the graph is never
        shorter than the straight line, so every covered centre lies inside it.

    Examples
    --------
    >>> sites = gpd.GeoDataFrame({"name": ["west"], "existing": [True], "reach_km": [50.0]},
    ...     geometry=gpd.points_from_xy([0.0], [0.0]), crs="EPSG:3035",
    ...     index=pd.Index(["S1"], name="site"))
    >>> round(reach_areas(sites).area.iloc[0] / 1e6)  # km2, close to pi x 50^2 = 7854
    7851
    """
    _check_metric(depots.crs, "the depots")
    if "reach_km" not in depots.columns:
        raise InputError("the depots table needs a 'reach_km' column", column="reach_km")
    keep = [c for c in ("name", "existing", "new", "reach_km") if c in depots.columns]
    circles = depots.geometry.buffer(depots["reach_km"].to_numpy(float) * 1000.0, resolution)
    return gpd.GeoDataFrame(depots[keep].copy(), geometry=circles, crs=depots.crs)
