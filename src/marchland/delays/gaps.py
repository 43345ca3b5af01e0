"""Gaps are not zeros: the complete unit x week panel, and sums that never add a gap as 0.

A unit-week nobody reported is unknown. ``fill_gaps`` gives every unit of every week an
estimate and says where it came from; ``aggregate_panel`` sums the panel to provinces,
countries or the region and carries the estimated part (or flags the week incomplete).
"""

from __future__ import annotations

from functools import partial

import numpy as np
import pandas as pd

from ..errors import InputError
from ._groups import check_args, country_of, province_of
from ._pattern import to_final
from ._triangle import Cells, Versions, unit_cells

PANEL_STATUSES = ("reported", "nowcast", "imputed", "unknown")
#: Age (weeks) from which a week's count is taken as complete (default of fill_gaps).
MAX_DELAY_WEEKS = 8
AGG_BY = ("region", "country", "province")


def _rolling(values: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Sum and number of reported values over the ``n`` weeks before each week (U, T)."""
    ok = ~np.isnan(values)
    cs = np.concatenate([np.zeros((len(values), 1)), np.cumsum(np.nan_to_num(values), 1)], 1)
    cn = np.concatenate([np.zeros((len(values), 1)), np.cumsum(ok, 1)], 1)
    # Slices, not column gathers: cs[:, t] - cs[:, max(t - n, 0)], the first n less 0.
    nt = values.shape[1]
    s, c = cs[:, :nt].copy(), cn[:, :nt].copy()
    s[:, n:] -= cs[:, : max(nt - n, 0)]
    c[:, n:] -= cn[:, : max(nt - n, 0)]
    return s, c


def fill_gaps(
    counts: pd.DataFrame,
    units: pd.DataFrame,
    *,
    as_of: object,
    max_delay_weeks: int = MAX_DELAY_WEEKS,
    recent_weeks: int = 8,
) -> pd.DataFrame:
    """Complete unit x week panel of cases, each value marked by where it came from.

    A unit-week reported by ``as_of`` keeps its value ("reported"), scaled up by its country's
    revision pattern while it is younger than ``max_delay_weeks`` ("nowcast": chain-ladder
    factors of reported unit-weeks only, Mack 1993, so late *units* are not counted twice). An
    unreported unit-week is "imputed" by a ratio estimate: the unit's mean over its last
    ``recent_weeks`` reported weeks, divided by the same mean summed over the units of its
    country that did report that week, times those units' values. The ratio keeps the unit's
    usual share of its country while following the country's current level. If no unit of the
    country reported that week (the whole country silent, or not yet due), the unit's own recent
    mean is used: the last known level, carried forward no further than ``recent_weeks``.
    A unit with no reported week in that span stays "unknown" (``cases`` NaN).

    Parameters
    ----------
    counts : pandas.DataFrame
        Counts with every revision (``unit_id week cases received``).
    units : pandas.DataFrame
        Indexed by ``unit_id`` (the panel's units), with ``country``.
    as_of : date-like
        Date of the panel.
    max_delay_weeks : int
        Age from which a week is taken as complete.
    recent_weeks : int
        Weeks behind a unit's recent level.

    Returns
    -------
    pandas.DataFrame
        ``unit_id week country cases reported status``, one row per unit and week from its
        country's first reported week to the last week ended by ``as_of``; ``reported`` is
        NaN where nothing was reported, ``status`` one of ``PANEL_STATUSES``.

    References
    ----------
    Mack, T. (1993). ASTIN Bulletin 23(2), 213-225.
    Cochran, W. G. (1977). Sampling Techniques, 3rd ed., ch. 6 (ratio estimators).

    Examples
    --------
    >>> from marchland.pack import open_region
    >>> from marchland.demo import scenario_path
    >>> reg = open_region(scenario_path())
    >>> panel = fill_gaps(reg.counts, reg.units, as_of="2026-06-03")
    >>> sorted(panel["status"].unique())
    ['imputed', 'nowcast', 'reported']
    """
    stamp = check_args(counts, as_of, "unit", "chain-ladder", max_delay_weeks, 0.5)
    cells = unit_cells(counts, stamp, max_delay_weeks)
    ids, u_country, weeks, cases, latest, has, young, start = _fill(
        cells, units, max_delay_weeks, recent_weeks
    )
    status = np.where(
        has,
        np.where(young, "nowcast", "reported"),
        np.where(np.isnan(cases), "unknown", "imputed"),
    )
    u, t = np.nonzero(np.arange(len(weeks))[None, :] >= start[:, None])
    return pd.DataFrame(
        {
            "unit_id": ids.to_numpy()[u],
            "week": weeks[t],
            "country": u_country[u],
            "cases": cases[u, t],
            "reported": latest[u, t],
            "status": status[u, t],
        }
    )


def filled_cases(
    counts: pd.DataFrame | Versions,
    units: pd.DataFrame,
    *,
    as_of: object,
    max_delay_weeks: int = MAX_DELAY_WEEKS,
    recent_weeks: int = 8,
) -> tuple[pd.DatetimeIndex, np.ndarray]:
    """Return the ``cases`` of :func:`fill_gaps` as a units x weeks array, not a long table.

    For callers that need only the numbers (the border-risk backtest asks for one panel per
    origin week): building the long table's string columns costs more than the estimate.

    Parameters
    ----------
    counts : pandas.DataFrame or Versions
        As in :func:`fill_gaps`, or the versions arranged once for many dates
        (``delays._triangle.Versions(counts, max_delay_weeks)``; the same result, without
        sorting and placing every version again at each date).
    units, as_of, max_delay_weeks, recent_weeks
        As in :func:`fill_gaps`.

    Returns
    -------
    weeks : pandas.DatetimeIndex
        The panel's weeks.
    cases : numpy.ndarray
        ``(len(units), len(weeks))``, rows in the order of ``units``; NaN where
        :func:`fill_gaps` has no row or an unknown value.

    Examples
    --------
    >>> c = pd.DataFrame({"unit_id": ["a-1", "a-2", "a-1"],
    ...                   "week": pd.to_datetime(["2026-01-05", "2026-01-05", "2026-01-12"]),
    ...                   "cases": [4.0, 2.0, 6.0],
    ...                   "received": pd.to_datetime(["2026-01-13"] * 2 + ["2026-01-20"])})
    >>> u = pd.DataFrame({"country": ["A", "A"]}, index=["a-1", "a-2"])
    >>> weeks, cases = filled_cases(c, u, as_of="2026-01-21")
    >>> cases.shape
    (2, 2)
    >>> bool(np.isfinite(cases).all())
    True
    """
    if isinstance(counts, Versions):
        if counts.max_delay != max_delay_weeks:
            raise ValueError(
                f"the versions were arranged for max_delay_weeks={counts.max_delay}, "
                f"not {max_delay_weeks}"
            )
        stamp = pd.Timestamp(as_of)
        if not len(counts.received) or stamp < pd.Timestamp(int(counts.received.min()), unit="D"):
            raise InputError(
                f"as_of {stamp.date()} is before the first report was received: nothing was "
                "known then",
                column="received",
                value=str(stamp.date()),
            )
        cells_of = counts.cells
    else:
        stamp = check_args(counts, as_of, "unit", "chain-ladder", max_delay_weeks, 0.5)
        cells_of = partial(unit_cells, counts, max_delay=max_delay_weeks)
    # The cells are handed over, not kept here: _fill lets their per-delay values go once it
    # has the revision factors, before its units x weeks arrays are made.
    fill = _fill(cells_of(stamp), units, max_delay_weeks, recent_weeks)
    _, _, weeks, cases, _, _, _, start = fill
    cases[np.arange(len(weeks))[None, :] < start[:, None]] = np.nan
    return weeks, cases


def _fill(cells: Cells, units, max_delay_weeks, recent_weeks):
    """Compute the arrays behind :func:`fill_gaps` from a date's triangle (see there)."""
    n_d = max_delay_weeks
    ids = pd.Index(units.index, name="unit_id")
    u_country = country_of(ids, units).astype(str)
    countries, ci = np.unique(u_country, return_inverse=True)
    n_u, n_t = len(ids), len(cells.weeks)
    pos = ids.get_indexer(cells.units)
    keep = pos[cells.pair_unit] >= 0
    # Revision factors per country from unit-weeks already reported at delay d only: late units
    # are imputed below, so they must not also raise the factors (Mack 1993 weighting).
    # Only unit-weeks at most 3 * n_d - 1 weeks old enter (a_pair <= d + 2 n_d): select them
    # once rather than masking every pair at every delay (the same pairs, in the same order).
    recent = keep & (cells.age[cells.pair_week] <= 3 * n_d - 1)
    cp = ci[pos[cells.pair_unit[recent]]]
    X = np.ascontiguousarray(cells.values[recent].T)  # one row per delay: read contiguously
    a_pair = cells.age[cells.pair_week[recent]]
    f = np.ones((len(countries), n_d))
    for d in range(n_d):  # a loop over delays only
        use = ~np.isnan(X[d]) & (a_pair >= d + 1) & (a_pair <= d + 2 * n_d)
        c_use = cp[use]
        num = np.bincount(c_use, weights=X[d + 1][use], minlength=len(countries))
        den = np.bincount(c_use, weights=X[d][use], minlength=len(countries))
        f[:, d] = np.where(den > 0, num / np.where(den > 0, den, 1), 1.0)
    F = to_final(f)
    if keep.all():  # every reported unit is one of ``units`` (the usual case): no copies
        pu, pt, known = pos[cells.pair_unit], cells.pair_week, cells.latest
    else:
        pu, pt, known = pos[cells.pair_unit][keep], cells.pair_week[keep], cells.latest[keep]
    weeks, age = cells.weeks, cells.age
    # The per-delay values (unit-weeks x delays) have given the factors: let them go (when
    # the caller handed the cells over) before the units x weeks arrays below.
    del X, cells, recent, cp, a_pair
    latest = np.full((n_u, n_t), np.nan)
    latest[pu, pt] = known
    k = np.minimum(age, n_d)
    value = latest * F[:, k][ci]
    young = (age < n_d)[None, :]
    level_sum, level_n = _rolling(latest, recent_weeks)
    with np.errstate(invalid="ignore", divide="ignore"):
        level = level_sum / level_n
    del level_sum, level_n
    has = ~np.isnan(latest)
    # Per country and week: estimate over reporting units, and their summed recent level.
    # (bincount adds in unit order, as np.add.at did, many times faster on units x weeks)
    cell = (ci[:, None] * n_t + np.arange(n_t)[None, :]).ravel()
    size = len(countries) * n_t
    est = np.bincount(cell, np.where(has, value, 0).ravel(), size).reshape(-1, n_t)
    lev = np.bincount(cell, np.where(has & ~np.isnan(level), level, 0).ravel(), size)
    lev = lev.reshape(-1, n_t)
    any_rep = np.bincount(cell, has.ravel(), size).reshape(-1, n_t) > 0
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(any_rep & (lev > 0), est / lev, np.nan)[ci]
    imputed = np.where(np.isnan(ratio), level, level * ratio)
    del ratio, level
    cases = np.where(has, value, imputed)
    del imputed, value
    # First reported week per country (a bincount of country-weeks: np.minimum.at over every
    # unit-week took a fifth of the backtest's filled panel at 10,000 units).
    seen = np.bincount(ci[pu] * n_t + pt, minlength=size).reshape(-1, n_t) > 0
    first = np.where(seen.any(axis=1), seen.argmax(axis=1), n_t)
    young = np.broadcast_to(young, has.shape)
    return ids, u_country, weeks, cases, latest, has, young, first[ci]


def aggregate_panel(
    panel: pd.DataFrame, units: pd.DataFrame | None = None, *, by: str = "region"
) -> pd.DataFrame:
    """Sum a ``fill_gaps`` panel to provinces, countries or the region, gaps carried.

    Parameters
    ----------
    panel : pandas.DataFrame
        The output of ``fill_gaps``.
    units : pandas.DataFrame, optional
        ``parent_id level`` for provinces and ``population`` for rates.
    by : {"region", "country", "province"}
        The grouping.

    Returns
    -------
    pandas.DataFrame
        Per (group, week): ``cases`` (all parts; NaN when some unit is unknown), ``reported``
        (reported values only), ``estimated`` (the nowcast and imputed part), ``units``,
        ``units_imputed``, ``units_unknown``, ``status`` ("reported", "estimated" or
        "incomplete"), and with ``units.population`` also ``population`` and ``rate`` per
        100,000 (NaN when incomplete).

    Examples
    --------
    >>> from marchland.pack import open_region
    >>> from marchland.demo import scenario_path
    >>> reg = open_region(scenario_path())
    >>> panel = fill_gaps(reg.counts, reg.units, as_of="2026-06-03")
    >>> agg = aggregate_panel(panel, reg.units, by="country")
    >>> sorted(agg["status"].unique())
    ['estimated', 'reported']
    """
    if by not in AGG_BY:
        raise ValueError(f"'by' needs to be one of {AGG_BY}. {by!r} was given instead.")
    key = {"region": "region", "country": "country", "province": "province"}[by]
    p = panel.assign(
        region="region",
        province=province_of(pd.Index(panel["unit_id"]), units),
        _est=np.where(
            panel["status"].isin(["nowcast", "imputed"]),
            panel["cases"] - panel["reported"].fillna(0),
            0.0,
        ),
        _imp=panel["status"].eq("imputed"),
        _unk=panel["status"].eq("unknown"),
    )
    if units is not None and "population" in units:
        p["_pop"] = pd.Series(units["population"]).reindex(p["unit_id"]).to_numpy(dtype=float)
    g = p.groupby([key, "week"], sort=True)
    out = g.agg(
        cases=("cases", "sum"),
        reported=("reported", "sum"),
        estimated=("_est", "sum"),
        units=("unit_id", "size"),
        units_imputed=("_imp", "sum"),
        units_unknown=("_unk", "sum"),
    )
    incomplete = out["units_unknown"] > 0
    out.loc[incomplete, "cases"] = np.nan
    out["status"] = np.where(
        incomplete, "incomplete", np.where(out["estimated"] != 0, "estimated", "reported")
    )
    if "_pop" in p:
        out["population"] = g["_pop"].sum()
        out["rate"] = out["cases"] / out["population"] * 100_000
    return out.reset_index()
