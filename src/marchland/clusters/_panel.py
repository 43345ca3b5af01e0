"""The unit x week case matrix of the study window: the one place counts become a panel.

The integrator can feed :func:`emerging_clusters` a filled panel (for example nowcast-adjusted
counts) through its ``panel`` argument instead; both paths end in :func:`check_panel`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import InputError
from ..inputs.reports import as_of as _as_of

WEEK = pd.Timedelta(weeks=1)


def case_panel(
    counts: pd.DataFrame,
    ids: pd.Index,
    *,
    as_of: object,
    window_weeks: int,
    end_week: object = None,
) -> tuple[pd.DataFrame, list[str]]:
    """Cases per unit (rows) and week (columns) over the window, as known on ``as_of``.

    The window ends at ``end_week`` or, by default, at the latest week that at least half the
    units reporting lately (any week of the last ``window_weeks``) had reported by ``as_of``
    (the newest weeks are often reported by a few units only).
    A unit missing any week of the window is dropped (missing is not zero) and listed in the
    second value returned.
    """
    known = _as_of(counts, as_of)
    known = known[known["unit_id"].isin(ids)]
    if known.empty:
        first = counts["received"].min() if len(counts) else None
        raise InputError(
            f"no counts had been received by as_of={pd.Timestamp(as_of).date()}; "
            f"the first report was received on {pd.Timestamp(first).date() if first else None}",
            value=str(as_of),
        )
    if end_week is None:
        per_week = known.groupby("week")["unit_id"].nunique()
        # Units reporting at all lately (a country may not have started reporting yet).
        recent = known[known["week"] > per_week.index.max() - WEEK * window_weeks]
        enough = per_week[per_week >= 0.5 * recent["unit_id"].nunique()]
        end = enough.index.max() if len(enough) else per_week.index.max()
    else:
        end = pd.Timestamp(end_week)
    weeks = pd.DatetimeIndex([end - WEEK * j for j in range(window_weeks - 1, -1, -1)])
    part = known[known["week"].isin(weeks)]
    wide = part.pivot(index="unit_id", columns="week", values="cases")
    wide = wide.reindex(index=ids, columns=weeks).astype("Float64")
    have = wide.notna()
    # Weeks before any report in the data cannot be known for anybody: shorten the window.
    first_week = known["week"].min()
    wide = wide.loc[:, weeks >= first_week]
    have = have.loc[:, weeks >= first_week]
    complete = have.all(axis=1)
    dropped = [str(u) for u in wide.index[~complete]]
    panel = wide.loc[complete].astype(float)
    panel.columns.name = "week"
    return panel, dropped


def check_panel(panel: pd.DataFrame, max_weeks: int) -> pd.DataFrame:
    """Check a unit x week panel of cases: whole numbers >= 0, no gaps, enough weeks."""
    if not isinstance(panel, pd.DataFrame):
        raise TypeError(f"'panel' needs to be a DataFrame; {type(panel).__name__} was given.")
    values = panel.to_numpy(dtype=float, na_value=np.nan)
    if np.isnan(values).any():
        raise InputError(
            "the case panel has unknown unit-weeks; fill them (e.g. with a nowcast) or leave "
            "'panel' unset so units with gaps are dropped",
            column="panel",
        )
    if (values < 0).any() or (np.round(values) != values).any():
        raise InputError("panel cases must be whole numbers >= 0", column="panel")
    n_units, n_weeks = values.shape
    if n_weeks <= max_weeks:
        raise InputError(
            f"the study window has {n_weeks} week(s) with data; max_weeks={max_weeks} needs at "
            f"least {max_weeks + 1} (the weeks before the cylinders set the baseline)",
            column="max_weeks",
            value=max_weeks,
        )
    if n_units < 2:
        raise InputError(
            f"a space-time scan needs at least 2 units with complete reports; {n_units} given",
            column="unit_id",
        )
    return pd.DataFrame(values, index=panel.index.astype(str), columns=panel.columns)
