"""Where the outbreak front stands and how it crossed borders.

Fronts and their outlines, cross-border introductions (and their count per border), corridors.
"""

from __future__ import annotations

import geopandas as gpd
import pandas as pd
from libpysal.graph import Graph

from ..errors import InputError
from ..graph.border import BorderGraph, as_border_graph
from ._arrival import (
    FIRST_WEEK,
    centroids_km,
    epi_week_label,
    first_on,
    introductions_table,
    month_of_week,
    outline_layer,
    path_table,
    resolve_countries,
    time_respecting_path,
    weeks_between,
)
from .arrival import PERIODS


# --- fronts ---------------------------------------------------------------------------------
def spread_fronts(first: pd.Series, graph: BorderGraph | Graph) -> pd.DataFrame:
    """Arrival week, graph distance from the earliest units and period joined, per unit.

    Parameters
    ----------
    first : pandas.Series
        First week per unit (:func:`first_cases`); ``NaT`` for units never affected.
    graph : BorderGraph or libpysal.graph.Graph
        Contiguity graph of the analysis units; the result has one row per graph unit.

    Returns
    -------
    pandas.DataFrame
        Indexed by ``unit_id``: ``first_week``, ``epi_week`` ("2026-W10"; Sunday-start
        numbering when the weeks are Sundays), ``weeks_since_start`` (Int64, weeks after the
        earliest first week), ``month`` ("YYYY-MM", the month holding most days of the first
        week), ``hops`` (Int64, graph steps from the nearest earliest unit; ``<NA>`` if not
        connected), ``origin`` (one of the earliest units), ``earlier_neighbours`` (Int64,
        neighbours affected in a strictly earlier week; ``<NA>`` if never affected).

    Examples
    --------
    >>> import pandas as pd
    >>> from libpysal.graph import Graph
    >>> g = Graph.from_adjacency(pd.DataFrame({"focal": list("abbc"),
    ...     "neighbor": list("bacb"), "weight": 1.0}))
    >>> first = pd.Series(pd.to_datetime(["2026-03-02", "2026-03-16", None]), index=list("abc"))
    >>> spread_fronts(first, g)[["epi_week", "weeks_since_start", "month", "hops"]]
             epi_week  weeks_since_start    month  hops
    unit_id
    a        2026-W10                  0  2026-03     0
    b        2026-W12                  2  2026-03     1
    c            <NA>               <NA>     <NA>     2
    """
    bg = as_border_graph(graph)
    t = first_on(first, bg.ids)
    out = pd.DataFrame(index=bg.ids)
    out[FIRST_WEEK] = t
    start = t.min()
    out["epi_week"] = epi_week_label(t)
    out["weeks_since_start"] = weeks_between(t, start)
    out["month"] = month_of_week(t)
    origin = t.notna() & (t == start)
    out["hops"] = bg.hops_from(bg.ids[origin.to_numpy()])
    out["origin"] = origin
    e = bg.edges
    earlier = e["neighbor"].map(t).to_numpy() < e["focal"].map(t).to_numpy()
    n_earlier = pd.Series(earlier, index=e["focal"].to_numpy()).groupby(level=0).sum()
    out["earlier_neighbours"] = (
        n_earlier.reindex(bg.ids).fillna(0).astype("Int64").where(t.notna(), pd.NA)
    )
    return out


def front_outlines(
    fronts: pd.DataFrame, units: gpd.GeoDataFrame, *, period: str = "month"
) -> gpd.GeoDataFrame:
    """Per period, the newly affected units and their dissolved outline (a map layer).

    Parameters
    ----------
    fronts : pandas.DataFrame
        Result of :func:`spread_fronts` (needs ``first_week``).
    units : geopandas.GeoDataFrame
        Analysis units with geometry, indexed by ``unit_id``.
    period : {"month", "week"}
        Group arrivals by calendar month (majority-of-days rule) or by week.

    Returns
    -------
    geopandas.GeoDataFrame
        Indexed by ``period`` ("YYYY-MM" or the week's first day "YYYY-MM-DD"), sorted:
        ``first_week`` (earliest arrival in it), ``n_new``, ``units`` (comma-separated ids),
        ``n_affected`` (cumulative), ``geometry`` (union of the new units), in ``units``' CRS.

    Examples
    --------
    >>> import geopandas as gpd, pandas as pd
    >>> from shapely.geometry import box
    >>> units = gpd.GeoDataFrame(geometry=[box(0, 0, 1, 1), box(1, 0, 2, 1)],
    ...     index=pd.Index(["a", "b"], name="unit_id"), crs="EPSG:3035")
    >>> fronts = pd.DataFrame({"first_week": pd.to_datetime(["2026-03-02", "2026-04-06"])},
    ...     index=units.index)
    >>> front_outlines(fronts, units)[["n_new", "n_affected"]]
             n_new  n_affected
    period
    2026-03      1           1
    2026-04      1           2
    """
    if period not in PERIODS:
        raise ValueError(f"'period' needs to be one of {PERIODS}. {period!r} was given instead.")
    t = pd.to_datetime(fronts[FIRST_WEEK]).dropna()
    missing = t.index.difference(units.index)
    if len(missing):
        raise KeyError(f"units lack geometry for affected unit(s): {list(missing[:5])}")
    key = month_of_week(t) if period == "month" else t.dt.strftime("%Y-%m-%d")
    return outline_layer(t, key, units)


# --- cross-border introductions ---------------------------------------------------------------
def cross_border_introductions(
    first: pd.Series, graph: BorderGraph | Graph, *, countries: pd.Series | None = None
) -> pd.DataFrame:
    """Units probably reached across a border: a foreign neighbour first, no domestic one.

    A unit is listed when, in a strictly earlier week than its own first week, at least one
    neighbour across a border was affected and no neighbour in its own country was. Same-week
    neighbours do not count either way (weekly data cannot order them). This is evidence of an
    introduction, not proof (reporting is incomplete and delayed, and people travel further
    than one unit), so every row is labelled ``evidence = "probable"``.

    Parameters
    ----------
    first : pandas.Series
        First week per unit (:func:`first_cases`).
    graph : BorderGraph or libpysal.graph.Graph
        With a plain libpysal ``Graph`` pass ``countries`` so borders are known.
    countries : pandas.Series, optional
        Country code per unit id. For a ``BorderGraph`` the edges' ``cross_border`` flag decides
        and ``countries`` only labels the rows (default: the graph's ``countries``, else the
        id prefix, e.g. "TVR" of "TVR-03-07", as in the id contract).

    Returns
    -------
    pandas.DataFrame
        Indexed by ``unit_id``, sorted by first week: ``first_week``, ``country``, ``sources``
        (comma-separated foreign neighbours affected earlier), ``source_countries``,
        ``n_sources``, ``source_week`` (earliest first week among the sources), ``lag_weeks``
        (weeks from ``source_week`` to ``first_week``), ``evidence``. Per border pair see
        :func:`introductions_by_border`.

    Examples
    --------
    >>> import pandas as pd
    >>> from libpysal.graph import Graph
    >>> g = Graph.from_adjacency(pd.DataFrame({"focal": list("abbc"),
    ...     "neighbor": list("bacb"), "weight": 1.0}))
    >>> first = pd.Series(pd.to_datetime(["2026-03-02", "2026-03-16", "2026-03-30"]),
    ...                   index=list("abc"))
    >>> cbi = cross_border_introductions(first, g, countries=pd.Series(
    ...     {"a": "TVR", "b": "OSK", "c": "OSK"}))
    >>> cbi[["country", "sources", "lag_weeks", "evidence"]]
            country sources  lag_weeks  evidence
    unit_id
    b           OSK       a          2  probable
    """
    if isinstance(graph, Graph) and countries is None:
        raise ValueError(
            "'countries' (a Series of country codes by unit id) is needed with a plain "
            "libpysal Graph: without it no edge is known to cross a border"
        )
    bg = as_border_graph(graph, countries=countries)
    t = first_on(first, bg.ids)
    return introductions_table(bg, t, resolve_countries(bg, countries))


def introductions_by_border(introductions: pd.DataFrame) -> pd.DataFrame:
    """Count and weeks of probable introductions per border, from one country into another.

    Parameters
    ----------
    introductions : pandas.DataFrame
        Result of :func:`cross_border_introductions`. A unit with sources in two countries
        counts once for each of the two borders.

    Returns
    -------
    pandas.DataFrame
        One row per (``from_country``, ``to_country``), sorted by first week: ``n_units``,
        ``units`` and ``weeks`` (comma-separated, weeks as "YYYY-MM-DD"), ``first_week``,
        ``last_week``.

    Examples
    --------
    >>> import pandas as pd
    >>> intro = pd.DataFrame({"first_week": pd.to_datetime(["2026-03-16", "2026-03-30"]),
    ...     "country": ["OSK", "OSK"], "source_countries": ["TVR", "MRW, TVR"]},
    ...     index=pd.Index(["b", "c"], name="unit_id"))
    >>> introductions_by_border(intro)[["from_country", "to_country", "n_units"]]
      from_country to_country  n_units
    0          TVR        OSK        2
    1          MRW        OSK        1
    """
    cols = ["from_country", "to_country", "n_units", "units", "weeks", FIRST_WEEK, "last_week"]
    if introductions.empty:
        return pd.DataFrame(columns=cols)
    long = introductions.assign(
        from_country=introductions["source_countries"].fillna("").str.split(", ")
    ).explode("from_country")
    long = long.assign(unit=long.index.to_numpy()).sort_values([FIRST_WEEK, "unit"])
    grouped = long.groupby(["from_country", "country"], sort=False, dropna=False)
    out = pd.DataFrame(
        {
            "n_units": grouped["unit"].nunique(),
            "units": grouped["unit"].agg(", ".join),
            "weeks": grouped[FIRST_WEEK].agg(
                lambda w: ", ".join(pd.unique(w.dt.strftime("%Y-%m-%d")))
            ),
            FIRST_WEEK: grouped[FIRST_WEEK].min(),
            "last_week": grouped[FIRST_WEEK].max(),
        }
    )
    out = out.rename_axis(["from_country", "to_country"]).reset_index()
    return out.sort_values([FIRST_WEEK, "from_country"], ignore_index=True).loc[:, cols]


# --- corridor -------------------------------------------------------------------------------
def corridor(
    first: pd.Series,
    graph: BorderGraph | Graph,
    source: str,
    target: str,
    *,
    units: gpd.GeoDataFrame | None = None,
) -> pd.DataFrame:
    """Find the chain of neighbouring units along which spread could have run to ``target``.

    A path is *time-respecting* when every unit on it was affected and each next unit's first
    week is the same as or later than the previous one's. Among the time-respecting paths
    from ``source`` to ``target`` this returns the one with the fewest hops and, among those,
    the shortest centroid-to-centroid length (when ``units`` is given). It is found by
    Dijkstra's algorithm (scipy) on the directed graph of time-respecting edges with cost
    ``1 + km / (total km + 1)``: the hop count dominates, distance breaks ties.

    Parameters
    ----------
    first : pandas.Series
        First week per unit (:func:`first_cases`).
    graph : BorderGraph or libpysal.graph.Graph
        Contiguity graph.
    source, target : str
        Unit ids; both must be affected and ``target`` no earlier than ``source``.
    units : geopandas.GeoDataFrame, optional
        Analysis units (projected CRS in metres) for distances along the path.

    Returns
    -------
    pandas.DataFrame
        Indexed by ``unit_id`` in path order: ``hop`` (0 at ``source``), ``first_week``,
        ``weeks_since_source``, ``km_step`` (from the previous unit), ``km`` (cumulative),
        ``cross_border`` (the step into this unit crosses a border), ``kind`` (that step's
        edge kind: "shared-boundary", "gap-bridged" or "link"; ``<NA>`` at ``source``).

    Raises
    ------
    marchland.errors.InputError
        If a unit is unknown or unaffected, or no time-respecting path exists (the message
        says which).

    Examples
    --------
    >>> import pandas as pd
    >>> from libpysal.graph import Graph
    >>> g = Graph.from_adjacency(pd.DataFrame({"focal": list("abbccd"),
    ...     "neighbor": list("bacbdc"), "weight": 1.0}))
    >>> first = pd.Series(pd.to_datetime(["2026-03-02", "2026-03-09", "2026-03-09",
    ...     "2026-03-30"]), index=list("abcd"))
    >>> corridor(first, g, "a", "d")[["hop", "weeks_since_source"]]
             hop  weeks_since_source
    unit_id
    a          0                   0
    b          1                   1
    c          2                   1
    d          3                   4
    """
    bg = as_border_graph(graph)
    t = first_on(first, bg.ids)
    for role, uid in (("source", source), ("target", target)):
        if uid not in bg.ids:
            raise InputError(f"{role} unit is not in the graph", value=uid)
        if pd.isna(t[uid]):
            raise InputError(f"{role} unit has no first case, so no corridor reaches it", value=uid)
    if t[target] < t[source]:
        raise InputError(
            f"target {target!r} was affected ({t[target]:%Y-%m-%d}) before source {source!r} "
            f"({t[source]:%Y-%m-%d}): no time-respecting path",
            value=target,
        )
    centroids = None if units is None else centroids_km(units).reindex(bg.ids)
    path = time_respecting_path(bg, t, source, target, centroids)
    if path is None:
        raise InputError(
            f"no time-respecting path from {source!r} to {target!r}: every chain of neighbours "
            "between them has a unit affected earlier than the one before it, or unaffected",
            value=target,
        )
    return path_table(bg, t, path, centroids)
