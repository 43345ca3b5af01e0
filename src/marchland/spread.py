"""Spread of an outbreak between units: first cases, fronts, velocity, introductions, corridors.

Everything starts from the week each unit was first affected (:func:`first_cases`), read from
the as-of view of the counts so that a retrospective correction moves a first case. A week
with no report for a unit is *not* a week without cases; the rules below never treat it as one.

References
----------
.. [1] Cliff, A. D., Haggett, P., Ord, J. K. and Versey, G. R. (1981). *Spatial Diffusion: an
   Historical Geography of Epidemics in an Island Community*. Cambridge University Press.
"""

from __future__ import annotations

import geopandas as gpd
import numpy as np
import pandas as pd
from libpysal.graph import Graph

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
from ._knox import KnoxResult, as_arrays, knox_test
from ._timeline import build_timeline, check_rules, confirmed, episodes
from ._velocity import VELOCITY_METHODS, Velocity, estimate, groups_of
from .errors import InputError
from .graph import BorderGraph, as_border_graph
from .reports import as_of as _as_of_view

PERIODS = ("month", "week")


def _week_dtype(counts: pd.DataFrame):
    dtype = counts["week"].dtype
    return dtype if pd.api.types.is_datetime64_dtype(dtype) else "datetime64[ns]"


def _index_with(found: pd.Index, units) -> pd.Index:
    if units is None:
        return found
    units = pd.Index(getattr(units, "index", units) if not isinstance(units, pd.Index) else units)
    return units.append(found.difference(units)).rename("unit_id")


def first_cases(
    counts: pd.DataFrame,
    *,
    min_cases: int = 1,
    as_of: object = None,
    confirm: tuple[int, int] | None = None,
    reintroduction_weeks: int | None = None,
    units: pd.Index | pd.DataFrame | None = None,
) -> pd.Series:
    """Week each unit was first affected (``NaT`` if never), from the as-of view of counts.

    Parameters
    ----------
    counts : pandas.DataFrame
        Counts with every accepted version: ``unit_id week cases deaths received source row``.
    min_cases : int, default 1
        A week is *positive* when its reported cases are at least this. A row whose cases
        are missing (``<NA>``) counts as not reported.
    as_of : date-like, optional
        Use the counts as known on this date (``reports.as_of``); ``None``: everything received.
    confirm : (k, n), optional
        Confirmation rule: the first week must open a run with at least ``k`` positive weeks
        among ``n`` consecutive calendar weeks (itself included), e.g. ``(2, 3)``. Weeks with no
        report count neither for nor against: confirmation waits until the weeks are reported.
    reintroduction_weeks : int, optional
        Return the start of the unit's *latest* episode instead of the first: a unit is affected
        again after at least this many *reported* weeks below ``min_cases`` (weeks with no
        report are not evidence of no cases). See :func:`affected_episodes` for all episodes.
    units : pandas.Index or GeoDataFrame, optional
        Units to include even if they never reported (they get ``NaT``); their order first.

    Returns
    -------
    pandas.Series
        Named ``"first_week"``, indexed by ``unit_id`` (every unit in ``counts``, plus
        ``units``), the Timestamp of the first day of the week.

    Examples
    --------
    >>> import pandas as pd
    >>> c = pd.DataFrame({"unit_id": ["a", "a", "b", "b"],
    ...     "week": pd.to_datetime(["2026-01-05", "2026-01-12", "2026-01-05", "2026-01-19"]),
    ...     "cases": pd.array([0, 2, 1, 3], dtype="Int64"), "deaths": pd.array([0] * 4, "Int64"),
    ...     "received": pd.to_datetime(["2026-01-13", "2026-01-20", "2026-01-13", "2026-01-27"]),
    ...     "source": "x", "row": [1, 2, 3, 4]})
    >>> first_cases(c).dt.strftime("%Y-%m-%d").tolist()
    ['2026-01-12', '2026-01-05']
    >>> first_cases(c, confirm=(2, 3))
    unit_id
    a          NaT
    b   2026-01-05
    Name: first_week, dtype: datetime64[...]
    """
    confirm = check_rules(min_cases, confirm, reintroduction_weeks)
    view = _as_of_view(counts, as_of)
    tl = build_timeline(view, min_cases)
    found = pd.Index(pd.unique(counts["unit_id"]), name="unit_id").sort_values()
    index = _index_with(found, units)
    if reintroduction_weeks is None:
        ok = confirmed(tl.positive, confirm)
        has = ok.any(axis=1)
        first = pd.Series(pd.NaT, index=tl.ids, dtype=_week_dtype(counts))
        if has.any():
            first[has] = tl.weeks[ok[has].argmax(axis=1)]
    else:
        ep = episodes(tl, confirm, reintroduction_weeks)
        first = ep.groupby("unit_id")["start"].max().astype(_week_dtype(counts))
    return first.reindex(index).rename(FIRST_WEEK).rename_axis("unit_id")


def affected_episodes(
    counts: pd.DataFrame,
    *,
    min_cases: int = 1,
    as_of: object = None,
    confirm: tuple[int, int] | None = None,
    reintroduction_weeks: int = 4,
) -> pd.DataFrame:
    """Every episode of each unit: affected, quiet for a while, affected again.

    Positive weeks (``cases >= min_cases``) belong to one episode until at least
    ``reintroduction_weeks`` *reported* weeks below ``min_cases`` separate two positive weeks;
    weeks with no report neither end nor extend the quiet period. An episode counts only if it
    holds a week that passes ``confirm``; it starts at the first such week.

    Parameters
    ----------
    counts : pandas.DataFrame
        Counts with every accepted version (see :func:`first_cases`).
    min_cases, as_of, confirm
        As in :func:`first_cases`.
    reintroduction_weeks : int, default 4
        Reported quiet weeks that end an episode (four weeks is common practice for declaring a
        local outbreak over; set what your national guideline says).

    Returns
    -------
    pandas.DataFrame
        One row per episode: ``unit_id episode start end weeks_positive cases`` (``episode``
        counts from 1 per unit; ``end`` is its last positive week; ``cases`` sums its positive
        weeks).

    Examples
    --------
    >>> import pandas as pd
    >>> wk = pd.date_range("2026-01-05", periods=8, freq="7D")
    >>> c = pd.DataFrame({"unit_id": "a", "week": wk,
    ...     "cases": pd.array([2, 0, 0, 0, 0, 0, 0, 1], dtype="Int64"), "deaths": pd.NA,
    ...     "received": wk + pd.Timedelta(days=8), "source": "x", "row": range(1, 9)})
    >>> affected_episodes(c, reintroduction_weeks=4)[["episode", "weeks_positive"]].values.tolist()
    [[1, 1], [2, 1]]
    >>> len(affected_episodes(c.drop(index=[2, 3, 4]), reintroduction_weeks=4))  # not reported
    1
    """
    confirm = check_rules(min_cases, confirm, reintroduction_weeks)
    tl = build_timeline(_as_of_view(counts, as_of), min_cases)
    return episodes(tl, confirm, reintroduction_weeks)


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


# --- velocity -------------------------------------------------------------------------------
def spread_velocity(
    first: pd.Series,
    units: gpd.GeoDataFrame,
    *,
    method: str = "trend_surface",
    origin: str | list | tuple | None = None,
    groups: str | pd.Series | dict | None = None,
    degree: int = 3,
    conf: float = 0.95,
    draws: int = 2000,
    seed: int | None = None,
) -> Velocity:
    """Speed of spread (km per week) from arrival weeks at unit centroids, with intervals.

    Two estimators, each on the affected units only (``n_units``):

    * ``"trend_surface"``: arrival week regressed (statsmodels OLS) on a polynomial of the
      centroid coordinates; local speed is ``1 / |gradient|`` at each unit and the estimate
      is its median over units. The interval holds the quantiles of that median over
      ``draws`` coefficient vectors drawn from the fit's sampling distribution (normal, OLS
      covariance). The degree is lowered when there are fewer than 5 units per coefficient
      or the centroids cannot carry it (units along a line: no surface, NaN with a note).
      Works for any front shape (circular, planar, irregular); the interval is sampling
      uncertainty only: a polynomial smooths a sharp cone around a central origin, which
      biases the speed a little low (about 4% on synthetic circular waves).
    * ``"distance_regression"``: arrival week regressed on the distance from the origin;
      speed is the inverse of the slope and the interval the inverse of the slope's interval
      (upper limit infinite when the slope's interval reaches 0; NaN if the slope is not
      positive). Assumes spread outwards from one origin: jumps (a ferry, a river) make it
      faster than the trend surface, so read the two together.

    Parameters
    ----------
    first : pandas.Series
        First week per unit (:func:`first_cases`).
    units : geopandas.GeoDataFrame
        Analysis units in a projected CRS in metres (distances are reported in km).
    method : {"trend_surface", "distance_regression"}
        The estimate put in the headline fields; ``by_method`` has both.
    origin : unit id, list of ids or (x, y) in the units' CRS, optional
        Origin for the distance regression; default the mean centroid of the earliest units.
    groups : column name, Series or dict, optional
        Estimates per group as well, in ``by_group``: e.g. ``"country"``, or a dict of named
        corridors ``{"lake route": [unit ids]}`` (groups may overlap).
    degree : int, default 3
        Trend-surface polynomial degree (a cubic surface is the usual choice in the
        trend-surface literature).
    conf : float, default 0.95
        Confidence level of the intervals.
    draws : int, default 2000
        Coefficient draws for the trend-surface interval.
    seed : int, optional
        Seed for those draws (``numpy.random.default_rng``).

    Returns
    -------
    Velocity
        ``km_per_week lower upper n_units method`` of ``method``, with ``by_method`` and
        ``by_group`` tables.

    References
    ----------
    .. [1] Moore, D. A. (1999). Spatial diffusion of raccoon rabies in Pennsylvania, USA.
       *Preventive Veterinary Medicine* 40, 19-32 (trend surface of arrival times).
    .. [2] Cliff, A. D. et al. (1981). *Spatial Diffusion*, Cambridge University Press.

    Examples
    --------
    >>> import geopandas as gpd, numpy as np, pandas as pd
    >>> from shapely.geometry import box
    >>> xs, ys = np.meshgrid(np.arange(10), np.arange(10))
    >>> units = gpd.GeoDataFrame(geometry=[box(x * 10e3, y * 10e3, (x + 1) * 10e3,
    ...     (y + 1) * 10e3) for x, y in zip(xs.ravel(), ys.ravel())], crs="EPSG:3035",
    ...     index=pd.Index([f"u{i}" for i in range(100)], name="unit_id"))
    >>> weeks = (units.centroid.x / 1000 / 5).round()  # a planar front at 5 km/week
    >>> first = pd.Timestamp("2026-03-02") + pd.to_timedelta(weeks * 7, unit="D")
    >>> v = spread_velocity(first, units, seed=1)
    >>> round(v.km_per_week, 1), v.method, v.n_units
    (5.0, 'trend_surface', 100)
    """
    if method not in VELOCITY_METHODS:
        raise ValueError(
            f"'method' needs to be one of {VELOCITY_METHODS}. {method!r} was given instead."
        )
    if not 0 < conf < 1:
        raise ValueError(f"'conf' needs to be between 0 and 1. {conf!r} was given instead.")
    table, by_group = estimate(
        centroids_km(units),
        pd.to_datetime(first),
        origin,
        None if groups is None else groups_of(groups, units),
        degree=degree,
        conf=conf,
        draws=draws,
        rng=np.random.default_rng(seed),
    )
    head = table.loc[method]
    return Velocity(
        km_per_week=float(head["km_per_week"]),
        lower=float(head["lower"]),
        upper=float(head["upper"]),
        n_units=int(head["n_units"]),
        method=method,
        by_method=table,
        by_group=by_group,
        conf=conf,
    )


# --- space-time interaction -----------------------------------------------------------------
def knox(
    points,
    times,
    *,
    distance: float,
    interval: float | pd.Timedelta,
    permutations: int = 999,
    seed: int | None = None,
) -> KnoxResult:
    """Knox test of space-time interaction on case points (a line list with locations).

    Counts the pairs of cases within ``distance`` of each other *and* within ``interval`` in
    time (both inclusive, as in pointpats) and compares the count with chance: a Monte Carlo
    p-value from shuffling the times over the cases, and the Poisson approximation with mean
    ``space_pairs * time_pairs / pairs``. A small p-value says cases near in space tend to be
    near in time, i.e. spread is local.

    Parameters
    ----------
    points : GeoSeries, GeoDataFrame of points, or array (n, 2)
        Case locations in a projected CRS; ``distance`` is in the same units.
    times : array-like
        Numbers (days, weeks...) or datetimes (then converted to days).
    distance : float
        Closeness in space.
    interval : float or pandas.Timedelta
        Closeness in time, in the units of ``times`` (a Timedelta for datetimes).
    permutations : int, default 999
        Shuffles for the Monte Carlo p-value (0 to skip it; ``p_sim`` is then NaN).
    seed : int, optional
        Seed for ``numpy.random.default_rng``.

    Returns
    -------
    KnoxResult

    References
    ----------
    .. [1] Knox, E. G. (1964). The detection of space-time interactions. *Journal of the
       Royal Statistical Society C* 13(1), 25-30.
    .. [2] Rogerson, P. A. (2001). *Statistical Methods for Geography*. Sage.

    Examples
    --------
    >>> import numpy as np
    >>> xy = np.array([[0, 0], [1, 0], [50, 50], [51, 50]])
    >>> r = knox(xy, [0, 1, 0, 30], distance=2, interval=3, permutations=99, seed=1)
    >>> r.statistic, r.space_pairs, r.time_pairs, r.pairs
    (1, 2, 3, 6)
    """
    xy, t, interval = as_arrays(points, times, interval)
    return KnoxResult(**knox_test(xy, t, float(distance), interval, permutations, seed))
