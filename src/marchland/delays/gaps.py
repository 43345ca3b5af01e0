"""Gaps are not zeros: the complete unit x week panel, and sums that never add a gap as 0.

A unit-week nobody reported is unknown. ``fill_gaps`` gives every unit of every week an
estimate and says where it came from; ``aggregate_panel`` sums the panel to provinces,
countries or the region and carries the estimated part (or flags the week incomplete).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import partial

import numba
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
_NOWCAST, _IMPUTED, _UNKNOWN = (PANEL_STATUSES.index(s) for s in ("nowcast", "imputed", "unknown"))


@dataclass(frozen=True)
class Filled:
    """The :func:`fill_gaps` panel as units x weeks arrays (its long table without strings).

    ``fill_gaps`` has a row for unit ``u`` and week ``t`` where ``t >= start[u]``
    (:attr:`rows`); elsewhere ``cases`` and ``reported`` are NaN.
    """

    ids: pd.Index  # (U,) unit ids, in the order of ``units``
    country: np.ndarray  # (U,) country of each unit
    weeks: pd.DatetimeIndex  # (T,)
    cases: np.ndarray  # (U, T) float, NaN unknown or no row
    reported: np.ndarray  # (U, T) float, NaN where nothing was reported
    status: np.ndarray  # (U, T) int8 position in PANEL_STATUSES
    start: np.ndarray  # (U,) first week with a row (the country's first reported week)

    @property
    def rows(self) -> np.ndarray:
        """(U, T) True where ``fill_gaps`` has a row."""
        return np.arange(len(self.weeks))[None, :] >= self.start[:, None]

    def long(self, weeks: np.ndarray | None = None) -> pd.DataFrame:
        """Return the long table of :func:`fill_gaps` (a row per unit and week from ``start``).

        ``weeks`` (T,) bool: only the rows of those weeks.
        """
        rows = self.rows if weeks is None else self.rows & np.asarray(weeks)[None, :]
        u, t = np.nonzero(rows)
        return pd.DataFrame(
            {
                "unit_id": self.ids.to_numpy()[u],
                "week": self.weeks[t],
                "country": self.country[u],
                "cases": self.cases[u, t],
                "reported": self.reported[u, t],
                "status": np.asarray(PANEL_STATUSES, dtype=object)[self.status[u, t]],
            }
        )


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
    return filled(
        counts, units, as_of=as_of, max_delay_weeks=max_delay_weeks, recent_weeks=recent_weeks
    ).long()


def filled(
    counts: pd.DataFrame,
    units: pd.DataFrame,
    *,
    as_of: object,
    max_delay_weeks: int = MAX_DELAY_WEEKS,
    recent_weeks: int = 8,
) -> Filled:
    """Return :func:`fill_gaps`'s panel as units x weeks arrays (:class:`Filled`).

    The same numbers without the long table: at 50,000 units its string columns (unit,
    country, status repeated on 4 million rows) held more memory than the estimate.
    """
    stamp = check_args(counts, as_of, "unit", "chain-ladder", max_delay_weeks, 0.5)
    cells = unit_cells(counts, stamp, max_delay_weeks)
    ids, u_country, weeks, cases, latest, has, young, start = _fill(
        cells, units, max_delay_weeks, recent_weeks
    )
    del cells
    status = np.where(
        has,
        np.where(young, np.int8(PANEL_STATUSES.index("nowcast")), np.int8(0)),
        np.where(np.isnan(cases), np.int8(_UNKNOWN), np.int8(_IMPUTED)),
    ).astype(np.int8)
    before = np.arange(len(weeks))[None, :] < start[:, None]
    cases[before] = np.nan
    latest[before] = np.nan
    return Filled(ids, u_country, weeks, cases, latest, status, start)


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
    if isinstance(panel, Filled):
        return aggregate_filled(panel, units, by=by)
    # The long table back onto the units x weeks grid (one row per unit and week, as
    # fill_gaps gives it), units in the order they first appear.
    uc, uids = pd.factorize(panel["unit_id"])
    tc, weeks = pd.factorize(panel["week"], sort=True)
    shape = (len(uids), len(weeks))
    grid = {c: np.full(shape, np.nan) for c in ("cases", "reported")}
    for c, a in grid.items():
        a[uc, tc] = panel[c].to_numpy(dtype=float, na_value=np.nan)
    status = np.zeros(shape, dtype=np.int8)
    status[uc, tc] = pd.Categorical(panel["status"], categories=PANEL_STATUSES).codes
    rows = np.zeros(shape, dtype=bool)
    rows[uc, tc] = True
    country = np.empty(len(uids), dtype=object)
    country[uc[::-1]] = panel["country"].to_numpy(dtype=object)[::-1]  # each unit's first row
    return _aggregate(
        pd.Index(uids, name="unit_id"),
        country,
        pd.DatetimeIndex(weeks, name="week"),
        grid["cases"],
        grid["reported"],
        status,
        rows,
        units,
        by,
    )


def aggregate_filled(filled: Filled, units: pd.DataFrame | None = None, *, by: str = "region"):
    """:func:`aggregate_panel` of a :class:`Filled` panel (the same table, no long one)."""
    if by not in AGG_BY:
        raise ValueError(f"'by' needs to be one of {AGG_BY}. {by!r} was given instead.")
    f = filled
    return _aggregate(f.ids, f.country, f.weeks, f.cases, f.reported, f.status, f.rows, units, by)


def _aggregate(ids, country, weeks, cases, reported, status, rows, units, by):
    """Sum the units x weeks panel to groups (see :func:`aggregate_panel`).

    The float sums add the units of each group in unit order with the compensated summation
    pandas uses for a grouped sum of the long table (:func:`_group_sum`), so the table is the
    one the long panel gave, to the last digit; cells without a row are NaN, which the sum
    skips as it skips absent rows. Counts are exact integer sums.
    """
    if by == "region":
        key = np.full(len(ids), "region", dtype=object)
    elif by == "country":
        key = np.asarray(country, dtype=object)
    else:
        key = province_of(ids, units)
    codes, labels = pd.factorize(key, sort=True)
    n_g, n_t = len(labels), len(weeks)

    def gsum(a: np.ndarray) -> np.ndarray:
        return _group_sum(np.ascontiguousarray(a, dtype=np.float64), codes.astype(np.intp), n_g)

    def count(a: np.ndarray) -> np.ndarray:
        cell = (codes[:, None] * n_t + np.arange(n_t)[None, :])[a]
        return np.bincount(cell, minlength=n_g * n_t).reshape(n_g, n_t)

    est = np.where(
        (status == _NOWCAST) | (status == _IMPUTED), cases - np.nan_to_num(reported), 0.0
    )
    est[~rows] = np.nan
    n_units = count(rows)
    g, t = np.nonzero(n_units)
    name = {"region": "region", "country": "country", "province": "province"}[by]
    out = pd.DataFrame(
        {
            name: labels[g],
            "week": weeks[t],
            "cases": gsum(cases)[g, t],
            "reported": gsum(reported)[g, t],
            "estimated": gsum(est)[g, t],
            "units": n_units[g, t],
            "units_imputed": count(rows & (status == _IMPUTED))[g, t],
            "units_unknown": count(rows & (status == _UNKNOWN))[g, t],
        }
    )
    del est
    incomplete = out["units_unknown"] > 0
    out.loc[incomplete, "cases"] = np.nan
    out["status"] = np.where(
        incomplete, "incomplete", np.where(out["estimated"] != 0, "estimated", "reported")
    )
    if units is not None and "population" in units:
        pop = pd.Series(units["population"]).reindex(ids).to_numpy(dtype=float)
        out["population"] = gsum(np.where(rows, pop[:, None], np.nan))[g, t]
        out["rate"] = out["cases"] / out["population"] * 100_000
    return out


@numba.njit(cache=True, nogil=True)
def _group_sum(values, labels, n_groups):  # pragma: no cover - compiled
    """Per group and column, the compensated (Kahan) sum of ``values``' rows in row order.

    The arithmetic of pandas' grouped sum (``groupby(...).sum()``: Kahan compensation, NaN
    skipped, the compensation reset when an infinity makes it NaN), applied to a units x
    weeks grid instead of a long table: the same sums of the same values in the same order.
    Written here because pandas offers it only on a long table, which at 50,000 units cost
    more memory than the whole estimate.
    """
    n, k = values.shape
    out = np.zeros((n_groups, k))
    comp = np.zeros((n_groups, k))
    for i in range(n):
        g = labels[i]
        for j in range(k):
            val = values[i, j]
            if val != val:
                continue
            y = val - comp[g, j]
            t = out[g, j] + y
            c = t - out[g, j] - y
            comp[g, j] = 0.0 if c != c else c
            out[g, j] = t
    return out
