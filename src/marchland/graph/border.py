"""The cross-border contiguity graph over analysis units.

:class:`BorderGraph` is the one graph structure every statistic uses. It holds an edge table
(both directions of every pair) and the full list of unit ids, is checked once when made and
never changed afterwards; the libpysal ``Graph`` views and hop distances are derived from it.

``border_graph`` (geometry -> BorderGraph) lives in :mod:`marchland.graph.build`; the geometry
work is in :mod:`marchland.graph._contiguity`, whose module docstring states the corner rule.
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
# Kinds from strongest to weakest evidence of contact; higher_order relies on this order.
EDGE_KINDS = ("shared-boundary", "gap-bridged", "link")
WEIGHTINGS = ("binary", "shared")
RULES = ("queen", "rook")
LEFT_OUT_COLUMNS = (
    "unit_a",
    "unit_b",
    "country_a",
    "country_b",
    "gap_m",
    "near_shared_m",
    "reason",
)


@dataclass(frozen=True, eq=False)
class BorderGraph:
    """Contiguity across borders between analysis units.

    Parameters
    ----------
    edges : pandas.DataFrame
        Columns ``focal``, ``neighbor``, ``shared_m``, ``gap_m``, ``cross_border``, ``kind``;
        one row per direction of each neighbouring pair (the table is symmetric). Further
        columns (``border_graph`` adds ``link_kind`` and ``link_name``) are kept after these.
    ids : pandas.Index
        Every analysis-unit id, islands included, in the order the graph uses.
    countries : pandas.Series, optional
        Country code per unit id; lets :meth:`higher_order` mark cross-border pairs exactly.
    left_out : pandas.DataFrame, optional
        Pairs of units of different files or countries that come within the gap tolerance but
        that the corner rule did not join (``border_graph`` fills it; ``LEFT_OUT_COLUMNS``):
        ``unit_a unit_b country_a country_b gap_m near_shared_m reason``, one row per pair,
        closest first. ``reason`` is "corner" (they come close only at a point) or "short"
        (near-shared length below ``min_shared_m``). A person who knows the pair really borders
        adds it to the links table.

    Notes
    -----
    Islands (units with no neighbour after links) are kept in ``ids`` and listed by
    ``islands``; in the libpysal views they carry a zero self-weight, libpysal's own convention,
    so statistics can see and skip them explicitly.
    """

    edges: pd.DataFrame
    ids: pd.Index
    countries: pd.Series | None = None
    left_out: pd.DataFrame | None = None

    def __post_init__(self) -> None:
        missing = [c for c in EDGE_COLUMNS if c not in self.edges.columns]
        if missing:
            raise ValueError(f"edges needs columns {list(EDGE_COLUMNS)}; missing {missing}")
        ids = pd.Index(self.ids, name="unit_id")
        if not ids.is_unique:
            raise ValueError("ids must be unique")
        e = self.edges
        fi = ids.get_indexer(e["focal"])
        ni = ids.get_indexer(e["neighbor"])
        if (fi < 0).any() or (ni < 0).any():
            raise ValueError("edges name units that are not in ids")
        if (fi == ni).any():
            raise ValueError("edges must not contain self-loops")
        bad_kind = set(pd.unique(e["kind"])) - set(EDGE_KINDS)
        if bad_kind:
            raise ValueError(f"'kind' needs to be one of {EDGE_KINDS}; {sorted(bad_kind)} given")
        n = np.int64(len(ids))
        key = np.sort(fi.astype(np.int64) * n + ni)
        if (key[1:] == key[:-1]).any():
            raise ValueError("edges lists a pair twice")
        if not np.array_equal(key, np.sort(ni.astype(np.int64) * n + fi)):
            raise ValueError("edges must list both directions of every pair")
        # Freeze a private copy with fixed dtypes: the caller's frame is never shared or changed.
        extra = [c for c in e.columns if c not in EDGE_COLUMNS]
        e = e.loc[:, [*EDGE_COLUMNS, *extra]].reset_index(drop=True)
        e = e.astype({"shared_m": float, "gap_m": float, "cross_border": bool, "kind": str})
        object.__setattr__(self, "edges", e)
        object.__setattr__(self, "ids", ids)
        if self.countries is not None:
            c = pd.Series(self.countries).reindex(ids).rename("country")
            object.__setattr__(self, "countries", c)
        left = self.left_out
        if left is None:
            left = pd.DataFrame({c: pd.Series(dtype=object) for c in LEFT_OUT_COLUMNS})
        missing = [c for c in LEFT_OUT_COLUMNS if c not in left.columns]
        if missing:
            raise ValueError(f"left_out needs columns {list(LEFT_OUT_COLUMNS)}; missing {missing}")
        object.__setattr__(self, "left_out", left.reset_index(drop=True).copy())
        object.__setattr__(self, "_weights_cache", {})

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
        return cls(edges=edges, ids=pd.Index(graph.unique_ids), countries=countries)

    # --- derived views --------------------------------------------------------------------
    @cached_property
    def islands(self) -> list:
        """Units with no neighbour, links included."""
        # By edge positions: pandas' isin on a string index loops in Python (0.35-0.6 s at
        # 10,000 units, half of a local Moran's I; benchmarks/bench_cores.py).
        has = np.bincount(self._positions[0], minlength=len(self.ids)) > 0
        return self.ids[~has].tolist()

    def short_joins(self, facing_below_m: float) -> pd.DataFrame:
        """Return the pairs joined across a gap that face each other along less than given.

        The gap-bridging rule joins pairs of different files that run alongside each other
        within the tolerance. Where a border ends at a country missing from the data, two
        units meeting only at that end can still face each other along a short stretch and be
        joined; a facing length below the tolerance itself is the sign to look. These pairs
        are listed (``marchland check``, the report) for a person to confirm; links added by
        hand are not listed.

        Parameters
        ----------
        facing_below_m : float
            List joins whose near-shared length is below this (the gap tolerance).

        Returns
        -------
        pandas.DataFrame
            ``unit_a unit_b country_a country_b gap_m near_shared_m``, one row per pair,
            shortest facing first.

        Examples
        --------
        >>> e = pd.DataFrame({"focal": ["a", "b"], "neighbor": ["b", "a"], "shared_m": 40.0,
        ...                   "gap_m": 90.0, "cross_border": True, "kind": "gap-bridged"})
        >>> g = BorderGraph(e, pd.Index(["a", "b"]), pd.Series({"a": "AAA", "b": "BBB"}))
        >>> g.short_joins(150)[["unit_a", "unit_b", "near_shared_m"]].values.tolist()
        [['a', 'b', 40.0]]
        >>> len(g.short_joins(30))
        0
        """
        e = self.edges
        hand = e["link_kind"].notna() if "link_kind" in e.columns else False
        pick = (
            (e["kind"] == "gap-bridged")
            & e["cross_border"].astype(bool)
            & (e["shared_m"] < facing_below_m)
            & ~hand
            & (e["focal"].astype(str) < e["neighbor"].astype(str))
        )
        e = e[pick]
        country = self.countries if self.countries is not None else pd.Series(dtype=object)
        out = pd.DataFrame(
            {
                "unit_a": e["focal"].to_numpy(),
                "unit_b": e["neighbor"].to_numpy(),
                "country_a": country.reindex(e["focal"]).to_numpy(),
                "country_b": country.reindex(e["neighbor"]).to_numpy(),
                "gap_m": e["gap_m"].to_numpy(dtype=float),
                "near_shared_m": e["shared_m"].to_numpy(dtype=float),
            }
        )
        return out.sort_values(["near_shared_m", "unit_a", "unit_b"], ignore_index=True)

    @cached_property
    def graph(self) -> Graph:
        """Binary libpysal ``Graph`` over ``ids`` (islands carry a zero self-weight)."""
        return self.weights("binary")

    def weights(self, weighting: str = "binary", *, row_standardise: bool = False) -> Graph:
        """Return a libpysal ``Graph`` with binary or shared-boundary-length weights.

        Parameters
        ----------
        weighting : {"binary", "shared"}
            "shared" weighs each neighbour by the metres of boundary it shares (links and
            edges of unknown length get the median shared length of the graph).
        row_standardise : bool
            Transform to row sums of one (libpysal's "r"), as the local Moran's I needs.

        Returns
        -------
        libpysal.graph.Graph
            Over ``ids`` in their order; islands have a zero self-weight.

        Examples
        --------
        >>> import pandas as pd
        >>> e = pd.DataFrame({"focal": list("abbc"), "neighbor": list("bacb"),
        ...                   "shared_m": [1.0, 1.0, 3.0, 3.0], "gap_m": 0.0,
        ...                   "cross_border": False, "kind": "shared-boundary"})
        >>> w = BorderGraph(e, pd.Index(list("abc"))).weights("shared", row_standardise=True)
        >>> w.adjacency.loc["b"].tolist()
        [0.25, 0.75]
        """
        if weighting not in WEIGHTINGS:
            raise ValueError(
                f"'weighting' needs to be one of {WEIGHTINGS}. {weighting!r} was given instead."
            )
        cache = self._weights_cache
        if (weighting, row_standardise) in cache:
            return cache[weighting, row_standardise]
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
        # Each row's position in ids: the edges' are known already (a Categorical of the
        # string ids cost a third of building the weights at 10,000 units).
        codes = np.concatenate([self._positions[0], self.ids.get_indexer(self.islands)])
        adj = adj.iloc[np.argsort(codes, kind="stable")]
        g = Graph.from_adjacency(
            adj, focal_col="focal", neighbor_col="neighbor", weight_col="weight"
        )
        g = g.transform("r") if row_standardise else g
        cache[weighting, row_standardise] = g
        return g

    @cached_property
    def _positions(self) -> tuple[np.ndarray, np.ndarray]:
        return (
            self.ids.get_indexer(self.edges["focal"]),
            self.ids.get_indexer(self.edges["neighbor"]),
        )

    def _adjacency(self, mask: np.ndarray | None = None) -> sparse.csr_matrix:
        i, j = self._positions
        if mask is not None:
            i, j = i[mask], j[mask]
        n = len(self.ids)
        return sparse.csr_matrix((np.ones(len(i), dtype=np.int8), (i, j)), shape=(n, n))

    @cached_property
    def _csr(self) -> sparse.csr_matrix:
        return self._adjacency()

    def hops_from(self, sources: Iterable) -> pd.Series:
        """Graph distance (number of steps) from the nearest of ``sources`` to every unit.

        Unreachable units get ``<NA>``. One sparse breadth-first search from a virtual node
        joined to every source (scipy), so the cost does not grow with the number of sources.

        Parameters
        ----------
        sources : iterable of unit ids
            Units at distance 0.

        Returns
        -------
        pandas.Series
            Nullable ``Int64`` named "hops", indexed by ``ids``.

        Examples
        --------
        >>> import pandas as pd
        >>> e = pd.DataFrame({"focal": list("abbc"), "neighbor": list("bacb"),
        ...                   "shared_m": 1.0, "gap_m": 0.0, "cross_border": False,
        ...                   "kind": "shared-boundary"})
        >>> BorderGraph(e, pd.Index(list("abcd"))).hops_from(["a"]).tolist()
        [0, 1, 2, <NA>]
        """
        sources = pd.Index(list(sources))
        unknown = sources[~sources.isin(self.ids)]
        if len(unknown):
            raise KeyError(f"sources not in the graph: {unknown[:5].tolist()}")
        out = pd.Series(pd.NA, index=self.ids, dtype="Int64", name="hops")
        if len(sources) == 0:
            return out
        n = len(self.ids)
        src = np.unique(self.ids.get_indexer(sources))
        star = sparse.csr_matrix(
            (np.ones(len(src), dtype=np.int8), (np.full(len(src), n), src)), shape=(n + 1, n + 1)
        )
        a = sparse.block_diag([self._csr, sparse.csr_matrix((1, 1), dtype=np.int8)]) + star
        d = csgraph.dijkstra(a.tocsr(), directed=False, indices=n, unweighted=True)[:n] - 1
        ok = np.isfinite(d)
        out.iloc[np.flatnonzero(ok)] = d[ok].astype(int)
        return out

    def hop_pairs(
        self, k: int, *, lower_order: bool = False
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Pairs at exactly ``k`` steps (1 to ``k`` with ``lower_order``) as positions in ``ids``.

        Returns ``(focal, neighbor, steps)``, three int arrays in the order of
        :meth:`higher_order`'s edges (its pairs without the unit ids, kinds and countries: at
        50,000 units and 5 steps the ids alone of its table took about 1 GB).

        Examples
        --------
        >>> import pandas as pd
        >>> e = pd.DataFrame({"focal": list("abbc"), "neighbor": list("bacb"),
        ...                   "shared_m": 1.0, "gap_m": 0.0, "kind": "shared-boundary",
        ...                   "cross_border": False})
        >>> [a.tolist() for a in BorderGraph(e, pd.Index(list("abc"))).hop_pairs(2)]
        [[0, 2], [2, 0], [2, 2]]
        """
        if int(k) != k or k < 1:
            raise ValueError(f"'k' needs to be a whole number >= 1. {k!r} was given instead.")
        k = int(k)
        d = _limited_distances(self._csr, k)
        i, j, dist = d.row, d.col, d.data
        if not lower_order:
            keep = dist == k
            i, j, dist = i[keep], j[keep], dist[keep]
        return i, j, dist

    def higher_order(self, k: int, *, lower_order: bool = False) -> BorderGraph:
        """Neighbours at exactly ``k`` steps (or 1 to ``k`` steps with ``lower_order=True``).

        Parameters
        ----------
        k : int
            Number of steps (graph distance), at least 1.
        lower_order : bool
            Keep every pair within ``k`` steps instead of exactly ``k``.

        Returns
        -------
        BorderGraph
            Over the same ids. An extra column ``order`` holds each pair's graph distance.
            ``kind`` is the weakest kind of edge a shortest path between the two must use
            ("shared-boundary" if some shortest path runs over shared boundaries only, else
            "gap-bridged" if some avoids links, else "link"). ``cross_border`` compares the
            units' countries when the graph knows them; otherwise a pair is cross-border when
            no path without a cross-border edge joins them. ``shared_m`` and ``gap_m`` are NaN.

        Examples
        --------
        >>> import pandas as pd
        >>> e = pd.DataFrame({"focal": list("abbc"), "neighbor": list("bacb"),
        ...                   "shared_m": 1.0, "gap_m": 0.0, "kind": "shared-boundary",
        ...                   "cross_border": [False, False, True, True]})
        >>> h = BorderGraph(e, pd.Index(list("abc"))).higher_order(2)
        >>> h.edges[["focal", "neighbor", "cross_border", "order"]].values.tolist()
        [['a', 'c', True, 2], ['c', 'a', True, 2]]
        """
        i, j, dist = self.hop_pairs(k, lower_order=lower_order)  # checks k
        k = int(k)
        n = len(self.ids)
        key = i.astype(np.int64) * n + j
        kind = np.full(len(i), "link", dtype=object)
        rank = pd.Series(pd.Categorical(self.edges["kind"], categories=EDGE_KINDS).codes)
        for level in (1, 0):  # weaker first, so the strongest qualifying kind wins
            sub = _limited_distances(self._adjacency((rank <= level).to_numpy()), k)
            sub_d = pd.Series(sub.data, index=sub.row.astype(np.int64) * n + sub.col)
            same = sub_d.reindex(key).to_numpy() == dist
            kind[same] = EDGE_KINDS[level]
        if self.countries is not None and self.countries.notna().all():
            c = self.countries.to_numpy()
            cross = c[i] != c[j]
        else:
            inside = ~self.edges["cross_border"].to_numpy()
            _, label = csgraph.connected_components(self._adjacency(inside), directed=False)
            cross = label[i] != label[j]
        edges = pd.DataFrame(
            {
                "focal": self.ids[i],
                "neighbor": self.ids[j],
                "shared_m": np.nan,
                "gap_m": np.nan,
                "cross_border": cross,
                "kind": kind.astype(str),
                "order": dist.astype(int),
            }
        )
        return BorderGraph(edges=edges, ids=self.ids, countries=self.countries)

    def subgraph(self, ids: Iterable) -> BorderGraph:
        """Return the graph restricted to ``ids`` (a new object).

        Examples
        --------
        >>> import pandas as pd
        >>> e = pd.DataFrame({"focal": list("abbc"), "neighbor": list("bacb"),
        ...                   "shared_m": 1.0, "gap_m": 0.0, "cross_border": False,
        ...                   "kind": "shared-boundary"})
        >>> BorderGraph(e, pd.Index(list("abc"))).subgraph(["a", "c"]).islands
        ['a', 'c']
        """
        keep = pd.Index(list(ids))
        e = self.edges
        e = e[e["focal"].isin(keep) & e["neighbor"].isin(keep)]
        c = None if self.countries is None else self.countries
        lo = self.left_out
        lo = lo[lo["unit_a"].isin(keep) & lo["unit_b"].isin(keep)]
        return BorderGraph(edges=e, ids=self.ids[self.ids.isin(keep)], countries=c, left_out=lo)


def _limited_distances(a: sparse.csr_matrix, k: int) -> sparse.coo_matrix:
    """Graph distances 1..k between all pairs as a sparse matrix (absent = farther or none).

    Breadth-first layers as sparse products: k is small, and a dense all-pairs matrix (what
    ``csgraph.shortest_path`` returns) would not fit for tens of thousands of units.
    """
    n = a.shape[0]
    a = ((a + a.T) > 0).astype(np.int8).tocsr()
    reached = sparse.identity(n, dtype=np.int8, format="csr")
    frontier = reached
    rows, cols, vals = [], [], []
    for step in range(1, k + 1):
        nxt = ((frontier @ a) > 0).astype(np.int8)
        nxt = (nxt - nxt.multiply(reached)).tocsr()
        nxt.eliminate_zeros()
        if nxt.nnz == 0:
            break
        c = nxt.tocoo()
        rows.append(c.row)
        cols.append(c.col)
        vals.append(np.full(c.nnz, step, dtype=np.int64))
        reached = ((reached + nxt) > 0).astype(np.int8).tocsr()
        frontier = nxt
    if not rows:
        return sparse.coo_matrix((n, n), dtype=np.int64)
    return sparse.coo_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(n, n)
    )


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
