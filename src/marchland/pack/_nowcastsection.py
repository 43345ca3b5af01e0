"""The report's nowcast part and its partial-month notes, from a MonthResult."""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import pandas as pd

if TYPE_CHECKING:  # pragma: no cover
    from .monthly import MonthResult
from ._briefing import _how
from ._html import _absent, _section, esc, table_html

READ_BAND = (
    "The reported count is what has arrived by the as-of date; the estimate adds the reports "
    "that usually still come in, and a guess for units that sent nothing (never taken as "
    "zero). The 90% interval is for reporting delay only: the week's final count will "
    "probably fall inside it; a wide interval means little of the week is in yet.",
    "A dash instead of an interval: no delay interval can be given, because the area sent "
    "nothing that week or past weeks show no report arriving this early; the estimate then "
    "rests on the guess for the silent units and has no band.",
    "<b>Status</b>: reported, the week is past the usual reporting delay and every unit "
    "sent its count; estimated, late reports or units that sent nothing are estimated.",
)


def coverage_note(result: MonthResult) -> str:
    """One line saying how much of the month is in (empty when the nowcast did not run)."""
    cov = result.month_coverage
    if not cov:
        return ""
    month = f"{pd.Period(result.month, freq='M'):%B %Y}"
    return (
        f'<p class="note"><strong>{esc(month)}: {esc(cov["note"])}; figures given as reported '
        "and nowcast-adjusted.</strong> Reported counts "
        "are what has arrived by the as-of date; nowcast-adjusted adds the expected late reports "
        "and an estimate for units that sent nothing.</p>"
    )


def _area_names(rows: pd.DataFrame, result: MonthResult) -> list[str]:
    """Name of each region/country row: "whole region" or the country as the config labels it."""
    label = result.config.country_label
    return [
        "whole region" if lv == "region" else label(g)
        for lv, g in zip(rows["level"], rows["group"], strict=True)
    ]


def adjusted_rates_table(result: MonthResult) -> str:
    """Region and country month rates, as reported and nowcast-adjusted, side by side."""
    a = result.month_adjusted_by_area
    if a is None:
        return ""
    part = a[a["level"].isin(["region", "country"])].copy()
    part["area"] = _area_names(part, result)
    cols = {
        "area": "area",
        "reported_cases": "cases reported",
        "adjusted_cases": "cases nowcast-adjusted",
        "reported_rate": "rate reported /100,000",
        "adjusted_rate": "rate nowcast-adjusted /100,000",
        "weeks_estimated": "weeks still arriving",
    }
    return "<h3>The month: reported and nowcast-adjusted</h3>" + table_html(
        part.set_index("area"),
        {k: v for k, v in cols.items() if k != "area"},
        index="area",
        kinds={"reported_cases": "int", "adjusted_cases": "int", "weeks_estimated": "int"},
    )


def nowcast_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    """Render the latest weeks per country and for the region: reported, estimate, interval."""
    body = _absent(result, "nowcast")
    nc = result.nowcast
    if nc is not None:
        # How much of the month is in is said once, in the headline.
        body += _how(*READ_BAND)
        recent = nc[nc["level"].isin(["region", "country"])]
        last = sorted(recent["week"].unique())[-4:]
        recent = recent[recent["week"].isin(last)].copy()
        recent["area"] = _area_names(recent, result)
        recent["week"] = pd.to_datetime(recent["week"]).dt.strftime("%Y-%m-%d")
        recent["interval"] = [
            "-" if lo != lo or hi != hi else f"{lo:,.0f} to {hi:,.0f}"
            for lo, hi in zip(recent["lower"], recent["upper"], strict=True)
        ]
        cols = {
            "week": "week starting",
            "reported": "reported",
            "estimate": "estimate",
            "interval": "90% interval (delay)",
            "units_imputed": "units with no report (estimated)",
            "status": "status",
        }
        for area, part in recent.groupby("area", sort=False):
            body += f"<h3>{esc(area)}</h3>" + table_html(
                part.set_index("week").drop(columns="area"),
                {k: v for k, v in cols.items() if k != "week"},
                index="week starting",
                kinds={"reported": "int", "estimate": "int", "units_imputed": "int"},
            )
        body += (
            '<p class="note">Every area and week, provinces included, is in tables/nowcast.csv.</p>'
        )
    return _section("Latest weeks (nowcast)", body, "nowcast")
