"""Unit x week arrays behind first cases and episodes (private to :mod:`~marchland.spread.arrival`).

The as-of counts are spread onto a dense unit x week grid so that the confirmation window
and the quiet-period rule are array operations (cumulative sums), with no loop over units.
A cell is *reported* only when a row for that unit-week exists: a missing week is not a zero.
"""

from __future__ import annotations

from dataclasses import dataclass
from numbers import Integral

import numpy as np
import pandas as pd

from ..stats._align import unit_positions

WEEK = pd.Timedelta(days=7)


def check_rules(min_cases, confirm, reintroduction_weeks) -> tuple[int, int] | None:
    """Validate the rules of :func:`~marchland.spread.first_cases`; return ``confirm`` as (k, n)."""
    if not isinstance(min_cases, Integral) or isinstance(min_cases, bool) or min_cases < 1:
        raise ValueError(f"'min_cases' needs to be a whole number >= 1. {min_cases!r} was given.")
    if isinstance(confirm, str):
        confirm = [confirm]  # refused below: a pair of numbers is needed, not text
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
        not isinstance(reintroduction_weeks, Integral) or reintroduction_weeks < 1
    ):
        raise ValueError(
            "'reintroduction_weeks' needs to be a whole number >= 1 or None. "
            f"{reintroduction_weeks!r} was given instead."
        )
    return confirm


@dataclass(frozen=True)
class Timeline:
    """Dense view of one as-of count table.

    ``positive[u, t]``: a report with ``cases >= min_cases``; ``quiet[u, t]``: a report with
    fewer cases (a reported zero, or below the threshold); neither: no report that week.
    """

    ids: pd.Index
    weeks: pd.DatetimeIndex
    cases: np.ndarray
    positive: np.ndarray
    quiet: np.ndarray


def build_timeline(counts: pd.DataFrame, rows: np.ndarray, min_cases: int) -> Timeline:
    """Spread the as-of view (``counts`` at ``rows``, one row per unit-week) onto a grid.

    Only the view's ids, weeks and cases are taken from ``counts``: no copy of the view.
    """
    # Arrays taken at rows, not Series: those would carry an index of every row as well.
    cases_in = counts["cases"].array.take(rows)
    reported = ~np.asarray(cases_in.isna())
    if not reported.all():
        rows, cases_in = rows[reported], cases_in[reported]
    del reported
    ids = pd.Index(pd.unique(counts["unit_id"].array.take(rows)), name="unit_id").sort_values()
    if len(rows) == 0:
        empty = np.zeros((len(ids), 0), dtype=bool)
        return Timeline(ids, pd.DatetimeIndex([]), empty.astype(float), empty, empty)
    week = pd.DatetimeIndex(counts["week"].array.take(rows))
    start = week.min()
    # Whole weeks apart, checked on the integer ticks (no float temporaries of every row);
    # anything else takes the tolerant float check.
    ticks = (week - start).asi8
    col, rest = np.divmod(ticks, WEEK.as_unit(week.unit).value)
    del ticks
    if rest.any():
        offset = (week - start) / WEEK
        if not np.allclose(offset, np.round(offset)):
            raise ValueError(
                "'week' values need to be whole weeks apart (one calendar, week start dates); "
                "found dates that are not"
            )
        col = np.round(offset).astype(int)
    del rest
    weeks = pd.date_range(start, periods=int(col.max()) + 1, freq="7D", unit=week.unit)
    del week
    row = unit_positions(counts["unit_id"], ids)[rows]
    cases = np.full((len(ids), len(weeks)), np.nan)
    cases[row, col] = cases_in.to_numpy(dtype=float)
    reported = ~np.isnan(cases)
    positive = reported & (np.nan_to_num(cases) >= min_cases)
    quiet = reported & ~positive
    return Timeline(ids, weeks, cases, positive, quiet)


def confirmed(positive: np.ndarray, confirm: tuple[int, int] | None) -> np.ndarray:
    """Positive weeks that open a run of at least k positive weeks within n calendar weeks.

    A week not reported inside the window does not count towards k (nor against it): the rule
    needs k reported positive weeks, so confirmation waits until they are reported.
    """
    if confirm is None:
        return positive
    k, n = confirm
    # Forward window sum [t, t + n - 1] from a cumulative sum padded with n zero columns.
    padded = np.concatenate([positive, np.zeros((positive.shape[0], n), dtype=bool)], axis=1)
    csum = np.concatenate(
        [np.zeros((positive.shape[0], 1), dtype=int), np.cumsum(padded, axis=1)], axis=1
    )
    width = positive.shape[1]
    window = csum[:, n : n + width] - csum[:, :width]
    return positive & (window >= k)


def quiet_run(positive: np.ndarray, quiet: np.ndarray) -> np.ndarray:
    """Count reported quiet weeks since the last positive week, at the end of each week.

    Counted from the start of the grid where there was no positive week yet; 0 on a positive
    week. Weeks with no report add nothing: nobody can say a unit had no cases on a week it did
    not report. The one definition of "quiet for a while" behind spread's episodes and risk's
    re-introduction candidates.
    """
    nt = positive.shape[1]
    quiet_cum = np.cumsum(quiet, axis=1)
    last = np.maximum.accumulate(np.where(positive, np.arange(nt), -1), axis=1)
    base = np.take_along_axis(quiet_cum, np.maximum(last, 0), axis=1)
    return quiet_cum - np.where(last >= 0, base, 0)


def episode_over(
    positive: np.ndarray,
    quiet: np.ndarray,
    quiet_weeks: int,
    *,
    before: np.ndarray | None = None,
) -> np.ndarray:
    """Where, at the end of week ``t``, the unit's latest episode is over (or never began).

    Over means at least ``quiet_weeks`` reported quiet weeks since its last positive week, so
    a positive week right after it starts a new episode in :func:`episodes`. ``before`` marks
    units already positive before the grid starts (their quiet weeks count from the start).
    """
    seen = np.logical_or.accumulate(positive, axis=1)
    if before is not None:
        seen = seen | np.asarray(before, dtype=bool)[:, None]
    return ~seen | (quiet_run(positive, quiet) >= quiet_weeks)


def episodes(tl: Timeline, confirm: tuple[int, int] | None, quiet_weeks: int | None):
    """Episodes as a long table: one row per (unit, episode).

    Positive weeks are grouped into one episode until ``quiet_weeks`` reported non-positive
    weeks pass between two positive weeks (``None``: never, a single episode). An episode
    counts only if it holds a confirmed week; it starts at its first confirmed week.
    """
    ok = confirmed(tl.positive, confirm)
    u, t = np.nonzero(tl.positive)  # row-major: sorted by unit then week
    cols = ["unit_id", "episode", "start", "end", "weeks_positive", "cases"]
    if len(u) == 0:
        return pd.DataFrame({c: [] for c in cols}).astype(
            {"start": "datetime64[ns]", "end": "datetime64[ns]"}
        )
    new_unit = np.r_[True, u[1:] != u[:-1]]
    if quiet_weeks is None:
        new_ep = new_unit
    else:
        # A positive week opens a new episode when the one before it was already over; a
        # unit's later positive weeks have t >= 1, so t - 1 is a week of the same unit.
        over = episode_over(tl.positive, tl.quiet, quiet_weeks)
        new_ep = new_unit | over[u, np.maximum(t - 1, 0)]
    ep = np.cumsum(new_ep)
    long = pd.DataFrame(
        {
            "ep": ep,
            "unit": u,
            "t": t,
            "ok_t": np.where(ok[u, t], t, np.iinfo(np.int64).max),
            "cases": tl.cases[u, t],
        }
    )
    g = long.groupby("ep", sort=True).agg(
        unit=("unit", "first"),
        first_ok=("ok_t", "min"),
        end=("t", "max"),
        weeks_positive=("t", "size"),
        cases=("cases", "sum"),
    )
    g = g[g["first_ok"] < np.iinfo(np.int64).max]
    out = pd.DataFrame(
        {
            "unit_id": tl.ids[g["unit"].to_numpy()],
            "start": tl.weeks[g["first_ok"].to_numpy()],
            "end": tl.weeks[g["end"].to_numpy()],
            "weeks_positive": g["weeks_positive"].to_numpy(),
            "cases": g["cases"].to_numpy().astype(int),
        }
    )
    out.insert(1, "episode", out.groupby("unit_id").cumcount() + 1)
    return out.reset_index(drop=True)
