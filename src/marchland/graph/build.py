"""Building the graph from geometry (``border_graph``) and drawing it (``edges_layer``)."""

from __future__ import annotations

import os

import numpy as np
import pandas as pd
import shapely
from libpysal.graph import Graph

from ..errors import InputError
from ._contiguity import build_border_graph
from .border import BorderGraph, as_border_graph


def border_graph(
    units,
    *,
    tolerance: float = 0.0,
    links: pd.DataFrame | str | os.PathLike | None = None,
    rule: str = "queen",
    min_shared_m: float | None = None,
    strict: bool = False,
    parents: pd.Series | None = None,
) -> BorderGraph:
    """Build the cross-border contiguity graph of analysis units.

    Within one boundary file (column ``source``) units are neighbours by exact contiguity
    (the pairs of libpysal ``Graph.build_contiguity``, found by a vectorised join on the
    vertex coordinates). Units of different files or different countries are
    neighbours when their boundaries truly share a line (up to 1 cm of reprojection roundoff),
    or come within ``tolerance`` metres along a positive length of at least ``min_shared_m``
    metres (the corner rule, stated in :mod:`marchland.graph._contiguity`). Pairs within the
    tolerance that the rule leaves out are listed in ``.left_out`` for a person to confirm.
    Rows of ``links`` add further neighbours (ferries, bridges, road crossings).

    Parameters
    ----------
    units : geopandas.GeoDataFrame
        Analysis units indexed by unit id with columns ``country``, ``geometry`` and
        ``source`` (the boundary file; without it each country counts as one file), in a
        projected CRS in metres. Units of mixed level are fine.
    tolerance : float
        Largest gap, in metres, bridged between units of different files or countries.
    links : pandas.DataFrame or path of a CSV file, optional
        Columns ``from_id``, ``to_id`` and optionally ``kind`` (e.g. "ferry") and ``name``.
        An unknown id is an :class:`~marchland.errors.InputError` naming the row.
    rule : {"queen", "rook"}
        Within a file, whether a single shared point makes neighbours (queen) or a shared
        edge is needed (rook).
    min_shared_m : float, optional
        Near-shared boundary length a gap-bridged pair needs (default 0: any positive length).
        Never applies to pairs that truly share a line: they are always neighbours.
    strict : bool
        Use libpysal's geometric (slower) contiguity within files, for files whose
        neighbouring polygons do not share vertices.
    parents : pandas.Series, optional
        Parent id per unit id (e.g. ``read_units(...)["parent_id"]``): a link naming a district
        of a country analysed at province level is moved up to its province. A link whose two
        ends fall in one analysis unit then adds nothing (with a ``DataWarning``).

    Returns
    -------
    BorderGraph
        ``.edges`` has ``focal neighbor shared_m gap_m cross_border kind`` and ``link_kind``,
        ``link_name`` (the link table's own kind and name, ``<NA>`` for boundary edges).
        ``.left_out`` lists the pairs within the tolerance that were not joined.

    References
    ----------
    Anselin, L. (1988). *Spatial Econometrics: Methods and Models*. Kluwer (contiguity
    weights, queen and rook).

    Examples
    --------
    Two files, one per country, with a 100 m gap along the border:

    >>> import geopandas as gpd, pandas as pd, shapely
    >>> units = gpd.GeoDataFrame(
    ...     {"country": ["AAA", "AAA", "BBB", "BBB"], "source": ["a", "a", "b", "b"]},
    ...     geometry=[shapely.box(0, 0, 5000, 5000), shapely.box(0, 5000, 5000, 10000),
    ...               shapely.box(5100, 0, 9000, 5000), shapely.box(5100, 5000, 9000, 10000)],
    ...     index=pd.Index(["A1", "A2", "B1", "B2"], name="unit_id"), crs="EPSG:3035")
    >>> bg = border_graph(units, tolerance=300)
    >>> bg.edges[["focal", "neighbor", "gap_m", "kind"]].head(4)
      focal neighbor  gap_m             kind
    0    A1       A2    0.0  shared-boundary
    1    A1       B1  100.0      gap-bridged
    2    A2       A1    0.0  shared-boundary
    3    A2       B2  100.0      gap-bridged

    A1 and B2 come within 100 m only at a corner, so they are not joined but listed:

    >>> ("A1", "B2") in set(zip(bg.edges["focal"], bg.edges["neighbor"]))
    False
    >>> bg.left_out[["unit_a", "unit_b", "gap_m", "reason"]]
      unit_a unit_b  gap_m  reason
    0     A1     B2  100.0  corner
    1     A2     B1  100.0  corner
    """
    return build_border_graph(
        units,
        tolerance=tolerance,
        links=links,
        rule=rule,
        min_shared_m=min_shared_m,
        strict=strict,
        parents=parents,
    )


def edges_layer(graph: BorderGraph | Graph, units) -> pd.DataFrame:
    """Edges as centroid-to-centroid lines, one per unordered pair, for a GeoPackage layer.

    Parameters
    ----------
    graph : BorderGraph or libpysal.graph.Graph
        The graph.
    units : geopandas.GeoDataFrame
        Indexed by unit id and covering every unit of the graph; the layer keeps its CRS.

    Returns
    -------
    geopandas.GeoDataFrame
        The columns of ``graph.edges`` for the rows with ``focal`` before ``neighbor`` in the
        graph's order, and LineString geometry from the focal to the neighbour centroid.

    Examples
    --------
    >>> import geopandas as gpd, pandas as pd, shapely
    >>> units = gpd.GeoDataFrame({"country": ["AAA", "BBB"]},
    ...     geometry=[shapely.box(0, 0, 10, 10), shapely.box(10, 0, 20, 10)],
    ...     index=pd.Index(["a", "b"], name="unit_id"), crs="EPSG:3035")
    >>> layer = edges_layer(border_graph(units), units)
    >>> layer[["focal", "neighbor", "cross_border"]].values.tolist(), layer.length.tolist()
    ([['a', 'b', True]], [10.0])
    """
    import geopandas as gpd

    bg = as_border_graph(graph)
    missing = ~bg.ids.isin(units.index)
    if missing.any():
        raise InputError(
            "units do not cover every unit of the graph",
            column="unit_id",
            value=bg.ids[missing][0],
        )
    fi, ni = bg._positions
    first = fi < ni
    e = bg.edges[first].reset_index(drop=True)
    xy = shapely.get_coordinates(shapely.centroid(units.geometry.reindex(bg.ids).to_numpy()))
    lines = shapely.linestrings(np.stack([xy[fi[first]], xy[ni[first]]], axis=1))
    return gpd.GeoDataFrame(e, geometry=lines, crs=units.crs)
