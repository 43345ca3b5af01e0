"""Counts summed over time windows (month, cumulative, recent weeks) and rates over larger areas."""

from __future__ import annotations

import warnings
from collections.abc import Sequence

import numpy as np
import pandas as pd

from ..errors import DataWarning, InputError
from ._align import align_units, unit_positions
from ._windows import sum_windows, window_masks
from .rates import (
    WINDOW_FIELDS,
    _attack_rates_one,
    _check_conf,
    _counts,
    _per_window,
    _population,
)


# --- windows from the counts table -----------------------------------------------------------
def _floats(column: pd.Series, rows: np.ndarray) -> np.ndarray:
    """``column`` at ``rows`` as floats, ``<NA>`` as NaN."""
    taken = pd.Series(column.array.take(rows))  # no index of every row beside the values
    return taken.astype("Float64").to_numpy(dtype=float, na_value=np.nan)


def window_counts(
    counts: pd.DataFrame,
    as_of: object,
    *,
    windows_weeks: Sequence[int] = (4,),
    month: str | pd.Period | None = None,
    units: pd.Index | None = None,
) -> pd.DataFrame:
    """Sum the counts known on ``as_of`` per unit over the standard time windows.

    Windows: ``cumulative`` (every week since the outbreak's first report up to ``as_of``),
    ``last_<N>w`` for each N in ``windows_weeks`` (the N complete weeks ending with the last
    week finished by ``as_of``), and ``month`` (the weeks of ``month``, each week belonging to
    the month of its fourth day) when ``month`` is given.

    Parameters
    ----------
    counts : pandas.DataFrame
        The counts contract: ``unit_id week cases deaths received source row`` with every
        accepted version; the as-of view is taken with :func:`marchland.inputs.reports.as_of`.
    as_of : date-like
        The date the data are read as known on.
    windows_weeks : sequence of int
        Lengths of the trailing windows, in weeks.
    month : str or pandas.Period, optional
        A calendar month such as ``"2026-03"``.
    units : pandas.Index, optional
        Every unit to report on; units with no report get ``<NA>``. By default the units
        that appear in ``counts``.

    Returns
    -------
    pandas.DataFrame
        Indexed by unit_id with two column levels ``(field, window)``; fields are
        ``cases``, ``deaths``, ``cases_with_deaths`` (cases of the weeks whose deaths were
        reported, the CFR denominator) and ``weeks_reported``. Sums run over the weeks that
        were reported: a unit-week absent from the table is not reported, not zero, and a
        unit with no reported week in a window gets ``<NA>`` there. ``weeks_reported`` says
        how many weeks each sum covers; the frame's ``attrs["weeks_in_window"]`` gives how
        many weeks each window spans.

    Examples
    --------
    >>> c = pd.DataFrame({"unit_id": ["a", "a", "a", "b"],
    ...                   "week": pd.to_datetime(["2026-02-23", "2026-03-02", "2026-03-09",
    ...                                           "2026-03-09"]),
    ...                   "cases": pd.array([4, 2, 1, 0], dtype="Int64"),
    ...                   "deaths": pd.array([0, 1, pd.NA, 0], dtype="Int64"),
    ...                   "received": pd.to_datetime(["2026-03-01", "2026-03-08",
    ...                                               "2026-03-16", "2026-03-16"]),
    ...                   "source": "x", "row": [1, 2, 3, 4]})
    >>> w = window_counts(c, "2026-03-31", windows_weeks=(2,), month="2026-03")
    >>> w["cases"]
    window   cumulative  last_2w  month
    unit_id
    a                 7     <NA>      3
    b                 0     <NA>      0
    >>> w["weeks_reported"]["month"].tolist()
    [2, 1]
    """
    from ..inputs.reports import as_of_rows

    as_of_ts = pd.Timestamp(as_of)
    # The view's rows and the four columns summed, not a copy of every column of the view.
    rows = as_of_rows(counts, as_of_ts)
    weeks = pd.Series(counts["week"].array.take(rows))
    current = (weeks <= as_of_ts).to_numpy()
    if not current.all():
        rows, weeks = rows[current], weeks[current].reset_index(drop=True)
    if units is None:
        units = pd.Index(pd.unique(counts["unit_id"]), name="unit_id")
    units = pd.Index(units, name="unit_id")
    unit_pos = unit_positions(counts["unit_id"], units)[rows]
    outside = unit_pos < 0
    if outside.any():
        bad = counts.iloc[rows[np.flatnonzero(outside)[0]]]
        raise InputError(
            f"counts name unit {bad['unit_id']!r}, which is not among the units",
            file=bad["source"],
            row=int(bad["row"]),
            column="unit_id",
            value=bad["unit_id"],
        )
    masks, spans, last_complete = window_masks(weeks, as_of_ts, windows_weeks, month)
    del weeks
    fields = sum_windows(
        unit_pos, _floats(counts["cases"], rows), _floats(counts["deaths"], rows), units, masks
    )
    out = pd.DataFrame(fields, index=units)
    out.columns = pd.MultiIndex.from_tuples(out.columns, names=["field", "window"])
    out = out.reindex(
        columns=pd.MultiIndex.from_product([WINDOW_FIELDS, list(masks)], names=["field", "window"])
    )
    out.attrs["weeks_in_window"] = spans
    out.attrs["as_of"] = as_of_ts
    out.attrs["last_complete_week"] = last_complete
    return out


# --- up the hierarchy ------------------------------------------------------------------------
def _warn_no_population(cases, population) -> None:
    """Warn (once) naming reported units whose population is missing: left out of both sums."""
    c = cases if isinstance(cases, pd.DataFrame) else cases.to_frame()
    p = population if isinstance(population, pd.DataFrame) else population.to_frame()
    has_cases = c.notna().any(axis=1)
    no_pop = p.reindex(c.index).isna().any(axis=1)
    bad = c.index[has_cases & no_pop]
    if len(bad):
        shown = ", ".join(map(str, bad[:5])) + (" ..." if len(bad) > 5 else "")
        warnings.warn(
            f"{len(bad)} reported unit(s) have no population and are left out of both the "
            f"cases and the population of their group: {shown}",
            DataWarning,
            stacklevel=3,
        )


def _aggregate_one(
    cases: pd.Series, population: pd.Series, *, groups: pd.DataFrame, per: float, conf: float
) -> pd.DataFrame:
    pop_s = align_units(population, cases.index, "population", "cases")
    x = _counts(cases, "cases")
    pop = _population(pop_s)
    frames = []
    for level in groups.columns:
        key = groups[level].reindex(cases.index)
        if key.isna().any():
            unit = key.index[key.isna()][0]
            raise InputError(
                f"groups[{level!r}] has no group for unit {unit!r}", column=str(level), value=unit
            )
        reported = np.isfinite(x)
        # A reported unit without a population would add its cases but not its people and
        # inflate the rate; it is left out of both sums and counted in units_no_population.
        usable = reported & np.isfinite(pop)
        df = pd.DataFrame(
            {
                "group": key.to_numpy(),
                "x": np.where(usable, x, np.nan),
                "pop": pop,
                "reported": reported,
                "no_pop": reported & ~usable,
            }
        )
        g = df.groupby("group", sort=True)
        summed = pd.DataFrame(
            {
                "cases": g["x"].sum(min_count=1),
                "population": g["pop"].sum(min_count=1),
                "units": g.size(),
                "units_reported": g["reported"].sum(),
                "units_no_population": g["no_pop"].sum(),
            }
        )
        # Rates come from summed counts over summed population, never from averaged rates;
        # population counts only the units whose cases were reported (and that have one).
        pop_rep = df[usable].groupby("group")["pop"].sum().reindex(summed.index)
        rates = _attack_rates_one(summed["cases"], pop_rep.fillna(0.0), per=per, conf=conf)
        rates["units"] = summed["units"].astype("int64")
        rates["units_reported"] = summed["units_reported"].astype("int64")
        rates["units_no_population"] = summed["units_no_population"].astype("int64")
        rates["population_all"] = summed["population"]
        rates.index = pd.MultiIndex.from_arrays(
            [np.repeat(str(level), len(rates)), rates.index], names=["level", "group"]
        )
        frames.append(rates)
    return pd.concat(frames)


def aggregate_rates(
    cases: pd.Series | pd.DataFrame,
    population: pd.Series | pd.DataFrame,
    groups: pd.Series | pd.DataFrame | None = None,
    *,
    per: float = 100_000,
    conf: float = 0.95,
) -> pd.DataFrame:
    """Attack rates of provinces, countries or the whole region, from summed counts.

    Parameters
    ----------
    cases, population : pandas.Series or pandas.DataFrame
        Per unit_id, as for :func:`attack_rates` (DataFrames: one column per window).
    groups : pandas.Series or pandas.DataFrame, optional
        The group of each unit_id (e.g. ``units["parent_id"]``), or one column per level
        (e.g. ``province``, ``country``). ``None`` gives one row for the whole region.
    per, conf : float
        As for :func:`attack_rates`.

    Returns
    -------
    pandas.DataFrame
        Indexed by ``(level, group)`` with ``cases population rate lower upper`` plus
        ``units`` (units in the group), ``units_reported`` (units whose cases were reported),
        ``units_no_population`` (reported units left out because their population is
        missing) and ``population_all`` (population of every unit in the group). ``cases``
        sums the reported units that have a population and ``population`` is the population
        of those same units, so the rate is neither diluted by units that did not report nor
        inflated by cases without a denominator; a ``DataWarning`` names any unit left out.

    Examples
    --------
    >>> cases = pd.Series({"TVR-01-01": 5, "TVR-01-02": 0, "OSK-01-01": 20})
    >>> pop = pd.Series({"TVR-01-01": 10_000, "TVR-01-02": 40_000, "OSK-01-01": 50_000})
    >>> country = pd.Series({"TVR-01-01": "TVR", "TVR-01-02": "TVR", "OSK-01-01": "OSK"})
    >>> aggregate_rates(cases, pop, country.rename("country"))["rate"].tolist()
    [40.0, 10.0]
    >>> pop2 = pop.astype(float).where(pop.index != "TVR-01-02")
    >>> cases2 = pd.Series({"TVR-01-01": 5, "TVR-01-02": 5, "OSK-01-01": 20})
    >>> import warnings
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     out = aggregate_rates(cases2, pop2, country.rename("country"))
    >>> out[["cases", "rate", "units_no_population"]].to_numpy().tolist()
    [[20, 40.0, 0], [5, 50.0, 1]]
    """
    if groups is None:
        index = cases.index
        groups = pd.DataFrame({"region": "all"}, index=index)
    elif isinstance(groups, pd.Series):
        groups = groups.to_frame(groups.name if groups.name is not None else "group")
    _warn_no_population(cases, population)
    if per <= 0:
        raise ValueError(f"'per' needs to be > 0. {per!r} was given instead.")
    _check_conf(conf)
    return _per_window(_aggregate_one, cases, population, groups=groups, per=per, conf=conf)
