"""The rolling-origin backtest behind :func:`marchland.risk.score.run_backtest`."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..compute import Executor
from ..errors import InputError
from ..inputs.reports import as_of as _as_of_view
from . import _features as rf
from . import _hazard
from ._model import (
    _MODEL_FEATURES,
    MODELS,
    Replay,
    _complete_from,
    _complete_week,
    _fit,
    _panel_at,
    slim_counts,
)

#: Below this many unit-origins (units x origin weeks) loky worker processes are not started:
#: on the demo (196 units x 70 origins) the serial backtest took 2.5 s of CPU, two fresh loky
#: workers 7.5 s (their imports), for the same result (benchmarks/bench_backtest.py). Forked
#: workers (Linux) start in milliseconds and are always used; so is a Dask cluster.
SERIAL_BELOW = 100_000


# --- the backtest --------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class Backtest:
    """Rolling-origin backtest of the border-risk model and its baselines.

    Attributes
    ----------
    summary : pandas.DataFrame
        Indexed by ``model`` (``score``, ``distance``, ``neighbours``), columns ``auc brier
        hits_top_k n_origins n_scored n_events``; ``hits_top_k`` is the mean number of the
        top ``top_k`` candidates per origin that did report a case within the horizon.
    by_country : pandas.DataFrame
        The same, indexed by ``model`` and ``country`` (top k taken within the country).
    by_origin : pandas.DataFrame
        The same, indexed by ``model`` and ``origin`` (the last complete week).
    predictions : pandas.DataFrame
        One row per origin and candidate: ``origin unit_id country outcome`` and one
        probability column per model, with ``kind_<model>`` ("fitted"/"prior").
    top_k, horizon_weeks : int
    """

    summary: pd.DataFrame
    by_country: pd.DataFrame
    by_origin: pd.DataFrame
    predictions: pd.DataFrame
    top_k: int
    horizon_weeks: int


def _metrics(pred: pd.DataFrame, model: str, top_k: int) -> dict:
    p = pred[model].to_numpy(dtype=float)
    y = pred["outcome"].to_numpy(dtype=bool)
    # Top k per origin, ties broken by unit id as in border_risk's rank: one lexsort on codes
    # (sorted factorisations keep the order of the values), not a frame sort per group.
    oc = pd.factorize(pred["origin"].to_numpy(), sort=True)[0]
    uc = pd.factorize(pred["unit_id"].to_numpy(), sort=True)[0]
    order = np.lexsort((uc, -p, oc))
    n_origins = int(oc.max()) + 1 if len(oc) else 0
    so = oc[order]
    starts = np.flatnonzero(np.r_[True, so[1:] != so[:-1]]) if len(so) else so
    within = np.arange(len(so)) - np.repeat(starts, np.diff(np.r_[starts, len(so)]))
    top = order[within < top_k]
    hits = np.bincount(oc[top], weights=y[top], minlength=n_origins)
    return {
        "auc": _hazard.auc(p, y),
        "brier": _hazard.brier(p, y),
        "hits_top_k": float(hits.sum() / n_origins) if n_origins else float("nan"),
        "n_origins": n_origins,
        "n_scored": len(pred),
        "n_events": int(y.sum()),
    }


def _table(pred: pd.DataFrame, top_k: int, by: str | None) -> pd.DataFrame:
    rows = []
    groups = [(None, pred)] if by is None else list(pred.groupby(by, sort=True))
    for model in [m for m in (*MODELS, "forecast") if m in pred.columns]:
        for key, g in groups:
            m = _metrics(g, model, top_k)
            rows.append({"model": model, **({} if by is None else {by: key}), **m})
    index = ["model"] if by is None else ["model", by]
    columns = [*index, "auc", "brier", "hits_top_k", "n_origins", "n_scored", "n_events"]
    out = pd.DataFrame(rows, columns=columns).set_index(index)
    return out.astype({"n_origins": "int64", "n_scored": "int64", "n_events": "int64"})


def _origins_task(
    origins: Sequence[int],
    counts: pd.DataFrame | None,
    replay: Replay,
    final_pos: np.ndarray,
    final_complete: np.ndarray,
    static: rf.Static,
    grid: pd.DatetimeIndex,
    params: dict,
) -> list[tuple[int, pd.DataFrame]]:
    """Score every model at each origin (a worker's share of the backtest).

    Returns ``(origin index, predictions)`` pairs, so shares can be put back in origin order.
    ``counts`` (the versions) is needed only when the forecast model is scored: ``replay``
    gives every origin's panel.
    """
    h = params["horizon_weeks"]
    lag = pd.Timedelta(days=params["report_lag_days"])
    r = params["reintroduction_weeks"]
    out = []
    for t in origins:
        date = grid[t] + pd.Timedelta(days=6) + lag
        panel, week = _panel_at(
            counts,
            static,
            date,
            week0=grid[0],
            recent_weeks=params["recent_weeks"],
            reintroduction_weeks=r,
            min_cases=params["min_cases"],
            replay=replay,
        )
        if panel is None:
            continue
        t0 = len(panel.weeks) - 1
        cand = np.flatnonzero(panel.at_risk[:, t0])
        # Candidates of unknown population cannot be scored; they are left out of the test.
        full = rf.matrix(panel, static.features, cand, np.full(len(cand), t0))
        cand = cand[np.isfinite(full).all(axis=1)]
        if not len(cand):
            continue
        # What happened by t0 + h in the final data; cases reported late for weeks up to t0
        # count too: the unit was affected and the score should have found it.
        # A re-introduction candidate's window opens after its last positive week known at t0
        # (its quiet weeks, as spread counts them, may be revised to cases later).
        pos = panel.cases[cand] >= params["min_cases"]
        nt = pos.shape[1]
        lo = np.where(pos.any(axis=1), nt - pos[:, ::-1].argmax(axis=1), 0)
        # Judged on the final data by week of occurrence. A case in a week up to t0 that was
        # reported after the origin is not a new case: the unit was not at risk, leave it out.
        # A window running past the final data's complete weeks is censored, not a negative.
        old = (final_pos[cand, t0 + 1] - final_pos[cand, lo]) > 0
        keep = ~old & (t0 + h <= final_complete[cand])
        cand = cand[keep]
        if not len(cand):
            continue
        outcome = (final_pos[cand, t0 + h + 1] - final_pos[cand, t0 + 1]) > 0
        frame = pd.DataFrame(
            {
                "origin": panel.weeks[-1],
                "unit_id": static.ids[cand],
                "country": static.country[cand],
                "outcome": outcome,
            }
        )
        for model in MODELS:
            names = static.features if model == "score" else _MODEL_FEATURES[model]
            m = _fit(
                panel,
                names,
                as_of=date,
                week=week,
                horizon_weeks=h,
                min_events=params["min_events"],
                penalty=params["penalty"],
                min_cases=params["min_cases"],
            )
            x = rf.matrix(panel, names, cand, np.full(len(cand), t0))
            frame[model] = m.probability(x)
            frame[f"kind_{model}"] = m.kind
        if params.get("forecast") is not None:
            frame["forecast"] = _forecast_any(counts, static, date, cand, h, params["forecast"])
            frame["kind_forecast"] = "fitted"
        out.append((t, frame))
    return out


def _forecast_any(counts, static, date, cand, h, spec) -> np.ndarray:
    """P(at least one case in the next ``h`` weeks) from the forecast model's paths.

    Weeks are combined within each simulated path (any case in any week), which keeps their
    dependence, rather than as ``1 - prod(1 - p_any)``.
    """
    import warnings

    from ..errors import DataWarning
    from ..projections.projection import forecast

    units, graph, n_paths, seed = spec
    known = counts[counts["received"] <= date]
    known = known.assign(unit_id=known["unit_id"].astype(str))
    with warnings.catch_warnings():
        # Islands have no neighbourhood part; the forecast warns, the backtest only scores.
        warnings.simplefilter("ignore", DataWarning)
        f = forecast(known, units, graph, as_of=date, horizon_weeks=h, seed=seed, n_paths=n_paths)
    p = (f.paths > 0).any(axis=0).mean(axis=1)
    return pd.Series(p, index=f.units.index).reindex(static.ids[cand]).to_numpy(dtype=float)


def run(
    counts: pd.DataFrame,
    static: rf.Static,
    *,
    horizon_weeks: int,
    origins: Sequence[object] | None,
    min_history_weeks: int,
    report_lag_days: int,
    top_k: int,
    recent_weeks: int,
    reintroduction_weeks: int | None,
    min_events: int,
    penalty: float,
    min_cases: int,
    executor: Executor,
    as_of: object,
    forecast: tuple | None = None,
    every_weeks: int = 1,
) -> Backtest:
    """Run the backtest on checked inputs (see ``marchland.risk.score.run_backtest``).

    The origins are shared out over ``executor`` (this process, local processes or a Dask
    cluster); every origin's result depends on its week only, and the shares are put back in
    origin order, so the result is the same on every backend and any number of workers.
    """
    # Unit ids as categories of the graph's ids: the as-of view at every origin sorts by unit,
    # and sorting category codes is several times faster than sorting strings.
    slim = slim_counts(counts, static, as_of)
    final = _as_of_view(slim, None)
    empty = _backtest(_empty_predictions(), top_k, horizon_weeks)
    if final.empty:
        return empty
    grid = rf.week_grid(final["week"].min(), final["week"].max())
    final_panel_cases = np.zeros((len(static.ids), len(grid)))
    ui = final["unit_id"].cat.codes.to_numpy()
    wi = grid.get_indexer(final["week"])
    c = pd.to_numeric(final["cases"], errors="coerce").fillna(0).to_numpy(dtype=float)
    del final  # a copy of every version: not kept while the origins run
    np.add.at(final_panel_cases, (ui, wi), c)
    pos = final_panel_cases >= min_cases
    del final_panel_cases, ui, wi, c
    # Positive weeks to date per unit: whole numbers, exact in int32 (half of int64/float64).
    final_pos = np.zeros((len(static.ids), len(grid) + 1), dtype=np.int32)
    np.cumsum(pos, axis=1, dtype=np.int32, out=final_pos[:, 1:])
    last = len(grid) - 1 - horizon_weeks
    if origins is None:
        any_case = np.flatnonzero(pos.any(axis=0))
        if not len(any_case):
            return empty
        idx = list(range(int(any_case[0]) + min_history_weeks, last + 1))
        idx = idx[::-1][::every_weeks][::-1]  # every k-th, the latest kept
    else:
        ts = pd.DatetimeIndex(pd.to_datetime(list(origins)))
        idx = sorted({_complete_week(grid, d + pd.Timedelta(days=6)) for d in ts})
        bad = [grid[0] + pd.Timedelta(days=7 * i) for i in idx if not 0 <= i <= last]
        if bad:
            raise InputError(
                f"origins need {horizon_weeks} weeks of data after them and must lie within "
                f"the reported weeks ({grid[0].date()} to {grid[-1].date()}); "
                f"{bad[0].date()} is outside",
                column="origins",
                value=str(bad[0].date()),
            )
    params = {
        "horizon_weeks": horizon_weeks,
        "report_lag_days": report_lag_days,
        "reintroduction_weeks": reintroduction_weeks,
        "recent_weeks": recent_weeks,
        "min_events": min_events,
        "penalty": penalty,
        "min_cases": min_cases,
        "forecast": forecast,
    }
    # The versions sorted once: each origin's as-of view is then a mask, not a sort.
    replay = Replay.build(slim, static)
    # complete_weeks of the final data, from the first positive receipts Replay found once.
    final_complete = _complete_from(replay.first_receipt, static, len(grid) - 1)
    # The versions placed for the origins' weekday here, once, not in every worker.
    lag = pd.Timedelta(days=report_lag_days)
    replay.versions.prepare([grid[t] + pd.Timedelta(days=6) + lag for t in idx[:1]])
    if (
        executor.backend == "processes"
        and not executor.forks
        and len(static.ids) * len(idx) < SERIAL_BELOW
    ):
        executor = Executor()  # starting worker processes would cost more than the work
    k = max(1, min(executor.parallelism, len(idx)))
    # Interleaved shares balance early (small) and late (large) origins across workers.
    shares = [idx[i::k] for i in range(k)]
    # Replay holds the versions (sorted) for the origins; the slim frame, another copy of
    # them, is kept only for the forecast model's paths.
    forecast_counts = slim if forecast is not None else None
    del slim
    args = (forecast_counts, replay, final_pos, final_complete, static, grid, params)
    parts = executor.map(_origins_task, shares, *args)
    frames = [f for _, f in sorted((p for part in parts for p in part), key=lambda p: p[0])]
    if not frames:
        return empty
    pred = pd.concat(frames, ignore_index=True)
    # Two origin weeks can meet at one scoring week when nobody had reported the later week
    # yet; score that week once.
    pred = pred.drop_duplicates(["origin", "unit_id"]).sort_values(["origin", "unit_id"])
    return _backtest(pred.reset_index(drop=True), top_k, horizon_weeks)


def _backtest(pred: pd.DataFrame, top_k: int, horizon_weeks: int) -> Backtest:
    return Backtest(
        _table(pred, top_k, None),
        _table(pred, top_k, "country"),
        _table(pred, top_k, "origin"),
        pred,
        top_k,
        horizon_weeks,
    )


def _empty_predictions() -> pd.DataFrame:
    cols = {"origin": "datetime64[ns]", "unit_id": object, "country": object, "outcome": bool}
    cols.update({m: float for m in MODELS})
    cols.update({f"kind_{m}": object for m in MODELS})
    return pd.DataFrame({k: pd.Series(dtype=v) for k, v in cols.items()})
