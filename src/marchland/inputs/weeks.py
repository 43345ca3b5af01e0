"""Epi-week arithmetic, vectorised over pandas date Series.

Two calendars: "iso" (ISO 8601: weeks start on Monday, week 1 holds the year's first Thursday)
and "sunday" (US CDC MMWR style: weeks start on Sunday, week 1 is the first week with at least
four days in the new year, i.e. holds the year's first Wednesday). Both follow one rule: a week
belongs to the year of its fourth day, and week 1 is the week holding 4 January. Written here
rather than taken from ``epiweeks`` because that package works one date at a time; it is the
outside reference in ``tests/reference/test_epiweeks.py``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

CALENDARS = ("iso", "sunday")
_FIRST_DAY = {"iso": 0, "sunday": 6}  # pandas dayofweek: Monday = 0 ... Sunday = 6


def _check(calendar: str) -> int:
    if calendar not in _FIRST_DAY:
        raise ValueError(
            f"'calendar' needs to be one of {CALENDARS}. {calendar!r} was given instead."
        )
    return _FIRST_DAY[calendar]


def week_start(dates: pd.Series, calendar: str = "iso") -> pd.Series:
    """First day of the week each date falls in (Monday for "iso", Sunday for "sunday").

    Examples
    --------
    >>> d = pd.Series(pd.to_datetime(["2026-01-07", "2026-01-11"]))
    >>> week_start(d).dt.strftime("%a %Y-%m-%d").tolist()
    ['Mon 2026-01-05', 'Mon 2026-01-05']
    >>> week_start(d, "sunday").dt.strftime("%a %Y-%m-%d").tolist()
    ['Sun 2026-01-04', 'Sun 2026-01-11']
    """
    first = _check(calendar)
    d = pd.to_datetime(pd.Series(dates)).dt.normalize()
    back = (d.dt.day_of_week - first) % 7
    return d - pd.to_timedelta(back, unit="D")


def epi_week(dates: pd.Series, calendar: str = "iso") -> pd.DataFrame:
    """Epi year and week number of each date.

    Returns
    -------
    pandas.DataFrame
        Columns ``year``, ``week`` (Int64) and ``start`` (the week's first day).

    Examples
    --------
    >>> d = pd.Series(pd.to_datetime(["2026-01-01", "2027-01-01"]))
    >>> epi_week(d)[["year", "week"]].values.tolist()
    [[2026, 1], [2026, 53]]
    >>> epi_week(d, "sunday")[["year", "week"]].values.tolist()
    [[2025, 53], [2026, 52]]
    """
    start = week_start(dates, calendar)
    fourth = start + pd.Timedelta(days=3)
    out = pd.DataFrame(
        {
            "year": fourth.dt.year.astype("Int64"),
            "week": ((fourth.dt.day_of_year - 1) // 7 + 1).astype("Int64"),
            "start": start,
        }
    )
    return out


def _week1_start(years: np.ndarray, calendar: str) -> pd.Series:
    y = np.asarray(years, dtype="int64")
    ok = (y >= 1) & (y <= 9999)  # four-digit years; else NaT
    # numpy's calendar arithmetic (year count to day) instead of pd.to_datetime on a frame:
    # the same dates, without its per-call overhead.
    jan4 = (np.where(ok, y, 2000) - 1970).astype("datetime64[Y]").astype("datetime64[D]") + 3
    return week_start(pd.Series(jan4.astype("datetime64[us]")).where(ok), calendar)


def weeks_in_year(years: pd.Series, calendar: str = "iso") -> pd.Series:
    """Count the weeks (52 or 53) in each epi year.

    Examples
    --------
    >>> weeks_in_year(pd.Series([2020, 2026]), "iso").tolist()
    [53, 53]
    """
    y = pd.Series(years).astype("int64").to_numpy()
    a = _week1_start(y, calendar)
    b = _week1_start(y + 1, calendar)
    return ((b - a).dt.days // 7).astype("int64")


def from_year_week(years: pd.Series, weeks: pd.Series, calendar: str = "iso") -> pd.Series:
    """First day of epi week ``weeks`` of epi year ``years``; NaT where the week does not exist.

    Examples
    --------
    >>> from_year_week(pd.Series([2026, 2026, 2025]), pd.Series([1, 53, 53])).dt.date.tolist()
    [datetime.date(2025, 12, 29), datetime.date(2026, 12, 28), NaT]
    """
    y = pd.to_numeric(pd.Series(years), errors="coerce")
    w = pd.to_numeric(pd.Series(weeks), errors="coerce")
    # Years and weeks far outside any report (1e308, week 10**12) would overflow the date
    # arithmetic: they give NaT, like a week that does not exist.
    ok = y.notna() & w.notna() & (y == y.round()) & (w == w.round())
    ok &= y.between(1900, 2200) & w.between(1, 53)
    yi = y.where(ok, 2000).astype("int64").to_numpy()
    wi = w.where(ok, 1).astype("int64").to_numpy()
    start = _week1_start(yi, calendar) + pd.to_timedelta((wi - 1) * 7, unit="D")
    n = weeks_in_year(pd.Series(yi), calendar).to_numpy()
    ok = ok.to_numpy() & (wi >= 1) & (wi <= n)
    return pd.Series(start.where(ok), index=pd.Series(years).index)


_ISO_WEEK = r"^\s*(\d{4})\s*-?\s*[Ww]\s*(\d{1,2})(?:\s*-\s*\d)?\s*$"


def parse_year_week(text: pd.Series, calendar: str = "iso") -> pd.Series:
    """Parse "2025-W23" (also "2025W23", "2025-w23", "2025-W23-1") to the week's first day.

    Unparseable text and weeks that do not exist give NaT.

    Examples
    --------
    >>> parse_year_week(pd.Series(["2026-W02", "2026w2", "week 2", "2025-W53"])).tolist()
    [Timestamp('2026-01-05 00:00:00'), Timestamp('2026-01-05 00:00:00'), NaT, NaT]
    """
    parts = pd.Series(text).astype("string").str.extract(_ISO_WEEK)
    return from_year_week(parts[0], parts[1], calendar)


def convert_weeks(starts: pd.Series, source: str, target: str) -> pd.Series:
    """Map week starts of one calendar to the target calendar's week holding their middle day.

    A Sunday-start week overlaps the ISO week starting the next day on six of its seven days;
    the middle (fourth) day rule picks that week.

    Examples
    --------
    >>> convert_weeks(pd.Series(pd.to_datetime(["2026-01-04"])), "sunday", "iso").tolist()
    [Timestamp('2026-01-05 00:00:00')]
    """
    if source == target:
        return pd.Series(starts)
    return week_start(pd.Series(starts) + pd.Timedelta(days=3), target)


def week_month(weeks: pd.Series) -> pd.Series:
    """Calendar month (a monthly ``Period``) each week belongs to: the month of its fourth day.

    The fourth day is the middle of the week, so the month it falls in holds most of the week's
    days; the ISO rule for years, applied to months. Every week thus counts in exactly one
    month, whatever weekday the calendar starts on. Missing weeks give ``NaT``.

    Examples
    --------
    >>> w = pd.Series(pd.to_datetime(["2026-03-23", "2026-03-30", None]))
    >>> week_month(w).astype("string").tolist()
    ['2026-03', '2026-04', <NA>]
    """
    return (pd.to_datetime(pd.Series(weeks)) + pd.Timedelta(days=3)).dt.to_period("M")


def month_weeks(month: str | pd.Period, first_weekday: int = 0) -> pd.DatetimeIndex:
    """Start days of the weeks that belong to ``month`` (see :func:`week_month`).

    ``first_weekday`` is the calendar's first day as pandas counts weekdays (Monday = 0,
    Sunday = 6).

    Examples
    --------
    >>> month_weeks("2026-03").strftime("%m-%d").tolist()
    ['03-02', '03-09', '03-16', '03-23']
    >>> month_weeks("2026-04").strftime("%m-%d").tolist()
    ['03-30', '04-06', '04-13', '04-20', '04-27']
    """
    period = pd.Period(month, freq="M")
    days = pd.date_range(period.start_time - pd.Timedelta(days=3), period.end_time, freq="D")
    starts = days[days.day_of_week == first_weekday].normalize()
    return starts[(week_month(pd.Series(starts)) == period).to_numpy()]
