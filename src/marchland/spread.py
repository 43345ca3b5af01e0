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

import pandas as pd

from ._timeline import build_timeline, confirmed, episodes
from .reports import as_of as _as_of_view

FIRST_WEEK = "first_week"


def _check_rules(min_cases, confirm, reintroduction_weeks) -> tuple[int, int] | None:
    if not isinstance(min_cases, int) or isinstance(min_cases, bool) or min_cases < 1:
        raise ValueError(f"'min_cases' needs to be a whole number >= 1. {min_cases!r} was given.")
    if confirm is not None:
        try:
            k, n = (int(v) for v in confirm)
        except (TypeError, ValueError):
            raise ValueError(
                f"'confirm' needs to be a pair (k, n): k positive weeks within n consecutive "
                f"weeks. {confirm!r} was given instead."
            ) from None
        if not 1 <= k <= n:
            raise ValueError(f"'confirm' needs 1 <= k <= n. {confirm!r} was given instead.")
        confirm = (k, n)
    if reintroduction_weeks is not None and (
        not isinstance(reintroduction_weeks, int) or reintroduction_weeks < 1
    ):
        raise ValueError(
            "'reintroduction_weeks' needs to be a whole number >= 1 or None. "
            f"{reintroduction_weeks!r} was given instead."
        )
    return confirm


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
        A week is *positive* when its reported cases are at least this.
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
    confirm = _check_rules(min_cases, confirm, reintroduction_weeks)
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
    confirm = _check_rules(min_cases, confirm, reintroduction_weeks)
    tl = build_timeline(_as_of_view(counts, as_of), min_cases)
    return episodes(tl, confirm, reintroduction_weeks)
