"""From counts (or a ready panel) to a fitted model at one origin; shared by forecast and backtest.

Week conventions: the week grid is anchored on the weeks in the data (ISO Monday or the Sunday
calendar alike). A week is over once its seventh day has passed; the last week over by
``as_of`` is the forecast origin, and horizon ``h`` is the ``h``-th week after it.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import DataWarning, InputError
from ..inputs.reports import as_of_rows
from ..stats._align import unit_positions
from ._model import Fit, ModelSpec, Problem, fill_lags
from ._weights import OrderMatrix

WEEK = pd.Timedelta(days=7)
MIN_FIT_WEEKS = 8  # fewer known weeks than this cannot pin down five or more parameters
DEFAULT_WINDOW_WEEKS = 8  # best demo CRPS of 8, 16, 26 weeks in backtest_forecast (benchmarks/)
DEFAULT_SKIP_RECENT_WEEKS = 0  # leaving out 1 week scored worse on the demo (benchmarks/)
POPULATION_PER = 100_000  # endemic rate nu is per 100,000 people per week


def weeks_panel(counts: pd.DataFrame, ids: pd.Index, date) -> pd.DataFrame:
    """Cases as known on ``date``: unit x week, NaN where nothing was reported.

    Columns are the weeks with a known count of a unit in ``ids``. Built from the as-of rows'
    three columns by position: the as-of copy of every column and a pivot of it took about
    0.45 GB at 50,000 units for a panel of 40 MB (the same panel).
    """
    rows = as_of_rows(counts, date)
    cases = counts["cases"].array[rows].to_numpy(dtype=float, na_value=np.nan)
    unit = unit_positions(counts["unit_id"], pd.Index(ids))[rows]
    keep = (unit >= 0) & ~np.isnan(cases)
    week = counts["week"].to_numpy()[rows[keep]]
    del rows
    weeks, week = _week_codes(week)
    out = np.full((len(ids), len(weeks)), np.nan)
    out[unit[keep], week] = cases[keep]
    return pd.DataFrame(out, index=ids, columns=pd.DatetimeIndex(weeks, name="week"))


def _week_codes(week: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``np.unique(week, return_inverse=True)``, by whole days from the first when it can.

    Week starts are whole days a few hundred apart: a count per day finds the distinct ones
    without sorting millions of rows (the sort's copies were 0.2 GB at 50,000 units).
    """
    if len(week) == 0:
        return np.unique(week, return_inverse=True)
    first = week.min()
    days, rest = np.divmod(week - first, np.timedelta64(1, "D"))
    if rest.any() or days.max() > 100_000:
        return np.unique(week, return_inverse=True)
    seen = np.bincount(days, minlength=1) > 0
    code = np.cumsum(seen) - 1
    return first + np.flatnonzero(seen) * np.timedelta64(1, "D"), code[days]


def last_week_over(anchor: pd.Timestamp, date: pd.Timestamp) -> pd.Timestamp:
    """Start of the last week of the data's calendar fully over by ``date``."""
    k = int(np.floor((date - WEEK - anchor) / WEEK))
    return anchor + k * WEEK


def week_angles(weeks: pd.DatetimeIndex) -> np.ndarray:
    """Position of each week in the year, in radians (for the sin/cos seasonal terms)."""
    return 2 * np.pi * (weeks.day_of_year.to_numpy() - 1) / 365.25


@dataclass(frozen=True)
class Origin:
    """Everything known at one forecast origin, with the model fitted to it."""

    fit: Fit
    origin_week: pd.Timestamp  # last week over; horizon 1 is the week after
    fit_end: pd.Timestamp
    start: np.ndarray  # counts in the last fitted week (unknown -> NaN)
    e: np.ndarray
    z: np.ndarray
    orders: OrderMatrix
    window_weeks: int

    def endemic(self, weeks: pd.DatetimeIndex) -> np.ndarray:
        """Endemic mean (steps, n) for the given weeks."""
        from ._model import endemic_design

        x = endemic_design(week_angles(weeks), self.z, self.fit.spec.seasonal)
        return (self.e[:, None] * np.exp(x @ self.fit.beta)).T


def check_units(units) -> tuple[pd.Index, np.ndarray]:
    """Return unit ids and the population offset (per 100,000), with clear errors."""
    if "population" not in units.columns:
        raise InputError("units need a 'population' column for the endemic offset")
    pop = pd.to_numeric(units["population"], errors="coerce").to_numpy(dtype=float)
    bad = ~np.isfinite(pop) | (pop <= 0)
    if bad.any():
        uid = units.index[np.argmax(bad)]
        raise InputError(
            f"population must be a positive number for every unit; {bad.sum()} unit(s) "
            "have none or zero",
            column="population",
            value=uid,
        )
    return pd.Index(units.index, name="unit_id"), pop / POPULATION_PER


def island_warning(bg, ids: pd.Index, stacklevel: int) -> None:
    """Say which units have no neighbourhood part."""
    islands = [u for u in bg.islands if u in set(ids)]
    if islands:
        warnings.warn(
            f"{len(islands)} unit(s) have no neighbour in the graph (islands: "
            f"{islands[:5]}{'...' if len(islands) > 5 else ''}); their neighbourhood part is 0, "
            "they neither receive nor pass on cases through it",
            DataWarning,
            stacklevel=stacklevel,
        )


def fit_origin(
    panel: pd.DataFrame,
    e: np.ndarray,
    orders: OrderMatrix,
    origin_week: pd.Timestamp,
    *,
    window_weeks: int,
    skip_recent_weeks: int,
    spec: ModelSpec,
    covariates: pd.DataFrame | None = None,
    groups=None,
) -> Origin:
    """Fit the model to the ``window_weeks`` weeks ending ``skip_recent_weeks`` before origin.

    ``groups`` labels each unit's negative binomial size group (``spec.dispersion``).
    """
    if window_weeks < MIN_FIT_WEEKS:
        raise ValueError(
            f"'window_weeks' needs to be at least {MIN_FIT_WEEKS}. {window_weeks!r} was given."
        )
    fit_end = origin_week - skip_recent_weeks * WEEK
    weeks = pd.date_range(end=fit_end, periods=window_weeks + 1, freq="7D")
    block = panel.reindex(columns=weeks).to_numpy(dtype=float)
    known_weeks = int(np.isfinite(block[:, 1:]).any(axis=0).sum())
    if known_weeks < MIN_FIT_WEEKS:
        raise InputError(
            f"too few weeks to fit the forecast model: {known_weeks} week(s) with reports in the "
            f"{window_weeks} weeks up to {fit_end.date()}; at least {MIN_FIT_WEEKS} are needed",
            column="week",
        )
    if np.nansum(block[:, 1:]) == 0:
        raise InputError(
            f"no cases reported in the {window_weeks} weeks up to {fit_end.date()}: the model "
            "cannot be fitted to all-zero counts (every forecast would be 0)",
            column="cases",
        )
    z = np.zeros((len(e), 0)) if covariates is None else covariates.to_numpy(dtype=float)
    names = () if covariates is None else tuple(covariates.columns)
    prob = Problem.build(block, e, z, week_angles(weeks[1:]), orders, spec, names, groups)
    fit = prob.fit(names)
    # Start state: last known count, carried forward at most a few weeks (NaN if none).
    start = fill_lags(panel.reindex(columns=weeks).to_numpy(dtype=float))[:, -1]
    return Origin(fit, origin_week, fit_end, start, e, z, orders, window_weeks)
