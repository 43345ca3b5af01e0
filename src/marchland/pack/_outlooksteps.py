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
# Each origin refits the model on every unit, so a continent's month has fewer origins: at
# most this many unit-origins (13 origins every 2 weeks up to 2,000 units; 3 origins every 8
# weeks from 8,667 units on), never fewer than 3. At 10,000 units three origins still score
# 30,000 unit-weeks per horizon; each origin there costs about 16 s of CPU (RESULTS.md).
BACKTEST_UNIT_ORIGINS = 26_000
BACKTEST_MIN_ORIGINS = 3
PANEL_SOURCE = (
    "nowcast-filled panel (recent weeks scaled for late reports, "
    "unreported unit-weeks imputed from the unit's share of its country)"
)


def filled_panel(ctx: Any) -> pd.DataFrame:
    """Wide unit x week cases (NaN unknown) from ``fill_gaps`` on the as-of date, cached."""
    cached = getattr(ctx, "_filled_wide", None)
    if cached is not None:
        return cached
    d = _need("delays", "filled")
    # Straight from fill_gaps' units x weeks arrays: its long table and two pivots of it held
    # about 1 GB at 50,000 units for a panel of 33 MB.
    f = d.filled(ctx.counts, ctx.units, as_of=ctx.as_of)
    rows = f.rows
    cols = slice(int(f.start.min()) if len(f.start) else 0, None)  # weeks with a row
    weeks = pd.DatetimeIndex(f.weeks[cols], name="week")
    wide = pd.DataFrame(f.cases[:, cols], index=f.ids, columns=weeks).reindex(ctx.units.index)
    names = np.asarray(d.PANEL_STATUSES, dtype=object)[f.status[:, cols]]
    names[~rows[:, cols]] = np.nan
    status = pd.DataFrame(names, index=f.ids, columns=weeks).reindex(ctx.units.index)
    wide.attrs["status"] = status
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


def start_forecast(ctx: Any) -> Any:
    """Start :func:`forecast_step` in a forked copy of this process (``compute.in_background``).

    The filled panel is made here first, so the cluster scan uses the same one without making
    it again; an error making it is left for the steps to meet and report. Local processes
    only: with a Dask cluster (whose client does not survive a fork) or one worker, the step
    runs here at once. The panel made here is not sent back from the copy (it is this
    process's own: 94 MB pickled at 50,000 units).
    """
    import contextlib
    import time

    from ..compute import in_background, release_memory

    with contextlib.suppress(Exception):
        filled_panel(ctx)
    # What filling the panel freed goes back before the fork: the copy's resident pages start
    # from this process's.
    release_memory()
    panel = getattr(ctx, "_filled_wide", None)
    ex = _executor(ctx.cfg)
    workers = ex.workers if ex.backend == "processes" else 1

    def timed() -> tuple[dict[str, Any], float]:
        t0 = time.perf_counter()
        fields = forecast_step(ctx)
        if panel is not None and fields.get("filled_panel") is panel:
            del fields["filled_panel"]
        return fields, time.perf_counter() - t0

    return _Ahead(in_background(timed, workers=workers), panel)


class _Ahead:
    """The forecast's background job, with the filled panel it was started from."""

    def __init__(self, job: Any, panel: pd.DataFrame | None):
        self.job, self.panel = job, panel

    def cancel(self) -> None:
        """Stop the job if it is still running."""
        self.job.cancel()

    def result(self) -> tuple[dict[str, Any], float]:
        """Wait for the job; its fields with the filled panel put back."""
        fields, seconds = self.job.result()
        if self.panel is not None:
            fields.setdefault("filled_panel", self.panel)
        return fields, seconds


def finish_forecast(job: Any, alongside: dict[str, float]) -> dict[str, Any]:
    """Wait for :func:`start_forecast`'s step and record its own seconds in ``alongside``.

    Its errors are raised here, for the run to report as any step's.
    """
    fields, seconds = job.result()
    alongside["forecast"] = round(seconds, 3)
    return fields


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


def backtest_origins(n_units: int) -> tuple[int, int]:
    """Return the month's backtest origins and the weeks between them, for ``n_units`` units.

    13 origins every 2 weeks while ``n_units`` x 13 stays within ``BACKTEST_UNIT_ORIGINS``;
    beyond, as many as fit (never fewer than ``BACKTEST_MIN_ORIGINS``) spread over the same
    26 weeks.

    Examples
    --------
    >>> backtest_origins(196), backtest_origins(5_000), backtest_origins(50_000)
    ((13, 2), (5, 5), (3, 8))
    """
    most = BACKTEST_SPAN_WEEKS // BACKTEST_STEP_WEEKS
    n = min(most, max(BACKTEST_MIN_ORIGINS, BACKTEST_UNIT_ORIGINS // max(n_units, 1)))
    return n, max(BACKTEST_STEP_WEEKS, BACKTEST_SPAN_WEEKS // n)


def backtest_summary(ctx: Any, pj: Any) -> pd.DataFrame:
    """Backtest at every 2nd week of the last 26 (origins one lag after each week ended).

    With many units there are fewer origins, further apart (:func:`backtest_origins`).
    """
    weeks = pd.DatetimeIndex(sorted(ctx.counts["week"].unique()))
    last = weeks.max() - FORECAST_HORIZON_WEEKS * pd.Timedelta(weeks=1)
    first_ok = weeks.min() + 8 * pd.Timedelta(weeks=1)  # the model's fitting window
    start = max(first_ok, last - (BACKTEST_SPAN_WEEKS - 1) * pd.Timedelta(weeks=1))
    n, step = backtest_origins(len(ctx.units))
    cand = pd.date_range(end=last, periods=n, freq=f"{7 * step}D")
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
        f"{len(cand)} origins, every {step} weeks from {cand.min():%Y-%m-%d} "
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
