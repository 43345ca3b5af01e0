"""Delay patterns that depend on where a week falls in the calendar month.

Some countries send their reports in monthly batches: rows of the week that holds the month's
last day often miss the month's file and come with the next one, two to four weeks late, while
other weeks are complete at once. One delay pattern for all weeks spreads that month-end lag
over every week: each week is raised a little and the month-end week far too little. A
development triangle should be built from homogeneous periods, and a period with a known
different development is given its own factors (common practice in claims reserving;
Friedland 2010, ch. 3 and 7, from memory). Here the weeks are split in two strata: the week
holding a calendar month's last day, and every other week. Each stratum gets its own
volume-weighted factors (Mack 1993).

Whether a group gets the split pattern is decided from its own past: on each of the previous
``n_past`` weekly as-of dates both patterns are re-estimated from what was known then and every
young week is nowcast, and the total absolute error against the values that became known later
is compared (evaluation on a rolling origin, Hyndman & Athanasopoulos 2021, sect. 5.10, from
memory; model choice on past performance is common practice). The split is kept only when its
past error is at most ``SPLIT_GAIN`` times the single pattern's: the split rests on fewer weeks
per factor, so a small gain is as likely noise as a real calendar effect, and the simpler
pattern is kept unless the richer one clearly wins (common practice). A group without a
month-end effect thus keeps the single pattern and loses no data to the split.

References
----------
Mack, T. (1993). Distribution-free calculation of the standard error of chain ladder reserve
estimates. ASTIN Bulletin 23(2), 213-225.
Friedland, J. (2010). Estimating Unpaid Claims Using Basic Techniques. Casualty Actuarial
Society, version 3.
Hyndman, R. J. & Athanasopoulos, G. (2021). Forecasting: Principles and Practice, 3rd ed.
OTexts, Melbourne.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ._pattern import factors, point, to_final

# The month-end stratum holds about one week in 4.3: its factors look back over this many times
# the usual window (our choice: with the default 16 weeks, about 7 month-end weeks per factor).
MONTH_END_SPAN = 2
# The split must cut the past error by at least 15% to be used. Measured: on the demo (13
# fortnightly as-of dates) the monthly-file country's split errs 0.48-0.76 times the single
# pattern; on the simulation of tests/test_nowcast.py, which has no month-end effect (3
# countries, 4 as-of dates), 0.99-1.07.
SPLIT_GAIN = 0.85


def month_end(weeks: pd.DatetimeIndex) -> np.ndarray:
    """Mark the weeks that hold a calendar month's last day (the next week starts a month).

    Examples
    --------
    >>> month_end(pd.DatetimeIndex(["2026-03-23", "2026-03-30", "2026-04-06"])).tolist()
    [False, True, False]
    """
    nxt = weeks + pd.Timedelta(days=7)
    return np.asarray(weeks.month != nxt.month)


def _sets(C, age, offset, window, me):
    """Cumulative factors (G, D+1) as known ``offset`` weeks earlier: single, other, month-end."""
    n_d = C.shape[2] - 1
    pooled = factors(C, age, offset, window)
    other = factors(C, age, offset, window, weeks=~me)
    span = MONTH_END_SPAN * window
    end = factors(C, age, offset, span, weeks=me)
    # A stratum without a usable week at a delay borrows the single pattern's factor there.
    a = age - offset
    d = np.arange(n_d)
    n_other = (((a[:, None] >= d + 1) & (a[:, None] <= d + window)) & ~me[:, None]).sum(axis=0)
    n_end = (((a[:, None] >= d + 1) & (a[:, None] <= d + span)) & me[:, None]).sum(axis=0)
    other = np.where(n_other > 0, other, pooled)
    end = np.where(n_end > 0, end, pooled)
    return to_final(pooled), to_final(other), to_final(end)


def _past_error(C, age, F_of, n_past):
    """Total absolute error of the point nowcasts on the previous ``n_past`` as-of dates (G,)."""
    n_d = C.shape[2] - 1
    err = np.zeros(C.shape[0])
    truth_known = age >= n_d
    for m in range(1, n_past + 1):  # a loop over past as-of dates, not over groups or weeks
        p = point(C, age, F_of(m), m)
        sel = p["live"] & truth_known
        if not sel.any():
            continue
        R, N = p["R"][:, sel], p["N"][:, sel]
        est = np.where(np.isnan(N), R, N)  # not estimable then: it would have shown as reported
        err += np.nansum(np.abs(est - C[:, sel, n_d]), axis=1)
    return err


def choose(C, age, window, n_past, me):
    """Each group's pattern as a function of the offset, and which groups use the split.

    Returns ``F_of(m)``: the factors known ``m`` weeks before the as-of date as a tuple
    ``(F_other, F_end, me)`` that :func:`point` reads per week (m = 0 is the as-of date), and
    ``split`` (G,) True where the month-end split is used.
    """
    # Factor sets per offset are small (G x D+1): kept, not recomputed for the calibration.
    sets = [_sets(C, age, m, window, me) for m in range(n_past + 1)]
    err_one = _past_error(C, age, lambda m: sets[m][0], n_past)
    err_two = _past_error(C, age, lambda m: (sets[m][1], sets[m][2], me), n_past)
    split = (err_two <= SPLIT_GAIN * err_one) & (err_one > 0)
    s = split[:, None]

    def F_of(m):
        one, other, end = sets[m]
        return np.where(s, other, one), np.where(s, end, one), me

    return F_of, split
