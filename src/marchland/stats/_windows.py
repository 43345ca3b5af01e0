"""Windows of weeks and sums over them (private to :mod:`marchland.stats.rates`).

:func:`marchland.stats.totals.window_counts` checks its inputs and takes the as-of view; this module
picks each window's weeks and sums the reported rows per unit in one ``bincount`` per field,
with no loop over units or weeks.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from ..inputs.weeks import month_weeks, week_month


def window_masks(
    weeks: pd.Series,
    as_of: pd.Timestamp,
    windows_weeks: Sequence[int],
    month: str | pd.Period | None,
) -> tuple[dict[str, np.ndarray], dict[str, int | None], pd.Timestamp]:
    """Rows of each window, the weeks each window spans, and the last complete week."""
    # The calendar's first weekday comes from the data (Monday for ISO, Sunday otherwise).
    start_day = int(weeks.dt.day_of_week.iloc[0]) if len(weeks) else 0
    current = as_of.normalize() - pd.Timedelta(days=(as_of.day_of_week - start_day) % 7)
    last_complete = (
        current
        if as_of.normalize() >= current + pd.Timedelta(days=6)
        else (current - pd.Timedelta(days=7))
    )

    # Since outbreak start: every week reported up to as_of (the current week included).
    masks: dict[str, np.ndarray] = {"cumulative": np.ones(len(weeks), dtype=bool)}
    spans: dict[str, int | None] = {"cumulative": None}
    for n_weeks in windows_weeks:
        if int(n_weeks) < 1:
            raise ValueError(f"'windows_weeks' needs whole numbers >= 1. {n_weeks!r} given.")
        first = last_complete - pd.Timedelta(weeks=int(n_weeks) - 1)
        masks[f"last_{int(n_weeks)}w"] = ((weeks >= first) & (weeks <= last_complete)).to_numpy()
        spans[f"last_{int(n_weeks)}w"] = int(n_weeks)
    if month is not None:
        period = pd.Period(month, freq="M")
        masks["month"] = (week_month(weeks) == period).to_numpy()
        spans["month"] = len(month_weeks(period, start_day))
    return masks, spans, last_complete


def sum_windows(
    unit_pos: np.ndarray,
    cases: np.ndarray,
    deaths: np.ndarray,
    units: pd.Index,
    masks: dict[str, np.ndarray],
) -> dict[tuple[str, str], object]:
    """Per unit and window: sums over reported rows (``<NA>`` where none was reported).

    ``unit_pos`` gives each row's position in ``units``; ``cases`` and ``deaths`` are floats
    with NaN where not reported.
    """
    fields: dict[tuple[str, str], object] = {}
    n_units = len(units)
    for window, mask in masks.items():
        rep = mask & np.isfinite(cases)
        drep = rep & np.isfinite(deaths)
        n_rep = np.bincount(unit_pos[rep], minlength=n_units)
        n_drep = np.bincount(unit_pos[drep], minlength=n_units)
        s_cases = np.bincount(unit_pos[rep], weights=cases[rep], minlength=n_units)
        s_deaths = np.bincount(unit_pos[drep], weights=deaths[drep], minlength=n_units)
        s_cwd = np.bincount(unit_pos[drep], weights=cases[drep], minlength=n_units)
        fields[("cases", window)] = pd.array(np.where(n_rep > 0, s_cases, pd.NA), dtype="Int64")
        fields[("deaths", window)] = pd.array(np.where(n_drep > 0, s_deaths, pd.NA), dtype="Int64")
        fields[("cases_with_deaths", window)] = pd.array(
            np.where(n_drep > 0, s_cwd, pd.NA), dtype="Int64"
        )
        fields[("weeks_reported", window)] = n_rep
    return fields
