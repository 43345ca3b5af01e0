"""Epi week numbering against outside references.

Sources: the ``epiweeks`` package (systems "iso" and "cdc"; the latter is the US CDC MMWR
Sunday-start week) for every day of 2019-2027, and the ISO 8601 rule that week 1 is the week
holding the year's first Thursday (ISO 8601-1:2019, 3.1.1.23 "week number"), plus the Python
standard library's ``date.isocalendar`` as a third, independent implementation of ISO 8601.
"""

from __future__ import annotations

import datetime as dt

import pandas as pd
import pytest
from epiweeks import Week, Year

from marchland.inputs.weeks import (
    epi_week,
    from_year_week,
    month_weeks,
    parse_year_week,
    week_month,
    weeks_in_year,
)

DAYS = pd.Series(pd.date_range("2019-01-01", "2027-12-31", freq="D"))
SYSTEM = {"iso": "iso", "sunday": "cdc"}


@pytest.mark.parametrize("calendar", ["iso", "sunday"])
def test_every_day_matches_epiweeks(calendar: str) -> None:
    ours = epi_week(DAYS, calendar)
    ref = [Week.fromdate(d.date(), system=SYSTEM[calendar]) for d in DAYS]
    assert ours["year"].tolist() == [w.year for w in ref]
    assert ours["week"].tolist() == [w.week for w in ref]
    assert [d.date() for d in ours["start"]] == [w.startdate() for w in ref]


@pytest.mark.parametrize("calendar", ["iso", "sunday"])
def test_round_trip_and_week_counts(calendar: str) -> None:
    years = pd.Series(range(2019, 2028))
    n = weeks_in_year(years, calendar)
    assert n.tolist() == [Year(y, system=SYSTEM[calendar]).totalweeks() for y in years]
    ours = epi_week(DAYS, calendar)
    back = from_year_week(ours["year"], ours["week"], calendar)
    assert (back == ours["start"]).all()


def test_iso_week_one_holds_first_thursday() -> None:
    years = pd.Series(range(2019, 2028))
    start = from_year_week(years, pd.Series([1] * len(years)), "iso")
    first_thursday = [
        next(dt.date(y, 1, d) for d in range(1, 8) if dt.date(y, 1, d).isoweekday() == 4)
        for y in years
    ]
    for s, th in zip(start, first_thursday, strict=True):
        assert s.date() <= th <= s.date() + dt.timedelta(days=6)
        assert s.day_name() == "Monday"


def test_iso_matches_standard_library() -> None:
    ours = epi_week(DAYS, "iso")
    ref = [d.date().isocalendar() for d in DAYS]
    assert ours["year"].tolist() == [r.year for r in ref]
    assert ours["week"].tolist() == [r.week for r in ref]


def test_parse_iso_week_text() -> None:
    weeks = [Week(2026, w, system="iso") for w in (1, 23, 53)]
    text = pd.Series([f"{w.year}-W{w.week:02d}" for w in weeks])
    assert [d.date() for d in parse_year_week(text, "iso")] == [w.startdate() for w in weeks]
    assert parse_year_week(pd.Series(["2025-W53", "2025-W00"]), "iso").isna().all()


@pytest.mark.parametrize("calendar", ["iso", "sunday"])
def test_week_month_is_the_month_of_the_fourth_day(calendar: str) -> None:
    # Outside reference: epiweeks' Week.enddate() (7th day) minus three days is the 4th day.
    starts = epi_week(DAYS, calendar)["start"].drop_duplicates()
    ours = week_month(starts).astype("string").tolist()
    ref = [
        (Week.fromdate(d.date(), system=SYSTEM[calendar]).enddate() - dt.timedelta(days=3))
        for d in starts
    ]
    assert ours == [f"{d:%Y-%m}" for d in ref]
    # Each week lands in exactly one month's list of weeks.
    first = 0 if calendar == "iso" else 6
    months = pd.period_range("2019-02", "2027-11", freq="M")
    listed = pd.DatetimeIndex([]).append([month_weeks(m, first) for m in months])
    inner = starts[(starts >= listed.min()) & (starts <= listed.max())]
    assert listed.is_unique and set(listed) == set(inner)
