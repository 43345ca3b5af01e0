"""Reading weekly report files: shapes, place-name matching, epi weeks, revisions, rejects.

This module starts with the as-of view every analysis relies on; the readers land beside it.
"""

from __future__ import annotations

import pandas as pd

COUNT_COLUMNS = ("unit_id", "week", "cases", "deaths", "received", "source", "row")


def as_of(counts: pd.DataFrame, date: object = None) -> pd.DataFrame:
    """The data as known on ``date``: per (unit_id, week) the latest row received by then.

    Parameters
    ----------
    counts : pandas.DataFrame
        Counts with every accepted version (columns as in ``COUNT_COLUMNS``).
    date : date-like, optional
        Keep rows received on or before this date; ``None`` keeps every row.

    Returns
    -------
    pandas.DataFrame
        One row per reported (unit_id, week), sorted by unit_id and week. Unit-weeks nobody had
        reported by ``date`` are absent (missing is not zero).

    Examples
    --------
    >>> c = pd.DataFrame({"unit_id": ["a", "a", "a"],
    ...                   "week": pd.to_datetime(["2026-01-05"] * 2 + ["2026-01-12"]),
    ...                   "cases": pd.array([3, 5, 1], dtype="Int64"),
    ...                   "deaths": pd.array([0, 1, 0], dtype="Int64"),
    ...                   "received": pd.to_datetime(["2026-01-13", "2026-01-27", "2026-01-20"]),
    ...                   "source": "x", "row": [1, 2, 3]})
    >>> as_of(c, "2026-01-21")["cases"].tolist()
    [3, 1]
    >>> as_of(c)["cases"].tolist()
    [5, 1]
    """
    out = counts
    if date is not None:
        out = out[out["received"] <= pd.Timestamp(date)]
    # Stable sort: for equal received dates the later row of the later file wins.
    out = out.sort_values(["unit_id", "week", "received"], kind="stable")
    out = out.drop_duplicates(["unit_id", "week"], keep="last")
    return out.reset_index(drop=True)
