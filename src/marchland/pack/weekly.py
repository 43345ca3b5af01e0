"""The weekly update for partners: one epi week, composed, with no file output.

:func:`run_week` reads the region and, for one epi week as known on its as-of date (the week's
last day plus ``region.as_of_lag_days``), gathers the short update partners get between monthly
packs: cases and deaths by country, epi curves with the nowcast band
(:func:`marchland.delays.nowcasting.nowcast`), units newly affected this week, the week's CFR
with its exact (Clopper-Pearson) interval, border alerts (candidates whose border-risk
probability rose most since the previous week) and reporting completeness by country. The
monthly pack stays the full analysis; :func:`marchland.pack._weekpage.write_week` writes the
folder.
"""

from __future__ import annotations

import os
import re
import warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from ..config.load import load_config
from ..config.schema import Config
from ..errors import DataWarning, InputError
from ._steps import risk_covariates, risk_options

EPI_WEEKS = 12  # weeks of each epi curve on the page
ALERTS = 10  # border alerts listed
_WEEK = re.compile(r"^(\d{4})-W(\d{2})$")


@dataclass(frozen=True, eq=False)
class WeekResult:
    """What one week's update shows; built by :func:`run_week`.

    Attributes
    ----------
    config : Config
    week : str
        ``"YYYY-Www"``.
    start : pandas.Timestamp
        First day of the week.
    as_of : pandas.Timestamp
        Data as received by this date.
    seed : int
    units : geopandas.GeoDataFrame
        Analysis units.
    totals : pandas.DataFrame
        Indexed by country code plus ``"region"``: ``cases deaths units_reporting units``.
    epi : pandas.DataFrame or None
        The nowcast by country for the last ``EPI_WEEKS`` weeks (``country week reported
        nowcast lower upper share_reported status``).
    newly_affected : pandas.DataFrame
        Units whose first case is this week: ``name country cases``.
    cfr : pandas.DataFrame
        The week's ``deaths cases cfr lower upper`` by country and for the region.
    alerts : pandas.DataFrame or None
        Candidates whose border-risk probability rose most since the previous week:
        ``name country probability previous rise rank``.
    completeness : pandas.DataFrame
        Per country: ``units units_reporting share`` this week and ``share_4w`` over four weeks.
    warnings : tuple of str
    absent : dict
        Part -> why it is missing.
    """

    config: Config
    week: str
    start: pd.Timestamp
    as_of: pd.Timestamp
    seed: int
    units: Any
    totals: pd.DataFrame
    epi: pd.DataFrame | None
    newly_affected: pd.DataFrame
    cfr: pd.DataFrame
    alerts: pd.DataFrame | None
    completeness: pd.DataFrame
    warnings: tuple[str, ...] = ()
    absent: dict[str, str] = field(default_factory=dict)


def parse_week(week: str, calendar: str = "iso") -> pd.Timestamp:
    """Return the first day of epi week ``"YYYY-Www"`` (InputError naming the value otherwise).

    Examples
    --------
    >>> parse_week("2026-W42")
    Timestamp('2026-10-12 00:00:00')
    """
    from ..inputs.weeks import from_year_week

    m = _WEEK.match(week) if isinstance(week, str) else None
    start = (
        from_year_week(pd.Series([int(m[1])]), pd.Series([int(m[2])]), calendar).iloc[0]
        if m
        else pd.NaT
    )
    if pd.isna(start):
        raise InputError(
            "the week needs to be YYYY-Www with an existing week number (e.g. 2026-W42)",
            column="week",
            value=week,
        )
    return pd.Timestamp(start)


def run_week(config: Config | str | os.PathLike[str], week: str) -> WeekResult:
    """Gather one epi week's update for partners (no file is written).

    Parameters
    ----------
    config : Config or path
        A loaded config or the path of its TOML file.
    week : str
        ``"YYYY-Www"`` in the config's calendar.

    Returns
    -------
    WeekResult

    Raises
    ------
    marchland.errors.InputError
        A malformed week, a week that has not started yet, or a week no report covers.

    Examples
    --------
    >>> import warnings
    >>> from marchland.demo import scenario_path
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     wk = run_week(scenario_path(), "2026-W42")
    >>> wk.week, f"{wk.as_of:%Y-%m-%d}", int(wk.totals.loc["region", "cases"]) > 0
    ('2026-W42', '2026-10-21', True)
    """
    from . import monthly

    cfg = config if isinstance(config, Config) else load_config(config)
    start = parse_week(week, cfg.region.calendar)
    today = pd.Timestamp.today().normalize()
    if start > today:
        raise InputError(
            f"the week starts on {start:%Y-%m-%d}, after today ({today:%Y-%m-%d})",
            column="week",
            value=week,
        )
    as_of_ts = start + pd.Timedelta(days=6 + cfg.region.as_of_lag_days)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", DataWarning)
        region = monthly._open_region(cfg, as_of_ts)  # "future" judged against the as-of date
        fields = _compose(cfg, region, week, start, as_of_ts)
    messages = []
    for w in caught:
        if issubclass(w.category, DataWarning):
            messages.append(str(w.message))
        else:
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return WeekResult(
        config=cfg,
        week=week,
        start=start,
        as_of=as_of_ts,
        seed=cfg.region.seed,
        units=region.units,
        warnings=tuple(dict.fromkeys(messages)),
        **fields,
    )


def _known(counts: pd.DataFrame, as_of: pd.Timestamp, start: pd.Timestamp) -> pd.DataFrame:
    from ..inputs.reports import as_of as _as_of

    k = _as_of(counts, as_of)
    return k[pd.to_datetime(k["week"]) <= start]


def _compose(cfg: Config, region: Any, week: str, start: pd.Timestamp, as_of: pd.Timestamp):
    units = region.units
    known = _known(region.counts, as_of, start)
    this = known[pd.to_datetime(known["week"]) == start]
    this = this[this["unit_id"].isin(units.index)]
    if not len(this):
        weeks = pd.to_datetime(region.counts["week"])
        span = (
            f"the reports run from {weeks.min():%Y-%m-%d} to {weeks.max():%Y-%m-%d}"
            if len(weeks)
            else "no report row was accepted"
        )
        raise InputError(
            f"no report covers {week} as received by {as_of:%Y-%m-%d}; {span}",
            column="week",
            value=week,
        )
    absent: dict[str, str] = {}
    country = units["country"]
    totals = _totals(this, country)
    cfr = _cfr(totals)
    completeness = _completeness(known, country, start)
    newly = _newly(known, units, start, this)
    epi = None
    try:
        from ..delays.nowcasting import nowcast

        nc = nowcast(region.counts, as_of=as_of, by="country", units=units, seed=cfg.region.seed)
        nc = nc[pd.to_datetime(nc["week"]) <= start]
        first = start - pd.Timedelta(weeks=EPI_WEEKS - 1)
        epi = nc[pd.to_datetime(nc["week"]) >= first].reset_index(drop=True)
    except InputError as exc:
        absent["nowcast"] = str(exc)
    alerts = None
    try:
        alerts = _alerts(cfg, region, start, as_of)
    except InputError as exc:
        absent["border alerts"] = str(exc)
    return {
        "totals": totals,
        "epi": epi,
        "newly_affected": newly,
        "cfr": cfr,
        "alerts": alerts,
        "completeness": completeness,
        "absent": absent,
    }


def _totals(this: pd.DataFrame, country: pd.Series) -> pd.DataFrame:
    rows = this.assign(country=this["unit_id"].map(country))
    deaths = pd.to_numeric(rows["deaths"], errors="coerce")
    g = rows.assign(deaths=deaths).groupby("country")
    by = pd.DataFrame(
        {
            "cases": g["cases"].sum().astype("int64"),
            # Deaths: None where no row of the country carries a death count.
            "deaths": g["deaths"].sum(min_count=1),
            "units_reporting": g["unit_id"].nunique(),
        }
    )
    by = by.reindex(sorted(country.unique()))
    by["units"] = country.value_counts().reindex(by.index)
    by["units_reporting"] = by["units_reporting"].fillna(0).astype("int64")
    # A country that sent nothing this week shows no count, never a zero.
    by["cases"] = by["cases"].astype("Int64").mask(by["units_reporting"] == 0)
    region = pd.DataFrame(
        {
            "cases": [int(by["cases"].sum())],  # sum skips the countries with no report
            "deaths": [by["deaths"].sum(min_count=1)],
            "units_reporting": [int(by["units_reporting"].sum())],
            "units": [int(by["units"].sum())],
        },
        index=["region"],
    )
    out = pd.concat([by, region])
    out.index.name = "country"
    return out


def _cfr(totals: pd.DataFrame) -> pd.DataFrame:
    from ..stats.rates import case_fatality

    ok = totals["deaths"].notna() & totals["cases"].notna()
    out = case_fatality(
        totals.loc[ok, "deaths"].astype("int64"), totals.loc[ok, "cases"].astype("int64")
    )
    return out.reindex(totals.index)


def _completeness(known: pd.DataFrame, country: pd.Series, start: pd.Timestamp) -> pd.DataFrame:
    wk = pd.to_datetime(known["week"])
    k4 = known[(wk > start - pd.Timedelta(weeks=4)) & known["unit_id"].isin(country.index)]
    k4 = k4.assign(country=k4["unit_id"].map(country), this=pd.to_datetime(k4["week"]) == start)
    n = country.value_counts().sort_index()
    this = k4[k4["this"]].groupby("country")["unit_id"].nunique().reindex(n.index, fill_value=0)
    four = (
        k4.drop_duplicates(["unit_id", "week"]).groupby("country").size().reindex(n.index).fillna(0)
    )
    out = pd.DataFrame(
        {
            "units": n.astype("int64"),
            "units_reporting": this.astype("int64"),
            "share": this / n,
            "share_4w": four / (4 * n),
        }
    )
    out.index.name = "country"
    return out


def _newly(known: pd.DataFrame, units: Any, start: pd.Timestamp, this: pd.DataFrame):
    from ..spread.arrival import first_cases

    first = first_cases(known[known["unit_id"].isin(units.index)], units=units.index)
    ids = first.index[pd.to_datetime(first) == start]
    cases = this.groupby("unit_id")["cases"].sum()
    out = units.loc[ids, ["name", "country"]].assign(cases=cases.reindex(ids).astype("Int64"))
    return pd.DataFrame(out).sort_index()


def _alerts(cfg: Config, region: Any, start: pd.Timestamp, as_of: pd.Timestamp) -> pd.DataFrame:
    from ..risk.score import border_risk

    c = cfg.risk
    cov = risk_covariates(cfg, region)

    def score(when: pd.Timestamp) -> pd.DataFrame:
        from ..inputs.reports import as_of as _as_of

        counts = region.counts[pd.to_datetime(region.counts["received"]) <= when]
        counts = _as_of(counts, when)
        return border_risk(
            counts,
            region.units,
            region.graph,
            as_of=when,
            silent_weeks=c.silent_weeks,
            covariates=cov,
            **risk_options(c),
        )

    now = score(as_of)
    before = score(as_of - pd.Timedelta(weeks=1))
    prev = before["probability"].reindex(now.index)
    out = region.units.loc[now.index, ["name", "country"]].assign(
        probability=now["probability"],
        previous=prev,
        rise=now["probability"] - prev.fillna(0.0),
        rank=now["rank"],
    )
    out = pd.DataFrame(out).sort_values(["rise", "probability"], ascending=False, kind="stable")
    return out[np.isfinite(out["rise"])].head(ALERTS)
