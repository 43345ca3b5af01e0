"""Array work behind :func:`~marchland.supplies.choose_depots`: distances and the covering model.

Plain numpy in, plain numpy out (``site_distances`` reads the site and unit geometries
first); the public layer in :mod:`marchland.supplies.plan` checks inputs and builds the tables.
"""

from __future__ import annotations

import warnings
from typing import TYPE_CHECKING

import numpy as np
import pulp
from scipy import sparse
from scipy.sparse import csgraph
from scipy.spatial.distance import cdist
from spopt.locate import MCLP

from ..errors import InputError
from ..graph.border import as_border_graph

if TYPE_CHECKING:
    import geopandas as gpd
    import pandas as pd
    from libpysal.graph import Graph

    from ..graph.border import BorderGraph

DISTANCES = ("straight", "graph")


def distance_km(client_xy: np.ndarray, site_xy: np.ndarray) -> np.ndarray:
    """Straight-line distances in km (clients x sites) from coordinates in metres."""
    if len(client_xy) == 0 or len(site_xy) == 0:
        return np.zeros((len(client_xy), len(site_xy)))
    return cdist(client_xy, site_xy) / 1000.0


def solve_mclp(
    dist_km: np.ndarray, weights: np.ndarray, reach_km: float, n_open: int, fixed: np.ndarray
) -> np.ndarray:
    """Open ``n_open`` sites (the ``fixed`` ones among them) maximising the covered weight.

    Returns a boolean mask over sites. spopt builds the model (Church & ReVelle 1974) and its
    bundled CBC solves it; a client counts as covered at ``distance <= reach_km``, spopt's own
    rule, which :func:`assign` repeats.
    """
    n_sites = dist_km.shape[1]
    if n_open >= n_sites:
        return np.ones(n_sites, dtype=bool)
    if dist_km.shape[0] == 0:
        # No clients: nothing to cover, keep the fixed sites and fill up in table order.
        mask = fixed.astype(bool).copy()
        mask[np.flatnonzero(~mask)[: n_open - int(mask.sum())]] = True
        return mask
    # spopt 0.7 builds variables the way PuLP 3.3 deprecates, and PULP_CBC_CMD (the bundled
    # CBC) is itself flagged for PuLP 4; neither is the user's to act on, so keep them quiet.
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", category=DeprecationWarning, module=r"pulp(\.|$)")
        model = MCLP.from_cost_matrix(
            dist_km,
            weights.astype(float),
            service_radius=reach_km,
            p_facilities=n_open,
            predefined_facilities_arr=fixed.astype(int) if fixed.any() else None,
        )
        model = model.solve(pulp.PULP_CBC_CMD(msg=False), results=False)
    return np.array([(v.value() or 0) > 0.5 for v in model.fac_vars], dtype=bool)


def assign(
    dist_km: np.ndarray, open_mask: np.ndarray, reach_km: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Nearest open site per client: (site position or -1, distance km or NaN, covered)."""
    n_clients = dist_km.shape[0]
    if n_clients == 0 or not open_mask.any():
        return (
            np.full(n_clients, -1),
            np.full(n_clients, np.nan),
            np.zeros(n_clients, dtype=bool),
        )
    open_pos = np.flatnonzero(open_mask)
    sub = dist_km[:, open_pos]
    best = sub.argmin(axis=1)
    dist = sub[np.arange(n_clients), best]
    return open_pos[best], dist, dist <= reach_km


def graph_distance_km(
    site_xy: np.ndarray,
    host: np.ndarray,
    node_xy: np.ndarray,
    focal: np.ndarray,
    neighbor: np.ndarray,
    target: np.ndarray,
) -> np.ndarray:
    """Distances in km (targets x sites) along the unit graph, through district centres.

    A site reaches its host unit's centre in a straight line, then moves from centre to centre
    along graph edges (each as long as the straight line between the two centres). Every leg is
    a straight segment, so the result is never shorter than the straight-line distance; units
    the graph does not connect to the host are infinitely far.
    """
    n = len(node_xy)
    if len(site_xy) == 0 or len(target) == 0:
        return np.zeros((len(target), len(site_xy)))
    length = np.hypot(*(node_xy[focal] - node_xy[neighbor]).T) / 1000.0
    # csgraph reads a stored zero as "no edge"; two units sharing a centre are a hair apart.
    length = np.maximum(length, 1e-9)
    matrix = sparse.csr_matrix((length, (focal, neighbor)), shape=(n, n))
    hosts, which = np.unique(host, return_inverse=True)
    along = csgraph.dijkstra(matrix, directed=False, indices=hosts)  # hosts x nodes
    lead = np.hypot(*(site_xy - node_xy[host]).T) / 1000.0  # site -> its host's centre
    return (along[which][:, target] + lead[:, None]).T


def xy(points: gpd.GeoSeries) -> np.ndarray:
    """Point coordinates as an (n, 2) array."""
    return np.column_stack([points.x.to_numpy(), points.y.to_numpy()])


def site_distances(
    ids: pd.Index,
    centres: gpd.GeoSeries,
    region: gpd.GeoSeries,
    sites: gpd.GeoDataFrame,
    distance: str,
    graph: BorderGraph | Graph | None,
) -> np.ndarray:
    """Km from every site to every candidate centre (candidates x sites)."""
    if distance not in DISTANCES:
        raise InputError(
            f"'distance' needs to be one of {DISTANCES}; {distance!r} was given instead",
            column="distance",
            value=distance,
        )
    if distance == "straight":
        return distance_km(xy(centres), xy(sites.geometry))
    if graph is None:
        raise InputError('distance="graph" needs the unit graph (graph=)', column="distance")
    edges = as_border_graph(graph).edges
    focal = region.index.get_indexer(edges["focal"])
    neighbor = region.index.get_indexer(edges["neighbor"])
    if (focal < 0).any() or (neighbor < 0).any():
        raise InputError(
            "the graph names units that are not in the units table; pass units= (all units)",
            column="unit_id",
        )
    nodes = region.centroid
    # The unit a site lies in, or the nearest one for a site just outside the region.
    found = region.sindex.nearest(sites.geometry.to_numpy(), return_all=False)
    host = np.empty(len(sites), dtype=int)
    host[found[0]] = found[1]
    return graph_distance_km(
        xy(sites.geometry), host, xy(nodes), focal, neighbor, region.index.get_indexer(ids)
    )
