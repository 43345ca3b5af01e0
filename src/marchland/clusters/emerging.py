"""Emerging clusters: the prospective space-time scan over the latest weeks.

:func:`emerging_clusters` asks, on an as-of date, whether some group of neighbouring units has
had more cases in the last few weeks than its own history and the region's recent trend lead
one to expect. Heavy array work is in ``_scan.py``; the case panel is built in ``_panel.py``.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
from scipy import sparse

from ..errors import DataWarning, InputError
from ..graph.border import BorderGraph, as_border_graph
from . import _scan
from ._panel import case_panel, check_panel

METHODS = ("space-time permutation", "poisson")
NEIGHBOURS = ("distance", "graph")
CLUSTER_COLUMNS = (
    "units",
    "centre",
    "n_units",
    "start",
    "end",
    "observed",
    "expected",
    "relative_risk",
    "llr",
    "p",
    "recurrence_weeks",
    "method",
)


def emerging_clusters(
    counts: pd.DataFrame | None,
    units: pd.DataFrame,
    *,
    as_of: object,
    max_weeks: int = 4,
    max_share: float = 0.5,
    permutations: int = 999,
    seed: int | np.random.Generator | None = None,
    method: str = "space-time permutation",
    neighbours: str = "distance",
    graph: BorderGraph | object | None = None,
    window_weeks: int = 12,
    end_week: object = None,
    max_units: int | None = None,
    max_clusters: int = 10,
    panel: pd.DataFrame | None = None,
) -> pd.DataFrame:
    """Find clusters of cases that are still going on at the as-of week (prospective scan).

    Every candidate is a cylinder: a base of one unit and its nearest neighbours, a height of
    the last 1..``max_weeks`` weeks, all ending at the window's last week. The most likely
    cluster has the largest Poisson generalised likelihood ratio; further clusters share no
    unit with better ones. Each gets a Monte Carlo p-value from the null distribution of the
    largest ratio over all cylinders.

    Parameters
    ----------
    counts : pandas.DataFrame or None
        Counts (``unit_id week cases ...`` with every revision); the data as known on
        ``as_of`` are used. May be None when ``panel`` is given.
    units : pandas.DataFrame or geopandas.GeoDataFrame
        Analysis units indexed by ``unit_id`` with ``geometry`` in an equal-area CRS (metres);
        ``population`` is needed for ``method="poisson"``.
    as_of : date-like
        The analysis date: only reports received by then count.
    max_weeks : int
        Longest cluster duration, in weeks (cylinder heights 1..max_weeks).
    max_share : float
        Largest cluster base as a share of the window's cases (of population for "poisson").
    permutations : int
        Monte Carlo replicates; p = (1 + replicates at least as extreme) / (permutations + 1).
    seed : int or numpy.random.Generator, optional
        For the replicates.
    method : str
        ``"space-time permutation"`` (cases only; expected counts from the unit and week
        margins, Kulldorff et al. 2005) or ``"poisson"`` (expected from population and the
        window's total, Kulldorff 2001).
    neighbours : str
        ``"distance"``: bases grow by centroid distance; ``"graph"``: by hops in ``graph``
        (ties within a ring by distance), so bases follow borders.
    graph : BorderGraph or libpysal.graph.Graph, optional
        Needed for ``neighbours="graph"``.
    window_weeks : int
        Length of the study window (the baseline): 12 weeks by default, 3 months of history
        behind the cylinders, short enough that old waves do not set the baseline.
    end_week : date-like, optional
        Last week of the window (its first day). Default: the latest week that at least half
        the units reporting lately had reported by ``as_of`` (the newest weeks are often
        reported by a few units only).
    max_units : int, optional
        Also cap a base at this many units (for large regions, bounds time and memory).
    max_clusters : int
        Report at most this many non-overlapping clusters.
    panel : pandas.DataFrame, optional
        Cases per unit (index) and week (columns, oldest first) to scan instead of ``counts``,
        e.g. nowcast-adjusted counts; must have no gaps.

    Returns
    -------
    pandas.DataFrame
        One row per cluster, best first, indexed by ``cluster`` (1, 2, ...): ``units`` (tuple of
        unit ids, nearest to the centre first), ``centre``, ``n_units``, ``start``, ``end``
        (first day of the first and last week), ``observed``, ``expected``, ``relative_risk``
        (observed/expected inside over observed/expected outside), ``llr``, ``p``,
        ``recurrence_weeks`` (1/p: with one analysis a week, how often a cluster this strong
        would arise by chance), ``method``. ``attrs`` holds ``window`` (first and last week),
        ``dropped_units`` (units left out for gaps in the window) and ``note``.

    Notes
    -----
    Unknown unit-weeks are not zeros: a unit with any unreported week in the window is left
    out (with a :class:`~marchland.errors.DataWarning`), since a zero would distort both
    margins. Pass a filled ``panel`` to keep such units. A cluster signals an excess to look
    at, not a diagnosis: recent weeks are incomplete and small numbers are unstable; follow
    national authorities.

    References
    ----------
    Kulldorff M, Heffernan R, Hartman J, Assunção R, Mostashari F (2005). A space-time
    permutation scan statistic for disease outbreak detection. PLoS Med 2(3): e59.
    Kulldorff M (2001). Prospective time periodic geographical disease surveillance using a
    scan statistic. J R Stat Soc A 164(1): 61-72.

    Examples
    --------
    >>> import geopandas as gpd
    >>> from shapely.geometry import box
    >>> ids = [f"u{i:02d}" for i in range(16)]
    >>> units = gpd.GeoDataFrame(
    ...     {"population": 1000},
    ...     geometry=[box(i % 4, i // 4, i % 4 + 1, i // 4 + 1) for i in range(16)],
    ...     index=pd.Index(ids, name="unit_id"), crs=3035)
    >>> weeks = pd.date_range("2026-01-05", periods=8, freq="7D")
    >>> cases = pd.DataFrame(4, index=ids, columns=weeks)
    >>> cases.loc[["u00", "u01", "u04"], weeks[-2:]] = 20
    >>> out = emerging_clusters(None, units, as_of="2026-03-01", panel=cases, seed=1,
    ...                         permutations=99)
    >>> sorted(out.loc[1, "units"]), out.loc[1, "start"].date(), float(out.loc[1, "p"])
    (['u00', 'u01', 'u04'], datetime.date(2026, 2, 16), 0.01)
    """
    if method not in METHODS:
        raise ValueError(f"'method' needs to be one of {METHODS}. {method!r} was given instead.")
    if neighbours not in NEIGHBOURS:
        raise ValueError(
            f"'neighbours' needs to be one of {NEIGHBOURS}. {neighbours!r} was given instead."
        )
    if neighbours == "graph" and graph is None:
        raise ValueError("neighbours='graph' needs a 'graph' (BorderGraph or libpysal Graph).")
    if not (isinstance(max_weeks, int | np.integer) and max_weeks >= 1):
        raise ValueError(f"'max_weeks' needs to be a whole number >= 1. {max_weeks!r} was given.")
    if not 0 < max_share <= 1:
        raise ValueError(f"'max_share' needs to be in (0, 1]. {max_share!r} was given instead.")
    if permutations < 1:
        raise ValueError(f"'permutations' needs to be >= 1. {permutations!r} was given instead.")
    ids = pd.Index(units.index.astype(str), name="unit_id")

    dropped: list[str] = []
    if panel is None:
        if counts is None:
            raise ValueError("give either 'counts' or a filled 'panel'.")
        panel, dropped = case_panel(
            counts, ids, as_of=as_of, window_weeks=window_weeks, end_week=end_week
        )
        if dropped:
            warnings.warn(
                f"{len(dropped)} unit(s) left out of the cluster scan: unreported week(s) in the"
                f" window (missing is not zero), e.g. {', '.join(dropped[:5])}",
                DataWarning,
                stacklevel=2,
            )
    # Units in id order: ties in distance and the random tables then do not depend on row order.
    table_df = check_panel(panel, max_weeks).sort_index()
    unknown = table_df.index.difference(ids)
    if len(unknown):
        raise InputError(f"panel rows are not analysis units: {list(unknown[:5])}", "unit_id")
    weeks = pd.DatetimeIndex(table_df.columns)
    attrs = {"window": (weeks[0], weeks[-1]), "dropped_units": dropped, "note": ""}
    table = table_df.to_numpy()
    total = float(table.sum())
    empty = _empty()
    if total == 0:
        attrs["note"] = "no cases in the study window: nothing to scan"
        warnings.warn(attrs["note"], DataWarning, stacklevel=2)
        empty.attrs.update(attrs)
        return empty

    rng = np.random.default_rng(seed)
    scanned = table_df.index
    geom = units.geometry.reindex(scanned)
    xy = np.column_stack([geom.centroid.x.to_numpy(), geom.centroid.y.to_numpy()])
    adjacency = None
    if neighbours == "graph":
        adjacency = _adjacency(as_border_graph(graph), scanned)
    n, n_weeks = table.shape
    if method == "poisson":
        pop = pd.to_numeric(units["population"].reindex(scanned), errors="coerce").to_numpy()
        if not (np.isfinite(pop).all() and (pop > 0).all()):
            raise InputError(
                "method='poisson' needs a population > 0 for every unit", column="population"
            )
        size = pop
        # Expected under the null: the window's cases spread by population and equally by week.
        cell = np.outer(pop / pop.sum(), np.full(n_weeks, 1.0 / n_weeks)) * total
        draw = _scan.multinomial_draw(int(total), cell, rng)
    else:
        size = table.sum(axis=1)
        cell = np.outer(size, table.sum(axis=0)) / total
        draw = _scan.permutation_draw(table, rng)
    cap = max_share * size.sum()
    order, valid, best, best_h = _scan.best_cylinders(
        table, cell, xy, size, cap, max_weeks, adjacency=adjacency, max_units=max_units
    )
    picks = _scan.select_clusters(best, best_h, order, max_clusters)
    if not picks:
        attrs["note"] = "no cylinder had more cases than expected"
        empty.attrs.update(attrs)
        return empty
    # Only the picked cylinders' counts are needed from here.
    recent_obs = _scan.recent_sums(table, max_weeks)
    recent_mu = _scan.recent_sums(cell, max_weeks)
    picked = [
        (
            _scan.cylinder_at(recent_obs, order, h, i, k),
            _scan.cylinder_at(recent_mu, order, h, i, k),
            best[i, k],
        )
        for h, i, k in picks
    ]
    del best, best_h
    live = cell[:, -max_weeks:].sum(axis=1) > 0
    null = _scan.null_maxima(
        draw, permutations, order, recent_mu, valid, total, max_weeks, n_weeks=n_weeks, live=live
    )
    rows = []
    for (h, i, k), (c, m, s) in zip(picks, picked, strict=True):
        p = (1 + np.count_nonzero(null >= s * (1 - 1e-10))) / (permutations + 1)
        members = tuple(scanned[order[i, : k + 1]])
        rr = (c / m) / ((total - c) / (total - m)) if total > c else np.inf
        rows.append(
            (
                members,
                scanned[i],
                k + 1,
                weeks[-1 - h],
                weeks[-1],
                float(c),
                float(m),
                float(rr),
                float(s),
                float(p),
                float(1.0 / p),
                method,
            )
        )
    out = pd.DataFrame(rows, columns=list(CLUSTER_COLUMNS))
    out.index = pd.RangeIndex(1, len(out) + 1, name="cluster")
    out.attrs.update(attrs)
    return out


def _adjacency(graph: BorderGraph, ids: pd.Index) -> sparse.csr_matrix:
    """Build the graph's 0/1 adjacency among ``ids``, rows in the order of ``ids``."""
    e = graph.edges
    i, j = ids.get_indexer(e["focal"].astype(str)), ids.get_indexer(e["neighbor"].astype(str))
    keep = (i >= 0) & (j >= 0)
    n = len(ids)
    return sparse.csr_matrix((np.ones(keep.sum()), (i[keep], j[keep])), shape=(n, n))


def _empty() -> pd.DataFrame:
    out = pd.DataFrame({c: pd.Series(dtype=object) for c in CLUSTER_COLUMNS})
    out.index = pd.RangeIndex(0, name="cluster")
    return out
