"""The latest weeks as they really are: the monthly run's nowcast step, composed.

Private to :mod:`marchland.pack` (the monthly step calls :func:`recent_weeks`). Two parts of
:mod:`marchland.delays` meet here:

- ``fill_gaps`` / ``aggregate_panel`` give the point estimate of every area and week: reported
  unit-weeks scaled up for late revisions, units that sent nothing imputed (never added as
  zero). This is the curve drawn over the bars and the cases behind the adjusted rates.
- ``nowcast`` gives the interval for the reporting delay. Its width (lower and upper minus its
  own point) is carried over to the gap-aware point; the band therefore covers the delay only,
  not the guess for silent units (those weeks are flagged by ``units_imputed``).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from ..inputs.weeks import month_weeks, week_month

LEVELS = ("region", "country", "province")
NOWCAST_COLUMNS = (
    "level",
    "group",
    "week",
    "in_month",
    "delay_weeks",
    "reported",
    "estimate",
    "lower",
    "upper",
    "units",
    "units_imputed",
    "units_unknown",
    "status",
)
# A week counts as still arriving while the estimated part still to come is at least this share
# of its estimate (or the estimate is missing); below it the week is taken as complete. A 2%
# change moves neither a rate's rounding nor the epicurve visibly (common practice).
STILL_TO_COME = 0.02


def arriving(table: pd.DataFrame) -> pd.Series:
    """Mark the weeks still arriving: not final and 2% or more of the estimate still to come.

    Examples
    --------
    >>> t = pd.DataFrame({"status": ["estimated", "estimated", "reported"],
    ...                   "reported": [99.5, 90.0, 10.0], "estimate": [100.0, 100.0, 10.0]})
    >>> arriving(t).tolist()
    [False, True, False]
    """
    est, rep = table["estimate"], table["reported"].fillna(0)
    to_come = est.isna() | (((est - rep).abs() >= STILL_TO_COME * est.abs()) & (est != rep))
    return table["status"].ne("reported") & to_come


def _band(nc: pd.DataFrame, key: str) -> pd.DataFrame:
    """Offsets of the delay interval from the nowcast's own point, per (group, week)."""
    ok = nc["status"].eq("nowcast")
    out = pd.DataFrame(
        {
            "group": nc[key].astype(str),
            "week": nc["week"],
            "lo_off": (nc["lower"] - nc["nowcast"]).where(ok),
            "hi_off": (nc["upper"] - nc["nowcast"]).where(ok),
            "delay_weeks": nc["delay_weeks"],
        }
    )
    return out


def recent_weeks(
    counts: pd.DataFrame,
    units: pd.DataFrame,
    *,
    as_of: pd.Timestamp,
    period: pd.Period,
    max_delay_weeks: int = 8,
    conf: float = 0.9,
    seed: int | None = None,
    province: pd.Series | None = None,
    levels: tuple[str, ...] = LEVELS,
) -> dict[str, Any]:
    """Nowcast table, month rates as reported and nowcast-adjusted, and the month's coverage.

    Parameters
    ----------
    counts : pandas.DataFrame
        Every version received by ``as_of``, weeks up to the month's last week.
    units : pandas.DataFrame
        Analysis units (``country parent_id level population``).
    as_of, period
        The run's as-of date and month.
    max_delay_weeks, conf, seed
        As :func:`marchland.delays.nowcast`.
    province : pandas.Series, optional
        Unit -> province id (default: the parent of level-2 units, else the unit).
    levels : tuple of str
        Levels of the nowcast table, a subset of ``LEVELS`` (all by default; the month note
        needs "region").

    Returns
    -------
    dict
        ``nowcast`` (one row per level, group and week: ``NOWCAST_COLUMNS``),
        ``month_adjusted`` (per unit: ``reported_cases adjusted_cases adjusted_rate``),
        ``month_adjusted_by_area`` (per level and group) and ``month_coverage``.
    """
    from ..delays import aggregate_filled, filled, nowcast

    units = units.copy()
    if province is None:
        province = units["parent_id"].where(units["level"] != 1)
        province = province.fillna(pd.Series(units.index, index=units.index)).astype(str)
    # aggregate_panel reads provinces from parent_id: make every unit's parent its province.
    units["parent_id"] = province.reindex(units.index)
    units["level"] = 2
    # The filled panel as units x weeks arrays (fill_gaps' long table without its strings:
    # at 50,000 units that table and its grouped copies were most of the step's memory).
    panel = filled(counts, units, as_of=as_of, max_delay_weeks=max_delay_weeks)
    frames = []
    bad = [lv for lv in levels if lv not in LEVELS]
    if bad:
        raise ValueError(f"'levels' must be drawn from {LEVELS}; got {bad}.")
    for level in levels:
        agg = aggregate_filled(panel, units, by=level).rename(columns={level: "group"})
        nc = nowcast(
            counts,
            as_of=as_of,
            by=level,
            max_delay_weeks=max_delay_weeks,
            conf=conf,
            seed=seed,
            units=units,
        )
        band = _band(nc, "region" if level == "region" else level)
        agg = agg.merge(band, on=["group", "week"], how="left")
        agg["level"] = level
        frames.append(agg)
    t = pd.concat(frames, ignore_index=True)
    age = ((as_of.normalize() - (t["week"] + pd.Timedelta(days=6))).dt.days // 7).astype(int)
    t["delay_weeks"] = age
    t["estimate"] = t["cases"]
    # An imputed unit is an estimate even when its guess is 0.
    t.loc[t["status"].eq("reported") & (t["units_imputed"] > 0), "status"] = "estimated"
    young = t["status"].ne("reported")
    t["lower"] = (t["estimate"] + t["lo_off"]).where(young, t["estimate"])
    t["upper"] = (t["estimate"] + t["hi_off"]).where(young, t["estimate"])
    # No delay interval (pattern says nothing comes this early, or a silent area): the point
    # still stands, the band is left out rather than drawn as certain.
    t["lower"] = t["lower"].clip(lower=t["reported"]).where(t["lower"].notna())
    t["in_month"] = (week_month(t["week"]) == period).to_numpy()
    t = t[(week_month(t["week"]) <= period).to_numpy()]
    table = t.loc[:, list(NOWCAST_COLUMNS)].reset_index(drop=True)

    in_month = panel.long((week_month(pd.Series(panel.weeks)) == period).to_numpy())
    del panel
    g = in_month.groupby("unit_id")
    per_unit = pd.DataFrame(
        {
            "reported_cases": g["reported"].sum(min_count=1),
            "adjusted_cases": g["cases"].sum(min_count=1),
        }
    ).reindex(units.index)
    unknown = in_month["status"].eq("unknown").groupby(in_month["unit_id"]).any()
    per_unit.loc[unknown[unknown].index, "adjusted_cases"] = np.nan
    pop = units["population"].astype(float)
    per_unit["population"] = pop
    per_unit["reported_rate"] = per_unit["reported_cases"] / pop * 100_000
    per_unit["adjusted_rate"] = per_unit["adjusted_cases"] / pop * 100_000
    per_unit.index.name = "unit_id"

    mt = table[table["in_month"]]
    ga = mt.groupby(["level", "group"], sort=False)
    by_area = pd.DataFrame(
        {
            "reported_cases": ga["reported"].sum(),
            "adjusted_cases": ga["estimate"].sum(min_count=1),
            "weeks_estimated": arriving(mt).groupby([mt["level"], mt["group"]], sort=False).sum(),
            "incomplete": ga["status"].agg(lambda s: bool(s.eq("incomplete").any())),
        }
    )
    by_area.loc[by_area["incomplete"], "adjusted_cases"] = np.nan
    popg = {
        "region": pd.Series({"region": pop.sum()}),
        "country": pop.groupby(units["country"]).sum(),
        "province": pop.groupby(units["parent_id"]).sum(),
    }
    by_area["population"] = [popg[lv].get(gr, np.nan) for lv, gr in by_area.index.to_list()]
    by_area["reported_rate"] = by_area["reported_cases"] / by_area["population"] * 100_000
    by_area["adjusted_rate"] = by_area["adjusted_cases"] / by_area["population"] * 100_000
    by_area = by_area.reset_index()
    return {
        "nowcast": table,
        "month_adjusted": per_unit,
        "month_adjusted_by_area": by_area,
        "month_coverage": month_coverage(period, as_of, table),
    }


def month_coverage(period: pd.Period, as_of: pd.Timestamp, table: pd.DataFrame) -> dict[str, Any]:
    """How much of the month is in on ``as_of``: weeks ended, weeks still arriving, a note.

    ``weeks_estimated`` counts the region's weeks still arriving (see :func:`arriving`: 2% or
    more of the week's estimate still to come); a young week whose expected change is smaller
    counts as complete, so the note says which weeks can still move.

    Examples
    --------
    >>> t = pd.DataFrame({"level": "region", "week": pd.to_datetime(["2026-10-05"]),
    ...                   "status": ["estimated"], "reported": [50.0], "estimate": [60.0]})
    >>> month_coverage(pd.Period("2026-10", "M"), pd.Timestamp("2026-10-15"), t)["note"]
    'weeks 1-2 of 5 in'
    >>> w = pd.date_range("2026-09-28", periods=5, freq="7D")
    >>> t = pd.DataFrame({"level": "region", "week": w, "status": "estimated",
    ...                   "reported": [100.0, 100, 100, 99, 80], "estimate": 100.0})
    >>> month_coverage(pd.Period("2026-10", "M"), pd.Timestamp("2026-11-04"), t)["note"]
    'all 5 weeks in; the last week still arriving (2% or more of the count still to come)'
    """
    first_day = 0
    if len(table):
        first_day = int(pd.Timestamp(table["week"].min()).day_of_week)
    weeks = month_weeks(period, first_day)
    ended = weeks[(weeks + pd.Timedelta(days=6)) <= as_of.normalize()]
    reg = table[table["level"].eq("region") & table["week"].isin(weeks)]
    late = arriving(reg).to_numpy()[np.argsort(reg["week"].to_numpy())]
    n_est = int(late.sum())
    n, k = len(weeks), len(ended)
    rule = f"{STILL_TO_COME:.0%} or more of the count still to come"
    if k < n:
        note = f"weeks 1-{k} of {n} in" if k else f"no week of {n} ended yet"
    elif n_est:
        # Say "the last" only when the weeks still arriving are the month's last ones.
        tail = bool(late[len(late) - n_est :].all())
        which = ("the last week" if n_est == 1 else f"the last {n_est}") if tail else f"{n_est}"
        note = f"all {n} weeks in; {which} still arriving ({rule})"
    else:
        note = f"all {n} weeks in and complete (under {STILL_TO_COME:.0%} still to come in each)"
    return {"weeks": n, "weeks_in": k, "weeks_estimated": n_est, "partial": k < n, "note": note}
