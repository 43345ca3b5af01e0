"""The monthly run: every analysis for one month, composed, with no file output.

:func:`run_month` reads the region (``region.open_region``) and runs, in order: rates (the
month, the trailing windows, cumulative; smoothed beside raw; province, country and region
aggregates), hotspots (rate-adjusted local Moran's I, global Moran's I, Getis-Ord Gi*), spread
(first cases, fronts, velocity, probable cross-border introductions), border risk and its
backtest, and supplies (priorities and depots). It returns a frozen :class:`MonthResult`
holding every table the bundle writes, the time each step took and the warnings raised.

A step whose module (or one of the steps it needs) is not available, or whose statistic the
month's data cannot carry (an InputError from the analysis, e.g. every rate equal), is recorded
in ``MonthResult.absent`` with the reason and its fields stay ``None``: nothing is faked. A bad
input file still stops the run (the inputs are read before any step).

Weeks and months: a week belongs to the month holding its fourth day (the ISO rule for years,
applied to months), so each week counts in exactly one month. The default as-of date is the
month's last day plus ``region.as_of_lag_days``.
"""

from __future__ import annotations

import os
import time
import warnings
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, is_dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ..compute import one_blas_thread, release_memory
from ..config.load import load_config
from ..config.schema import Config
from ..errors import DataWarning, InputError
from ..inputs.weeks import week_month
from . import _outlooksteps as _outlook
from ._steps import _Absent, _Context, _need, risk_covariates, risk_options

Progress = Callable[[str, str, float | None], None]

STEPS = (
    "read inputs",
    "graph",
    "set-up",
    "rates",
    "nowcast",
    "hotspots",
    "spread",
    "border risk",
    "backtest",
    "clusters",
    "forecast",
    "supplies",
)


@dataclass(frozen=True, eq=False)
class MonthResult:
    """Everything one month's bundle shows; built by :func:`run_month`.

    Fields of a step that did not run are ``None`` and the step is named in ``absent`` with
    the reason. Tables are pandas objects indexed by ``unit_id`` unless said otherwise.

    Attributes
    ----------
    config : Config
    month : str
        ``"YYYY-MM"``.
    as_of : pandas.Timestamp
        The data are read as received by this date.
    seed : int
    run_date : pandas.Timestamp or None
        The date report weeks were judged against (a week after it is rejected as
        "future-week"): the run's ``run_date``, else its as-of date; recorded in the manifest so
        that the same files give the same rejects on another day.
    units : geopandas.GeoDataFrame
        Analysis units (``name country level parent_id population geometry``).
    weekly : pandas.DataFrame
        The as-of view of the counts up to the month's end: ``unit_id week cases deaths``.
    rates : pandas.DataFrame
        Per unit: ``<window>_cases _rate _lower _upper _weeks_reported`` for each window
        (``month``, ``last_<N>w``, ``cumulative``), ``<window>_rate_eb`` (global empirical
        Bayes) and ``<window>_rate_seb`` (spatial EB), and the cumulative CFR columns.
    rates_history : pandas.DataFrame
        Month attack rate per unit for the last six months (columns ``YYYY-MM``).
    rates_by_area : pandas.DataFrame
        Province, country and region rates from summed counts, one row per area and window.
    nowcast : pandas.DataFrame
        The latest weeks as they really are, per ``level`` (region, country, province),
        ``group`` and ``week``: ``reported``, ``estimate`` (reported scaled for late revisions
        plus an estimate for units that sent nothing; never a gap added as zero), ``lower``
        ``upper`` (the delay interval), ``units_imputed``, ``status`` (reported, estimated,
        incomplete). See :mod:`marchland.pack._recent`.
    month_adjusted, month_adjusted_by_area : pandas.DataFrame
        The month's cases and attack rate as reported and nowcast-adjusted, per unit and per
        area (``reported_cases adjusted_cases reported_rate adjusted_rate``).
    month_coverage : dict
        ``weeks weeks_in weeks_estimated partial note``: how much of the month is in.
    hotspots : pandas.DataFrame
        ``I p q quadrant label`` (+ Gi* columns ``gi_z gi_p`` when available).
    global_moran : dict
        ``I expected p permutations`` for the headline.
    fronts, front_outlines, velocity, introductions, introductions_by_border
        From :mod:`marchland.spread.arrival`.
    risk : pandas.DataFrame
        From :func:`marchland.risk.score.border_risk`; ``risk.attrs`` has ``expected_new_units``.
    backtest, backtest_by_country : pandas.DataFrame
        Indexed by ``model`` (``score distance neighbours``).
    clusters : pandas.DataFrame
        Emerging space-time clusters (:func:`marchland.clusters.emerging_clusters`) on the
        nowcast-filled panel; ``attrs`` say which panel and how many units were scanned.
    forecast, forecast_areas, forecast_backtest
        The four-week :class:`marchland.projections.Forecast` from the filled panel, its sums
        per region, country and province (``level`` column), and a lean backtest.
    filled_panel : pandas.DataFrame
        The nowcast-filled unit x week cases both steps used (NaN: unknown).
    priorities, depots, depot_sites, depot_assignment, supply_totals, supply_totals_by_depot
        From :mod:`marchland.supplies.plan`; the totals are per country and per depot catchment
        (each candidate in the catchment of its nearest open depot).
    supplies_affected : pandas.DataFrame
        Districts with cases to date (not border-risk candidates): supply quantities sized to
        the config's upper quantile of the forecast 4-week case total
        (:func:`marchland.supplies.plan.affected_quantities`); None without a forecast.
    timings : dict
        Seconds per step, in this process: they add up to the run. A step run in a forked copy
        alongside others (the forecast) counts the time it was waited for.
    alongside : dict
        Seconds a step took in a forked copy while the steps after it ran here (not in
        ``timings``' sum).
    warnings : tuple of str
        Data warnings raised during the run.
    absent : dict
        Step -> why it did not run.
    """

    config: Config
    month: str
    as_of: pd.Timestamp
    seed: int
    units: Any
    all_units: Any = None
    weekly: pd.DataFrame | None = None
    rejects: pd.DataFrame | None = None
    completeness: pd.DataFrame | None = None
    completeness_by_country: pd.DataFrame | None = None
    accounting: Any = None
    matches: pd.DataFrame | None = None
    graph: Any = None
    edges: Any = None
    rates: pd.DataFrame | None = None
    rates_history: pd.DataFrame | None = None
    rates_by_area: pd.DataFrame | None = None
    nowcast: pd.DataFrame | None = None
    month_adjusted: pd.DataFrame | None = None
    month_adjusted_by_area: pd.DataFrame | None = None
    month_coverage: dict | None = None
    hotspots: pd.DataFrame | None = None
    global_moran: dict | None = None
    first_cases: pd.Series | None = None
    fronts: pd.DataFrame | None = None
    front_outlines: Any = None
    velocity: Any = None
    introductions: pd.DataFrame | None = None
    introductions_by_border: pd.DataFrame | None = None
    risk: pd.DataFrame | None = None
    backtest: pd.DataFrame | None = None
    backtest_by_country: pd.DataFrame | None = None
    priorities: pd.DataFrame | None = None
    supply_note: str | None = None
    depots: Any = None
    depot_sites: Any = None
    depot_assignment: pd.DataFrame | None = None
    supply_totals: pd.DataFrame | None = None
    supply_totals_by_depot: pd.DataFrame | None = None
    supplies_affected: pd.DataFrame | None = None
    clusters: pd.DataFrame | None = None
    forecast: Any = None
    forecast_areas: pd.DataFrame | None = None
    forecast_backtest: pd.DataFrame | None = None
    filled_panel: pd.DataFrame | None = None
    cluster_colours: Mapping[str, str] | None = None
    cluster_legend: Mapping[str, str] | None = None
    cluster_significant: tuple[str, ...] = ()
    run_date: pd.Timestamp | None = None
    timings: dict[str, float] = field(default_factory=dict)
    alongside: dict[str, float] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    absent: dict[str, str] = field(default_factory=dict)

    @property
    def month_weeks(self) -> pd.DatetimeIndex:
        """Start days of the weeks that belong to the month (their fourth day in it)."""
        weeks = (
            pd.DatetimeIndex(sorted(self.weekly["week"].unique()))
            if self.weekly is not None
            else pd.DatetimeIndex([])
        )
        period = pd.Period(self.month, freq="M")
        return weeks[(week_month(pd.Series(weeks)) == period).to_numpy()]

    @property
    def headline(self) -> dict[str, Any]:
        """The report's headline numbers (``None`` where the step did not run)."""
        h: dict[str, Any] = dict.fromkeys(
            (
                "cases",
                "deaths",
                "rate",
                "rate_lower",
                "rate_upper",
                "newly_affected",
                "affected",
                "units",
                "global_moran_i",
                "global_moran_p",
                "expected_new_units",
                "candidates",
            ),
        )
        h["units"] = len(self.units)
        if self.rates_by_area is not None:
            reg = self.rates_by_area
            row = reg[(reg["level"] == "region") & (reg["window"] == "month")]
            if len(row):
                r = row.iloc[0]
                h.update(
                    cases=_num(r["cases"]),
                    rate=_num(r["rate"]),
                    rate_lower=_num(r["lower"]),
                    rate_upper=_num(r["upper"]),
                )
        if self.rates is not None and "month_deaths" in self.rates:
            d = self.rates["month_deaths"]
            h["deaths"] = int(d.sum()) if d.notna().any() else None
        if self.fronts is not None:
            fw = pd.to_datetime(self.fronts["first_week"])
            h["affected"] = int(fw.notna().sum())
            h["newly_affected"] = int(fw.isin(self.month_weeks).sum())
        if self.global_moran is not None:
            h["global_moran_i"] = self.global_moran.get("I")
            h["global_moran_p"] = self.global_moran.get("p")
        if self.risk is not None:
            h["expected_new_units"] = self.risk.attrs.get(
                "expected_new_units", float(self.risk["probability"].sum())
            )
            h["candidates"] = len(self.risk)
        return h

    @property
    def inputs(self) -> list[Path]:
        """Every input file the config names (boundaries, raster, reports, tables)."""
        return config_inputs(self.config)


def _num(v: Any) -> float | None:
    try:
        f = float(v)
    except (TypeError, ValueError):
        return None
    return None if f != f else f


# --- config helpers -------------------------------------------------------------------------
def config_inputs(config: Config) -> list[Path]:
    """List every existing input file named anywhere in the config, sorted, once each.

    Walks the config's dataclasses for ``Path`` values (and the report specs' matched files),
    so a new input key is picked up without a change here.

    Examples
    --------
    >>> from marchland.demo import scenario_path
    >>> names = {p.name for p in config_inputs(load_config(scenario_path()))}
    >>> {"population.tif", "links.csv", "depots.csv"} <= names
    True
    """
    found: set[Path] = set()

    def walk(obj: Any) -> None:
        if isinstance(obj, Path):
            if obj.is_file():
                found.add(obj.resolve())
        elif isinstance(obj, (list, tuple)):
            for o in obj:
                walk(o)
        elif hasattr(obj, "__dataclass_fields__"):
            for name in obj.__dataclass_fields__:
                if name == "path" and obj is config:
                    continue
                walk(getattr(obj, name))

    walk(config)
    return sorted(found)


def parse_month(month: str | pd.Period) -> pd.Period:
    """Parse ``"YYYY-MM"`` into a monthly Period (InputError naming the value otherwise).

    Examples
    --------
    >>> parse_month("2026-10")
    Period('2026-10', 'M')
    """
    try:
        if isinstance(month, str) and not (len(month) == 7 and month[4] == "-"):
            raise ValueError
        return pd.Period(month, freq="M")
    except (ValueError, TypeError):
        raise InputError(
            "the month needs to be YYYY-MM (e.g. 2026-10)", column="month", value=month
        ) from None


def default_as_of(config: Config, month: str | pd.Period) -> pd.Timestamp:
    """Return the month's last day plus the config's ``region.as_of_lag_days``.

    Examples
    --------
    >>> from marchland.demo import scenario_path
    >>> default_as_of(load_config(scenario_path()), "2026-10")
    Timestamp('2026-11-03 00:00:00')
    """
    p = parse_month(month)
    return p.end_time.normalize() + pd.Timedelta(days=config.region.as_of_lag_days)


def _open_region(cfg: Config, today: pd.Timestamp | None = None) -> Any:
    return _need("pack.region", "open_region").open_region(cfg, today=today)


# --- the run --------------------------------------------------------------------------------
class _Runner:
    def __init__(self, progress: Progress | None) -> None:
        self.progress = progress
        self.timings: dict[str, float] = {}
        self.absent: dict[str, str] = {}

    def __call__(
        self,
        name: str,
        fn: Callable[[], Any],
        *,
        needs: tuple[str, ...] = (),
        data_limited: bool = True,
    ) -> Any:
        for dep in needs:
            if dep in self.absent:
                self.absent[name] = f"needs the {dep} step ({self.absent[dep]})"
                return None
        if self.progress is not None:
            self.progress(name, "start", None)
        t0 = time.perf_counter()
        try:
            value = fn()
        except _Absent as exc:
            self.absent[name] = str(exc)
            value = None
        except InputError as exc:
            if not data_limited:
                raise
            # The month's data cannot carry this statistic (e.g. every rate equal): say so and
            # go on, so the rest of the month's bundle is still written.
            self.absent[name] = f"not computable on this month's data: {exc}"
            value = None
        # What the step freed goes back to the system (milliseconds), so the next step and
        # the forked copies start from a smaller process.
        release_memory()
        self.timings[name] = round(time.perf_counter() - t0, 3)
        if self.progress is not None:
            self.progress(name, "done", self.timings[name])
        return value


def run_month(
    config: Config | str | os.PathLike[str],
    month: str | pd.Period | None = None,
    *,
    as_of: object = None,
    run_date: object = None,
    progress: Progress | None = None,
    on_month: Callable[[str], None] | None = None,
) -> MonthResult:
    """Run every analysis of one month and return the results (no file is written).

    Parameters
    ----------
    config : Config or path
        A loaded config or the path of its TOML file.
    month : str, optional
        ``"YYYY-MM"``; default the month of the latest reported week.
    as_of : date-like, optional
        Read the data as received by this date; default the month's end plus
        ``region.as_of_lag_days``.
    run_date : date-like, optional
        Report weeks starting after this date are rejected as "future-week". Default: the
        month's as-of date (its end plus ``region.as_of_lag_days``, or ``as_of`` if later);
        without a month, ``as_of``, else today's date. Recorded in the result (and the
        manifest), so a rerun on another day gives the same rejects.
    progress : callable, optional
        Called as ``progress(step, "start", None)`` and ``progress(step, "done", seconds)``.
    on_month : callable, optional
        Called with ``"YYYY-MM"`` once the month is known (after the inputs are read, before
        any analysis), e.g. to refuse early when that month's bundle exists.

    Returns
    -------
    MonthResult

    Examples
    --------
    >>> import warnings
    >>> from marchland.demo import scenario_path
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     result = run_month(scenario_path(), "2026-10")
    >>> result.month, f"{result.as_of:%Y-%m-%d}", result.absent
    ('2026-10', '2026-11-03', {})
    >>> result.headline["cases"] > 0 and result.headline["expected_new_units"] > 0
    True
    """
    t0 = time.perf_counter()
    cfg = config if isinstance(config, Config) else load_config(config)
    config_s = time.perf_counter() - t0
    run = _Runner(progress)
    alongside: dict[str, float] = {}
    given = parse_month(month) if month is not None else None
    as_of_ts = pd.Timestamp(as_of) if as_of is not None else None
    if run_date is not None:
        judged = pd.Timestamp(run_date).normalize()
    elif given is not None:
        # Never before the month's own as-of date: an early --as-of is refused below by name
        # (nothing received by then), not by every row turning "future".
        judged = default_as_of(cfg, given)
        judged = judged if as_of_ts is None else max(judged, as_of_ts.normalize())
    elif as_of_ts is not None:
        judged = as_of_ts.normalize()
    else:  # the latest month: not known before reading, so today's date (recorded)
        judged = pd.Timestamp.now().normalize()
    # BLAS on one thread: the parallel work is processes, and sums keep one order everywhere.
    with warnings.catch_warnings(record=True) as caught, one_blas_thread():
        warnings.simplefilter("always", DataWarning)
        region = run("read inputs", lambda: _open_region(cfg, judged), data_limited=False)
        if region is None:
            raise InputError(f"cannot read the region: {run.absent['read inputs']}", file=cfg.path)
        period = given if given is not None else parse_month(_latest_week_month(region.counts))
        if as_of_ts is None:
            as_of_ts = default_as_of(cfg, period)
        _require_data(region.counts, period, as_of_ts)
        if on_month is not None:
            on_month(str(period))
        # Completeness as known on the as-of date is the run's one use of the reports on each
        # source's own unit ids: recount it now and let that second copy of every version go
        # (about 250 MB at 50,000 units) before the graph, the steps and the forked copies.
        recount = _completeness_as_of(region, period, as_of_ts)
        if is_dataclass(region):  # a Region (a stand-in may be any namespace)
            region = replace(region, reports=None)
        fields: dict[str, Any] = {}
        fields.update(run("graph", lambda: _graph_fields(region)))

        # The as-of views and the risk covariates (zonal means of rasters) are a step of their
        # own, so the manifest's step times add up to the run.
        def set_up() -> _Context:
            fields.update(_region_fields(region, period, as_of_ts), **recount)
            return _Context(cfg, region, period, as_of_ts)

        ctx = run("set-up", set_up, data_limited=False)
        run.timings["set-up"] = round(run.timings["set-up"] + config_s, 3)  # reading the config

        # The forecast with its backtest, the longest analysis, needs only the filled panel:
        # it runs in a forked copy while rates, nowcast, hotspots, spread, risk and clusters
        # go on here.
        ahead = _outlook.start_forecast(ctx)
        try:
            fields.update(run("rates", ctx.rates) or {})
            fields.update(run("nowcast", ctx.nowcast) or {})
            fields.update(run("hotspots", ctx.hotspots) or {})
            fields.update(run("spread", ctx.spread) or {})
            risk = run("border risk", ctx.risk)
            fields.update(risk or {})
            fields.update(run("backtest", ctx.backtest) or {})
            fields.update(run("clusters", lambda: _outlook.clusters_step(ctx)) or {})
            forecast = run("forecast", lambda: _outlook.finish_forecast(ahead, alongside))
            fields.update(forecast or {})
        finally:
            ahead.cancel()  # a step failed before the forecast was waited for
        fields.update(
            run(
                "supplies",
                lambda: ctx.supplies(fields.get("risk"), fields.get("forecast")),
                needs=("border risk",),
            )
            or {}
        )
    messages = []
    for w in caught:
        if issubclass(w.category, DataWarning):
            messages.append(str(w.message))
        else:  # not ours to collect: hand it on as if never caught
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return MonthResult(
        config=cfg,
        month=str(period),
        as_of=as_of_ts,
        seed=cfg.region.seed,
        run_date=judged,
        timings=dict(run.timings),
        alongside=alongside,
        warnings=tuple(dict.fromkeys(messages)),
        absent=dict(run.absent),
        **fields,
    )


def _require_data(counts: pd.DataFrame, period: pd.Period, as_of: pd.Timestamp) -> None:
    """Raise InputError unless some accepted report row of the month was received by ``as_of``.

    Checked before any analysis, so a wrong month or as-of date is refused at once.
    """
    weeks = pd.to_datetime(counts["week"])
    months = week_month(weeks)
    in_month = (months == period).to_numpy()
    if not in_month.any():
        span = (
            f"the reports run from {weeks.min():%Y-%m-%d} to {weeks.max():%Y-%m-%d}"
            if len(weeks)
            else "no report row was accepted"
        )
        raise InputError(f"no report covers {period}; {span}", column="month", value=str(period))
    received = pd.to_datetime(counts["received"]).to_numpy()[in_month]
    if not (received <= np.datetime64(as_of, "ns")).any():
        first = pd.Series(received).min()
        raise InputError(
            f"no report of {period} had been received by the as-of date; the first arrived on "
            f"{first:%Y-%m-%d}",
            column="as_of",
            value=f"{as_of:%Y-%m-%d}",
        )


def _latest_week_month(counts: pd.DataFrame) -> str:
    weeks = pd.to_datetime(counts["week"])
    if not len(weeks):
        raise InputError("no report row was accepted, so there is no month to analyse")
    return str(week_month(pd.Series([weeks.max()])).iloc[0])


def _region_fields(region: Any, period: pd.Period, as_of: pd.Timestamp) -> dict[str, Any]:
    from ..inputs.reports import as_of as _as_of

    known = _as_of(region.counts, as_of)
    known = known[(week_month(known["week"]) <= period).to_numpy()]
    weekly = known[["unit_id", "week", "cases", "deaths"]].sort_values(["unit_id", "week"])
    out: dict[str, Any] = {
        "units": region.units,
        "all_units": getattr(region, "all_units", None),
        "weekly": weekly.reset_index(drop=True),
        "rejects": getattr(region, "rejects", None),
        "completeness": getattr(region, "completeness", None),
        "completeness_by_country": getattr(region, "completeness_by_country", None),
        "accounting": getattr(region, "accounting", None),
        "matches": getattr(region, "matches", None),
    }
    return out


def _completeness_as_of(region: Any, period: pd.Period, as_of: pd.Timestamp) -> dict[str, Any]:
    """Completeness and "last received" as known on ``as_of``, weeks up to the month's end.

    A run for a past month shows the data as they were then: rows received later, and weeks
    after the month, are left out. Empty when the region holds no raw reports to recount.
    """
    from ..inputs.reports import reporting_completeness

    rep = getattr(region, "reports", None)
    all_units = getattr(region, "all_units", None)
    if rep is None or all_units is None:
        return {}
    c = rep.counts
    keep = (c["received"] <= as_of).to_numpy() & (week_month(c["week"]) <= period).to_numpy()
    unit, country = reporting_completeness(c[keep], all_units, region.config.reports)
    return {"completeness": unit, "completeness_by_country": country}


def _graph_fields(region: Any) -> dict[str, Any]:
    graph = region.graph  # built on first use: this step is where its time shows
    edges_layer = _need("graph", "edges_layer").edges_layer
    return {"graph": graph, "edges": edges_layer(graph, region.units)}


def backtest_table(config: Config | str | os.PathLike[str]) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Backtest the border-risk score of a config over its whole history.

    The same call as the monthly run's backtest step, on every report received.

    Returns
    -------
    summary, by_country : pandas.DataFrame
        Indexed by ``model`` (``score distance neighbours``; ``by_country`` also by
        ``country``) with ``auc brier hits_top_k n_origins`` and the counts behind them.
    """
    cfg = config if isinstance(config, Config) else load_config(config)
    region = _open_region(cfg)
    rk = _need("risk", "run_backtest")
    c = cfg.risk
    bt = rk.run_backtest(
        region.counts,
        region.units,
        region.graph,
        top_k=c.top_k,
        covariates=risk_covariates(cfg, region),
        **risk_options(c),
    )
    return bt.summary, bt.by_country
