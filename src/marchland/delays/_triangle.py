"""Reporting triangles as arrays: unit-week cells by delay, and their sums over groups.

Delay convention (shared by every function of the stage): a week's *last day* is its first day
plus 6 days. For an as-of date ``A`` a week is ``k = (A - last_day) // 7`` whole weeks old. The
value of the week at delay ``d`` is the latest revision received on or before
``A - 7 * (k - d)`` days: the triangle's diagonals are weekly snapshots taken on ``A``, ``A - 7``,
``A - 14``, ..., so the newest diagonal is exactly what is known on ``A``. Delay 0 is what was
known within the week's first 0-6 days after its end (the same offset for every week).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

DAY = np.timedelta64(1, "D")


@dataclass(frozen=True)
class Cells:
    """Unit-week cells of the triangle for one as-of date (plain arrays, no copies of input)."""

    units: pd.Index  # unit ids (rows of ``values``' first axis come from pairs)
    weeks: pd.DatetimeIndex  # every week from the first reported one to the last ended one
    age: np.ndarray  # (T,) whole weeks between each week's last day and as_of
    pair_unit: np.ndarray  # (P,) unit position of each reported unit-week
    pair_week: np.ndarray  # (P,) week position of each reported unit-week
    values: np.ndarray  # (P, D+1) value known at each delay; NaN = not yet reported by then
    latest: np.ndarray  # (P,) value as known on as_of (may include revisions after delay D)
    row_unit: np.ndarray  # (R,) unit position of every revision used
    row_received: np.ndarray  # (R,) its received date (days since 1970-01-01)


def unit_cells(counts: pd.DataFrame, as_of: pd.Timestamp, max_delay: int) -> Cells:
    """Place every revision received by ``as_of`` into its (unit, week, delay) cell."""
    # Whole days since the epoch: integer arithmetic is much faster than datetime64 on millions.
    a = _day(as_of)
    week_all, rec_all = _days(counts["week"]), _days(counts["received"])
    cases_all = counts["cases"].to_numpy(dtype=float, na_value=np.nan)
    ok = ~np.isnan(cases_all) & (rec_all <= a) & (week_all + 6 <= a)
    week, received, cases = week_all[ok], rec_all[ok], cases_all[ok]
    del week_all, rec_all, cases_all  # each as long as the counts (4 million rows at 50k)
    delay = _delay(a, week, received)
    u, units = _sorted_codes(counts["unit_id"], ok)
    del ok
    first = week.min() if len(week) else a
    n_weeks = int((a - first - 6) // 7 + 1) if len(week) else 0
    weeks = pd.date_range(pd.Timestamp(int(first), unit="D"), periods=n_weeks, freq="7D")
    weeks = weeks.astype("datetime64[ns]")
    t = (week - first) // 7
    del week
    age = ((a - (first + 7 * np.arange(n_weeks)) - 6) // 7).astype(np.int64)
    key = u.astype(np.int64) * max(n_weeks, 1) + t
    if not _in_order(key, received):  # callers replaying many dates pass rows in this order
        order = np.lexsort((received, key))  # stable: for equal dates the later row wins
        key, u, t, delay = key[order], u[order], t[order], delay[order]
        cases, received = cases[order], received[order]
    # Value known on as_of: the last revision of each unit-week.
    is_last = np.r_[key[1:] != key[:-1], True] if len(key) else np.zeros(0, bool)
    pair_key = key[is_last]
    pair_unit, pair_week = u[is_last], t[is_last]
    latest = cases[is_last]
    del is_last, t
    inside = delay <= max_delay
    pos = np.searchsorted(pair_key, key[inside])
    del key
    delay, cases = delay[inside], cases[inside]
    del inside
    values = _placed(len(pair_key), pos, delay, cases, max_delay)
    del pos, delay, cases
    # Cells after the as-of date are unknown, not the last value carried on.
    values[np.arange(max_delay + 1)[None, :] > age[pair_week][:, None]] = np.nan
    return Cells(
        pd.Index(units, name="unit_id"),
        weeks,
        age,
        pair_unit,
        pair_week,
        values,
        latest,
        u,
        received,
    )


class Versions:
    """Every version of the counts arranged once: the triangle of any as-of date is then a mask.

    ``versions.cells(as_of)`` equals ``unit_cells(counts, as_of, max_delay)`` (every field),
    without sorting or placing the versions again: for callers asking for many dates (the
    border-risk backtest makes one filled panel per origin week, each over the whole history).
    A version's delay depends on the as-of date ``A`` only through ``A``'s weekday: moving ``A``
    by whole weeks moves a week's age ``(A - last_day) // 7`` and the version's snapshot offset
    ``(A - received) // 7`` by the same number, and the delay is their difference. So every
    version's cell and the forward-filled values of every unit-week are made once per weekday,
    and a date keeps the unit-weeks reported by then, their cells up to their age (a version
    received after ``A`` always falls in a cell beyond the week's age) and the latest version
    received by then (the versions of a unit-week stand in received order).
    """

    def __init__(self, counts: pd.DataFrame, max_delay: int) -> None:
        week, rec = _days(counts["week"]), _days(counts["received"])
        cases = counts["cases"].to_numpy(dtype=float, na_value=np.nan)
        ok = ~np.isnan(cases)
        u, self.names = _sorted_codes(counts["unit_id"], ok)
        # The order unit_cells puts the rows of any date in (stable: the later row wins ties).
        order = np.lexsort((rec[ok], week[ok], u))
        self.unit, self.week = u[order], week[ok][order]
        self.received, self.cases = rec[ok][order], cases[ok][order]
        n = len(order)
        new = np.r_[True, (self.unit[1:] != self.unit[:-1]) | (self.week[1:] != self.week[:-1])]
        self.start = np.flatnonzero(new) if n else np.zeros(0, dtype=np.int64)
        self.end = np.r_[self.start[1:], n].astype(np.int64)
        self.pair_unit = self.unit[self.start]
        self.pair_week = self.week[self.start]
        self.max_delay = int(max_delay)
        self._values: dict[int, np.ndarray] = {}

    def prepare(self, dates) -> None:
        """Place the versions for the weekdays of ``dates`` now (e.g. before forking workers)."""
        for d in pd.DatetimeIndex(dates):
            self.values(_day(d))

    def values(self, a: int) -> np.ndarray:
        """Forward-filled values of every unit-week at every delay for dates on ``a``'s weekday."""
        r = int(a) % 7
        if r not in self._values:
            d = _delay(a, self.week, self.received)
            pair = np.repeat(np.arange(len(self.start)), self.end - self.start)
            inside = d <= self.max_delay
            values = _placed(
                len(self.start), pair[inside], d[inside], self.cases[inside], self.max_delay
            )
            # Kept for every date of the weekday: in float32 when that holds every value
            # exactly (whole counts below 2**24), half the memory (0.15 GB at 50,000 units);
            # cells() hands them back as float64, the same numbers.
            if _exact_in_float32(values):
                values = values.astype(np.float32)
            self._values[r] = values
        return self._values[r]

    def cells(self, as_of: pd.Timestamp) -> Cells:
        """Return the triangle of ``as_of``: ``unit_cells(counts, as_of, max_delay)``."""
        a = _day(as_of)
        all_values = self.values(a)
        by_then = self.received <= a
        seen = np.concatenate([[0], np.cumsum(by_then)])
        n_seen = seen[self.end] - seen[self.start]
        idx = np.flatnonzero((self.pair_week + 6 <= a) & (n_seen > 0))
        pw = self.pair_week[idx]
        first = pw.min() if len(idx) else a
        n_weeks = int((a - first - 6) // 7 + 1) if len(idx) else 0
        weeks = pd.date_range(pd.Timestamp(int(first), unit="D"), periods=n_weeks, freq="7D")
        weeks = weeks.astype("datetime64[ns]")
        age = ((a - (first + 7 * np.arange(n_weeks)) - 6) // 7).astype(np.int64)
        # Units known by then, numbered in their sorted order as unit_cells numbers them.
        used = np.zeros(len(self.names), dtype=bool)
        used[self.pair_unit[idx]] = True
        code = np.cumsum(used) - 1
        pair_week = (pw - first) // 7
        values = _rows_as_float64(all_values, idx)
        values[np.arange(self.max_delay + 1)[None, :] > age[pair_week][:, None]] = np.nan
        rows = by_then & (self.week + 6 <= a)
        return Cells(
            pd.Index(self.names[used], name="unit_id"),
            weeks,
            age,
            code[self.pair_unit[idx]],
            pair_week,
            values,
            self.cases[self.start[idx] + n_seen[idx] - 1],
            code[self.unit[rows]],
            self.received[rows],
        )


def _day(date: object) -> int:
    """Whole days since the epoch (integer arithmetic is much faster than datetime64)."""
    return (np.datetime64(pd.Timestamp(date), "ns") - np.datetime64(0, "ns")) // DAY


def _days(dates: pd.Series) -> np.ndarray:
    """:func:`_day` of every date of a column."""
    return (dates.to_numpy("datetime64[ns]") - np.datetime64(0, "ns")) // DAY


def _delay(a: int, week: np.ndarray, received: np.ndarray) -> np.ndarray:
    """Return each version's delay for as-of day ``a``.

    The first delay whose snapshot date ``A - 7 (k - d)`` is on or after the version's received
    date (``k``: its week's age).
    """
    return np.maximum(0, (a - week - 6) // 7 - (a - received) // 7)


def _placed(
    n_pairs: int, pair: np.ndarray, delay: np.ndarray, cases: np.ndarray, max_delay: int
) -> np.ndarray:
    """Value of each unit-week at each delay from its versions (given in received order).

    Assigning in received order leaves the latest revision in each (unit-week, delay) cell;
    each cell's value is then carried to the later delays until the next revision.
    """
    values = np.full((n_pairs, max_delay + 1), np.nan)
    values[pair, delay] = cases
    # Carried forward in place, one delay at a time (a loop over delays only): an index array
    # and a gathered copy of the whole (pairs x delays) block held three more such blocks at
    # the peak (about 0.9 GB for 4 million unit-weeks at 50,000 units).
    for d in range(1, max_delay + 1):
        col = values[:, d]
        gap = np.isnan(col)
        col[gap] = values[gap, d - 1]
    return values


def _rows_as_float64(values: np.ndarray, rows: np.ndarray, block: int = 1 << 18) -> np.ndarray:
    """``values[rows]`` as float64, gathered a block of rows at a time.

    ``values[rows].astype(np.float64)`` held the gathered float32 copy beside the float64 one
    (0.15 GB more at 50,000 units, in every origin of the border-risk backtest).
    """
    if values.dtype == np.float64:
        return values[rows]
    out = np.empty((len(rows), *values.shape[1:]), dtype=np.float64)
    for i in range(0, len(rows), block):  # a loop over blocks of rows, not units or weeks
        out[i : i + block] = values[rows[i : i + block]]
    return out


def _exact_in_float32(values: np.ndarray, block: int = 1 << 18) -> bool:
    """Whether float32 holds every value of ``values`` exactly (NaN counts as held).

    Checked a block of rows at a time: ``np.array_equal(..., equal_nan=True)`` on the whole
    array made NaN masks and copies of every non-NaN value at once (0.5 GB at 50,000 units).
    """
    for i in range(0, len(values), block):  # a loop over blocks of rows, not units or weeks
        part = values[i : i + block]
        if not np.array_equal(part.astype(np.float32), part, equal_nan=True):
            return False
    return True


def _in_order(key: np.ndarray, received: np.ndarray) -> bool:
    """Whether rows already stand as the stable sort by (key, received) would put them."""
    if len(key) < 2:
        return True
    step = key[1:] - key[:-1]
    return bool(np.all((step > 0) | ((step == 0) & (received[1:] >= received[:-1]))))


def _sorted_codes(ids: pd.Series, ok: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``pd.factorize(ids[ok], sort=True)`` with the uniques as an object array.

    Categorical ids are factorised from their codes: the same result without making a Python
    string per row, which dominates on many reused calls (the border-risk backtest).
    """
    if isinstance(ids.dtype, pd.CategoricalDtype):
        all_codes, uniques = ids.cat.codes.to_numpy(), ids.cat.categories
    else:
        # Unsorted codes of the whole column, then only its few distinct ids sorted: the same
        # numbers without a Python string per row (at 50,000 units, 4 million strings and
        # 0.3 GB per call; a string column is encoded by its own array type).
        all_codes, uniques = pd.factorize(ids, use_na_sentinel=True)
    codes = all_codes[ok]
    if not (codes < 0).any():
        present = np.unique(codes)
        names = np.asarray(uniques, dtype=object)[present]
        rank = np.argsort(names, kind="stable")
        lookup = np.zeros(len(uniques), dtype=np.intp)
        lookup[present[rank]] = np.arange(len(present))
        return lookup[codes], names[rank]
    u, units = pd.factorize(ids.to_numpy(dtype=object)[ok], sort=True)
    return u, np.asarray(units, dtype=object)


def group_sums(cells: Cells, group_of_unit: np.ndarray, n_groups: int) -> dict[str, np.ndarray]:
    """Sum unit cells to groups: ``C`` (G, T, D+1), ``latest`` (G, T), ``n`` units reporting.

    A unit-week not yet reported at a delay adds nothing to that delay's total: the triangle
    records what was known, and late units are part of what the delay pattern learns.
    """
    n_t = len(cells.weeks)
    n_d = cells.values.shape[1]
    g = group_of_unit[cells.pair_unit]
    flat = g * n_t + cells.pair_week
    size = n_groups * n_t
    # One delay's column at a time: a NaN-free copy of every cell was as large as the cells.
    out_c = np.empty((size, n_d))
    for d in range(n_d):  # a loop over delays only
        out_c[:, d] = np.bincount(flat, weights=np.nan_to_num(cells.values[:, d]), minlength=size)
    out_c = out_c.reshape(n_groups, n_t, n_d)
    # Cells not observable by as_of are NaN in the group triangle too.
    out_c[:, np.arange(n_d)[None, :] > cells.age[:, None]] = np.nan
    latest = np.bincount(flat, weights=cells.latest, minlength=size).reshape(n_groups, n_t)
    n_units = np.bincount(flat, minlength=size).reshape(n_groups, n_t)
    return {"C": out_c, "latest": latest, "n": n_units}
