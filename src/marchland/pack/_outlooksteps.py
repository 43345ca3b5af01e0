"""Monthly steps for emerging clusters and the four-week forecast (private to ``monthly``).

Both scan or fit the nowcast-filled unit x week panel of :func:`marchland.delays.fill_gaps`
as known on the as-of date: the latest weeks are scaled up for late reports and unreported
unit-weeks are imputed, so units with a gap are kept rather than dropped (a gap is never read
as zero). Units the filling could not estimate ("unknown") stay out and are counted.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from ..inputs.weeks import week_month
from ._steps import _executor, _need

CLUSTER_WINDOW_WEEKS = 12  # three months of baseline behind the cylinders (as the scan default)
CLUSTER_MAX_WEEKS = 4
# A cluster base holds at most this many units: an excess spread over more districts is no
# longer a local signal, and without a cap the scan grows with the square of the units (at
# 10,000 districts it took 27 minutes and 15 GB; capped at 50 units the scan took 14 s).
CLUSTER_MAX_UNITS = 100
FORECAST_HORIZON_WEEKS = 4
FORECAST_CONF = 0.9
# The monthly backtest: every 2nd week over the last 26 weeks (13 origins), fewer paths than the
# full backtest (every week, whole history), so the month stays quick; the CLI can run the full.
BACKTEST_STEP_WEEKS = 2
BACKTEST_SPAN_WEEKS = 26
BACKTEST_PATHS = 200
PANEL_SOURCE = (
    "nowcast-filled panel (recent weeks scaled for late reports, "
    "unreported unit-weeks imputed from the unit's share of its country)"
)


def filled_panel(ctx: Any) -> pd.DataFrame:
    """Wide unit x week cases (NaN unknown) from ``fill_gaps`` on the as-of date, cached."""
    cached = getattr(ctx, "_filled_wide", None)
    if cached is not None:
        return cached
    d = _need("delays", "fill_gaps")
    long = d.fill_gaps(ctx.counts, ctx.units, as_of=ctx.as_of)
    wide = long.pivot(index="unit_id", columns="week", values="cases")
    wide = wide.reindex(ctx.units.index).sort_index(axis=1)
    wide.columns = pd.DatetimeIndex(wide.columns, name="week")
    status = long.pivot(index="unit_id", columns="week", values="status").reindex(wide.index)
    wide.attrs["status"] = status.reindex(columns=wide.columns)
    ctx._filled_wide = wide
    return wide


def clusters_step(ctx: Any) -> dict[str, Any]:
    """Emerging clusters over the month's last weeks, from the filled panel."""
    cl = _need("clusters", "emerging_clusters")
    wide = filled_panel(ctx)
    in_month = (week_month(pd.Series(wide.columns)) <= ctx.period).to_numpy()
    window = wide.loc[:, in_month].iloc[:, -CLUSTER_WINDOW_WEEKS:]
    unknown = window.isna().any(axis=1)
    # The space-time permutation needs whole cases: the filled values are rounded.
    panel = window.loc[~unknown].round().astype(float)
    status = window.attrs.get("status", wide.attrs["status"]).reindex(
        index=panel.index, columns=panel.columns
    )
    out = cl.emerging_clusters(
        None,
        ctx.units,
        as_of=ctx.as_of,
        panel=panel,
        max_weeks=CLUSTER_MAX_WEEKS,
        max_units=CLUSTER_MAX_UNITS,
        permutations=ctx.cfg.analysis.permutations,
        seed=ctx.seed,
    )
    out.attrs.update(
        panel=PANEL_SOURCE,
        units_scanned=len(panel),
        units_unknown=[str(u) for u in window.index[unknown]],
        units_imputed=int((status == "imputed").any(axis=1).sum()),
    )
    return {"clusters": out}


def forecast_step(ctx: Any) -> dict[str, Any]:
    """Four-week forecast as of the as-of date from the filled panel, and a lean backtest."""
    pj = _need("projections", "forecast", "backtest_forecast")
    wide = filled_panel(ctx)
    fc = pj.forecast(
        ctx.counts,
        ctx.units,
        ctx.graph,
        as_of=ctx.as_of,
        horizon_weeks=FORECAST_HORIZON_WEEKS,
        conf=FORECAST_CONF,
        seed=ctx.seed,
        panel=wide,
    )
    areas = pd.concat(
        [fc.aggregate(by).assign(level=by) for by in ("region", "country", "province")]
    )
    return {
        "forecast": fc,
        "forecast_areas": areas,
        "forecast_backtest": backtest_summary(ctx, pj),
        "filled_panel": wide,
    }


def backtest_summary(ctx: Any, pj: Any) -> pd.DataFrame:
    """Backtest at every 2nd week of the last 26 (origins one lag after each week ended)."""
    weeks = pd.DatetimeIndex(sorted(ctx.counts["week"].unique()))
    last = weeks.max() - FORECAST_HORIZON_WEEKS * pd.Timedelta(weeks=1)
    first_ok = weeks.min() + 8 * pd.Timedelta(weeks=1)  # the model's fitting window
    start = max(first_ok, last - (BACKTEST_SPAN_WEEKS - 1) * pd.Timedelta(weeks=1))
    cand = pd.date_range(end=last, periods=BACKTEST_SPAN_WEEKS // BACKTEST_STEP_WEEKS, freq="14D")
    cand = cand[cand >= start]
    lag = pd.Timedelta(days=7 + ctx.cfg.region.as_of_lag_days)
    # The origins run on the [compute] executor (one seed per origin: the same table for any
    # worker count); forked local workers start at once, so two pay even on the demo.
    with _executor(ctx.cfg) as ex:
        bt = pj.backtest_forecast(
            ctx.counts,
            ctx.units,
            ctx.graph,
            origins=cand + lag,
            horizon_weeks=FORECAST_HORIZON_WEEKS,
            n_paths=BACKTEST_PATHS,
            seed=ctx.seed,
            conf=FORECAST_CONF,
            executor=ex,
        )
    bt.attrs["origins"] = (
        f"{len(cand)} origins, every {BACKTEST_STEP_WEEKS} weeks from {cand.min():%Y-%m-%d} "
        f"to {cand.max():%Y-%m-%d}, {BACKTEST_PATHS} paths each"
        if len(cand)
        else "no origin"
    )
    return bt


def forecast_table(fc: Any, units: pd.DataFrame) -> pd.DataFrame:
    """Per unit and week, the forecast with names, for ``tables/forecast.csv``."""
    t = fc.table.copy()
    t.insert(0, "name", units["name"].reindex(t.index))
    t.insert(1, "country", units["country"].reindex(t.index))
    return t.sort_index(kind="stable")


def clusters_table(clusters: pd.DataFrame) -> pd.DataFrame:
    """Clusters with their unit list as one text field (for CSV and the GeoPackage)."""
    t = clusters.copy()
    t["units"] = [";".join(u) for u in t["units"]]
    t["panel"] = clusters.attrs.get("panel", "")
    return t


def clusters_layer(clusters: pd.DataFrame, units: Any) -> Any:
    """One polygon per cluster: the union of its units (None when there is none)."""
    import geopandas as gpd

    if clusters is None or not len(clusters):
        return None
    geoms = [units.geometry.reindex(list(u)).union_all() for u in clusters["units"]]
    t = clusters_table(clusters)
    return gpd.GeoDataFrame(t, geometry=geoms, crs=units.crs)


def finite(v: Any) -> bool:
    """Return True for a finite number."""
    try:
        return bool(np.isfinite(float(v)))
    except (TypeError, ValueError):
        return False
