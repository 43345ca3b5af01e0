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

from ..inputs.reports import as_of_rows
from ._arrival import (
    FIRST_WEEK,
    centroids_km,
)
from ._knox import KnoxResult, as_arrays, knox_test
from ._timeline import build_timeline, check_rules, confirmed, episodes
from ._velocity import VELOCITY_METHODS, Velocity, estimate, groups_of

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
    tl = build_timeline(counts, as_of_rows(counts, as_of), min_cases)
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
    tl = build_timeline(counts, as_of_rows(counts, as_of), min_cases)
    return episodes(tl, confirm, reintroduction_weeks)


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
