"""The cross-border contiguity graph over analysis units.

:class:`BorderGraph` is the one graph structure every statistic uses. It holds an edge table
(both directions of every pair) and the full list of unit ids, is checked once when made and
never changed afterwards; the libpysal ``Graph`` views and hop distances are derived from it.

``border_graph`` (geometry -> BorderGraph) is built in :mod:`marchland._contiguity`.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pandas as pd
from libpysal.graph import Graph
from scipy import sparse
from scipy.sparse import csgraph

EDGE_COLUMNS = ("focal", "neighbor", "shared_m", "gap_m", "cross_border", "kind")
EDGE_KINDS = ("shared-boundary", "gap-bridged", "link")
WEIGHTINGS = ("binary", "shared")


@dataclass(frozen=True, eq=False)
class BorderGraph:
    """Contiguity across borders between analysis units.

    Parameters
    ----------
    edges : pandas.DataFrame
        Columns ``focal``, ``neighbor``, ``shared_m``, ``gap_m``, ``cross_border``, ``kind``;
        one row per direction of each neighbouring pair (the table is symmetric).
    ids : pandas.Index
        Every analysis-unit id, islands included, in the order the graph uses.

    Notes
    -----
    Islands (units with no neighbour after links) are kept in ``ids`` and listed by
    ``islands``; in the libpysal views they carry a zero self-weight, libpysal's own convention,
    so statistics can see and skip them explicitly.
    """

    edges: pd.DataFrame
    ids: pd.Index

    def __post_init__(self) -> None:
        missing = [c for c in EDGE_COLUMNS if c not in self.edges.columns]
        if missing:
            raise ValueError(f"edges needs columns {list(EDGE_COLUMNS)}; missing {missing}")
        if not self.ids.is_unique:
            raise ValueError("ids must be unique")
        known = self.edges["focal"].isin(self.ids) & self.edges["neighbor"].isin(self.ids)
        if not known.all():
            raise ValueError("edges name units that are not in ids")
        if (self.edges["focal"] == self.edges["neighbor"]).any():
            raise ValueError("edges must not contain self-loops")
        bad_kind = set(self.edges["kind"]) - set(EDGE_KINDS)
        if bad_kind:
            raise ValueError(f"'kind' needs to be one of {EDGE_KINDS}; {sorted(bad_kind)} given")
        fwd = set(zip(self.edges["focal"], self.edges["neighbor"], strict=True))
        if fwd != {(b, a) for a, b in fwd}:
            raise ValueError("edges must list both directions of every pair")
        if len(fwd) != len(self.edges):
            raise ValueError("edges lists a pair twice")
        # Freeze a private copy: the caller's frame is never shared or changed.
        object.__setattr__(self, "edges", self.edges.loc[:, list(EDGE_COLUMNS)].copy())
        object.__setattr__(self, "ids", pd.Index(self.ids, name="unit_id"))

    # --- constructors -------------------------------------------------------------------
    @classmethod
    def from_graph(cls, graph: Graph, countries: pd.Series | None = None) -> BorderGraph:
        """Wrap a plain libpysal ``Graph`` (weights are ignored; adjacency is kept).

        ``countries`` (indexed by unit id) sets ``cross_border``; without it every edge is
        marked not cross-border. Edge lengths are unknown (NaN) and every edge is of kind
        "shared-boundary".

        Examples
        --------
        >>> from libpysal.graph import Graph
        >>> import pandas as pd
        >>> g = Graph.from_adjacency(pd.DataFrame(
        ...     {"focal": ["a", "b"], "neighbor": ["b", "a"], "weight": [1.0, 1.0]}))
        >>> bg = BorderGraph.from_graph(g, countries=pd.Series({"a": "X", "b": "Y"}))
        >>> bg.edges["cross_border"].tolist()
        [True, True]
        """
        adj = graph.adjacency.reset_index()
        adj = adj[adj["focal"] != adj["neighbor"]]
        edges = pd.DataFrame(
            {
                "focal": adj["focal"].to_numpy(),
                "neighbor": adj["neighbor"].to_numpy(),
                "shared_m": np.nan,
                "gap_m": 0.0,
                "cross_border": False,
                "kind": "shared-boundary",
            }
        )
        if countries is not None:
            edges["cross_border"] = (
                edges["focal"].map(countries).to_numpy()
                != edges["neighbor"].map(countries).to_numpy()
            )
        return cls(edges=edges, ids=pd.Index(graph.unique_ids))

    # --- derived views --------------------------------------------------------------------
    @cached_property
    def islands(self) -> list:
        """Units with no neighbour, links included."""
        linked = set(self.edges["focal"])
        return [i for i in self.ids if i not in linked]

    @cached_property
    def graph(self) -> Graph:
        """Binary libpysal ``Graph`` over ``ids`` (islands carry a zero self-weight)."""
        return self.weights("binary")

    def weights(self, weighting: str = "binary", *, row_standardise: bool = False) -> Graph:
        """A libpysal ``Graph`` with binary or shared-boundary-length weights.

        Parameters
        ----------
        weighting : {"binary", "shared"}
            "shared" weighs each neighbour by the metres of boundary it shares (links and
            edges of unknown length get the median shared length of the graph).
        row_standardise : bool
            Transform to row sums of one (libpysal's "r"), as the local Moran's I needs.
        """
        if weighting not in WEIGHTINGS:
            raise ValueError(
                f"'weighting' needs to be one of {WEIGHTINGS}. {weighting!r} was given instead."
            )
        e = self.edges
        if weighting == "binary":
            w = np.ones(len(e))
        else:
            w = e["shared_m"].to_numpy(dtype=float)
            fill = np.nanmedian(w) if np.isfinite(w).any() else 1.0
            w = np.where(np.isfinite(w) & (w > 0), w, fill)
        adj = pd.DataFrame({"focal": e["focal"], "neighbor": e["neighbor"], "weight": w})
        isl = pd.DataFrame({"focal": self.islands, "neighbor": self.islands, "weight": 0.0})
        adj = pd.concat([adj, isl], ignore_index=True)
        order = pd.Categorical(adj["focal"], categories=self.ids)
        adj = adj.iloc[np.argsort(order.codes, kind="stable")]
        g = Graph.from_adjacency(adj, focal_col="focal", neighbor_col="neighbor",
                                 weight_col="weight")
        return g.transform("r") if row_standardise else g

    @cached_property
    def _csr(self) -> sparse.csr_matrix:
        pos = pd.Series(np.arange(len(self.ids)), index=self.ids)
        i = pos.loc[self.edges["focal"]].to_numpy()
        j = pos.loc[self.edges["neighbor"]].to_numpy()
        n = len(self.ids)
        return sparse.csr_matrix((np.ones(len(i)), (i, j)), shape=(n, n))

    def hops_from(self, sources: Iterable) -> pd.Series:
        """Graph distance (number of steps) from the nearest of ``sources`` to every unit.

        Unreachable units get ``<NA>``. Sparse breadth-first search (scipy), no Python loop.

        Examples
        --------
        >>> import pandas as pd
        >>> e = pd.DataFrame({"focal": list("abbc"), "neighbor": list("bacb"),
        ...                   "shared_m": 1.0, "gap_m": 0.0, "cross_border": False,
        ...                   "kind": "shared-boundary"})
        >>> BorderGraph(e, pd.Index(list("abcd"))).hops_from(["a"]).tolist()
        [0, 1, 2, <NA>]
        """
        sources = list(sources)
        unknown = [s for s in sources if s not in self.ids]
        if unknown:
            raise KeyError(f"sources not in the graph: {unknown[:5]}")
        out = pd.Series(pd.NA, index=self.ids, dtype="Int64", name="hops")
        if not sources:
            return out
        idx = self.ids.get_indexer(sources)
        d = csgraph.shortest_path(self._csr, unweighted=True, indices=idx, directed=False)
        d = np.atleast_2d(d).min(axis=0)
        ok = np.isfinite(d)
        out.iloc[np.flatnonzero(ok)] = d[ok].astype(int)
        return out

    def higher_order(self, k: int, *, lower_order: bool = False) -> BorderGraph:
        """Neighbours at exactly ``k`` steps (or up to ``k`` with ``lower_order=True``).

        The new graph's edges are of kind "link" only if every step is a link; they carry no
        boundary length (NaN) and are cross-border when the two units' countries differ as
        judged by the first-order edges (a pair is cross-border if any shortest path crosses).
        """
        if k < 1:
            raise ValueError(f"'k' needs to be >= 1. {k!r} was given instead.")
        n = len(self.ids)
        d = csgraph.shortest_path(self._csr, unweighted=True, directed=False, limit=k)
        mask = (d >= 1) & (d <= k) if lower_order else d == k
        np.fill_diagonal(mask, False)
        i, j = np.nonzero(mask)
        edges = pd.DataFrame(
            {
                "focal": self.ids[i],
                "neighbor": self.ids[j],
                "shared_m": np.nan,
                "gap_m": np.nan,
                "cross_border": False,
                "kind": "shared-boundary",
            }
        )
        del n
        return BorderGraph(edges=edges, ids=self.ids)

    def subgraph(self, ids: Iterable) -> BorderGraph:
        """The graph restricted to ``ids`` (a new object)."""
        keep = pd.Index(list(ids))
        e = self.edges
        e = e[e["focal"].isin(keep) & e["neighbor"].isin(keep)]
        return BorderGraph(edges=e, ids=self.ids[self.ids.isin(keep)])


def as_border_graph(graph: BorderGraph | Graph, countries: pd.Series | None = None) -> BorderGraph:
    """Accept either graph kind; every statistic calls this first.

    Examples
    --------
    >>> import pandas as pd
    >>> from libpysal.graph import Graph
    >>> g = Graph.from_adjacency(pd.DataFrame(
    ...     {"focal": ["a", "b"], "neighbor": ["b", "a"], "weight": [1.0, 1.0]}))
    >>> as_border_graph(g).ids.tolist()
    ['a', 'b']
    """
    if isinstance(graph, BorderGraph):
        return graph
    if isinstance(graph, Graph):
        return BorderGraph.from_graph(graph, countries=countries)
    raise TypeError(
        "'graph' needs to be a marchland BorderGraph or a libpysal.graph.Graph. "
        f"{type(graph).__name__} was given instead."
    )


def border_graph(units, *, tolerance: float = 0.0, links=None, **options) -> BorderGraph:
    """Build the cross-border contiguity graph of analysis units (see ``_contiguity``)."""
    from ._contiguity import build_border_graph

    return build_border_graph(units, tolerance=tolerance, links=links, **options)
