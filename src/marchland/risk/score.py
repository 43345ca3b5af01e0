"""Border risk: which still-unaffected units are likely to report a first case soon.

A discrete-time hazard model with complementary log-log link for "first case within h weeks",
fitted on the outbreak's own history of (unit, week) risk sets, scores every *candidate* (an
analysis unit with no case to date that lies within two graph steps of an affected one; with
``reintroduction_weeks``, also one whose last episode is over by spread's rule of reported
case-free weeks, :func:`marchland.spread.arrival.affected_episodes`) and
shows each score with its parts. Islands (no neighbour and no link) are never candidates:
add a link (``[graph] links``) to bring one in. :func:`backtest_risk` replays the model week
by week on the data as it was known then and compares it with two simple baselines.

Features (all from the as-of view of the counts, so late reports never leak from the future),
each with a ``part_<name>`` column in the result (its contribution to the linear predictor,
relative to the average risk set the model was fitted on):

``near_pressure``
    ``log(1 + sum_j w_ij r_j)``: recent incidence ``r_j`` (cases per 100,000 in the last
    ``recent_weeks`` weeks) of first-order neighbours, weighted by shared boundary length
    (row sums of one, so it is incidence along the unit's own border).
``far_pressure``
    The same over second-order neighbours (two steps), equal weights.
``cross_share``
    The share of ``near_pressure``'s sum that comes across a national border (0 when none).
``growth``
    ``log(1 + recent) - log(1 + before)``: neighbours' cases within two steps in the last
    ``recent_weeks`` weeks against the ``recent_weeks`` weeks before.
``distance_km``
    Boundary-to-boundary distance to the nearest affected unit within two steps, in km
    (0 for a unit sharing a boundary with one).
``log_population``
    Natural log of the unit's population.
covariates
    Any columns of the ``covariates=`` table (indexed by unit id), e.g. a zonal mean of an
    access-to-water raster; each becomes a feature under its own name.

Caution: decision support, not a diagnosis. Reporting is incomplete and delayed, small numbers
are unstable, and a unit that is silent (no reports) may already have cases. Defer to national
authorities and field epidemiologists.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from ..compute import Executor, default_workers
from ..errors import InputError
from . import _backtest
from . import _features as rf
from ._backtest import Backtest
from ._model import (
    FEATURES,
    PRIOR_COEFFICIENTS,
    PRIOR_WEEKLY_INTERCEPT,
    RiskModel,
    _check_counts,
    _check_options,
    _fit,
    _panel_at,
    _score,
    slim_counts,
)

if TYPE_CHECKING:  # pragma: no cover
    import geopandas as gpd
    from libpysal.graph import Graph

    from ..graph.border import BorderGraph

__all__ = [
    "RiskModel",
    "Backtest",
    "fit_risk_model",
    "border_risk",
    "run_backtest",
    "backtest_risk",
    "PRIOR_COEFFICIENTS",
    "PRIOR_WEEKLY_INTERCEPT",
    "FEATURES",
]


def _known_panel(
    counts, units, graph, as_of, covariates, recent_weeks, reintroduction_weeks, min_cases
):
    """Build the static arrays and the panel of the data known on ``as_of`` (fit and score)."""
    _check_counts(counts)
    static = rf.build_static(units, graph, covariates)
    date = pd.Timestamp(as_of)
    panel, week = _panel_at(
        slim_counts(counts, static, date),
        static,
        date,
        week0=None,
        recent_weeks=recent_weeks,
        reintroduction_weeks=reintroduction_weeks,
        min_cases=min_cases,
    )
    return static, date, panel, week


def _fit_known(known, horizon_weeks, min_events, penalty, min_cases) -> RiskModel:
    """Fit the model on what :func:`_known_panel` built (fit_risk_model, border_risk)."""
    static, date, panel, week = known
    return _fit(
        panel,
        static.features,
        as_of=date,
        week=week,
        horizon_weeks=horizon_weeks,
        min_events=min_events,
        penalty=penalty,
        min_cases=min_cases,
    )


def fit_risk_model(
    counts: pd.DataFrame,
    units: gpd.GeoDataFrame,
    graph: BorderGraph | Graph,
    *,
    as_of: object,
    horizon_weeks: int = 4,
    recent_weeks: int = 3,
    reintroduction_weeks: int | None = None,
    min_events: int = 10,
    penalty: float = 1.0,
    min_cases: int = 1,
    covariates: pd.DataFrame | None = None,
) -> RiskModel:
    """Fit the border-risk hazard model on the history known on ``as_of``.

    The risk sets are (unit, week) pairs where the unit was a candidate at the end of week
    ``t``; the outcome is a case in weeks ``t + 1 .. t + h``. Only pairs whose whole outcome
    window lies within the last complete week known on ``as_of`` are used.

    Parameters
    ----------
    counts : pandas.DataFrame
        Counts at analysis-unit level with every accepted version (``unit_id week cases
        received ...``); the as-of view is taken here.
    units : geopandas.GeoDataFrame
        Analysis units indexed by ``unit_id`` with ``country``, ``population`` and geometry in
        metres.
    graph : BorderGraph or libpysal.graph.Graph
        The contiguity graph (links included).
    as_of : date-like
        Use only reports received on or before this date.
    horizon_weeks : int, default 4
        Outcome window ``h``.
    recent_weeks : int, default 3
        Weeks of incidence behind the pressure features (and each half of ``growth``).
    reintroduction_weeks : int, optional
        Also treat a previously affected unit as a candidate once this many *reported* weeks
        without a case have passed since its last case (weeks nobody reported are unknown,
        not quiet): the rule of :func:`marchland.spread.arrival.affected_episodes`, so a unit is a
        candidate exactly when spread would count its next case as a new episode. ``None``:
        only never-affected units are candidates.
    min_events : int, default 10
        Fewer first cases than this in the history: use :data:`PRIOR_COEFFICIENTS`.
    penalty : float, default 1.0
        Ridge penalty on the standardised coefficients (a normal prior with variance
        ``1 / penalty``); 0 gives the plain maximum-likelihood fit.
    min_cases : int, default 1
        Cases in a week that make a unit affected.
    covariates : pandas.DataFrame, optional
        Extra unit-level features (numeric columns, indexed by ``unit_id``).

    Returns
    -------
    RiskModel

    References
    ----------
    Allison, P. D. (1982). Discrete-time methods for the analysis of event histories.
    Sociological Methodology 13, 61-98.
    Hoerl, A. E., & Kennard, R. W. (1970). Ridge regression. Technometrics 12, 55-67.

    Examples
    --------
    >>> counts, units, graph = _example()
    >>> m = fit_risk_model(counts, units, graph, as_of="2026-03-30", horizon_weeks=2)
    >>> m.kind, m.n_events < 10
    ('prior', True)
    """
    _check_options(horizon_weeks, recent_weeks, min_events, penalty)
    known = _known_panel(
        counts, units, graph, as_of, covariates, recent_weeks, reintroduction_weeks, min_cases
    )
    return _fit_known(known, horizon_weeks, min_events, penalty, min_cases)


def border_risk(
    counts: pd.DataFrame,
    units: gpd.GeoDataFrame,
    graph: BorderGraph | Graph,
    *,
    as_of: object,
    horizon_weeks: int = 4,
    recent_weeks: int = 3,
    silent_weeks: int = 3,
    reintroduction_weeks: int | None = None,
    min_events: int = 10,
    penalty: float = 1.0,
    min_cases: int = 1,
    covariates: pd.DataFrame | None = None,
    model: RiskModel | None = None,
) -> pd.DataFrame:
    """Probability that each candidate unit reports a first case within ``horizon_weeks``.

    Fits :func:`fit_risk_model` on the history known on ``as_of`` (or uses ``model``) and
    scores every candidate at the last complete week known on ``as_of``.

    Parameters
    ----------
    counts, units, graph, as_of, horizon_weeks, recent_weeks, reintroduction_weeks, \
min_events, penalty, min_cases, covariates
        As in :func:`fit_risk_model`.
    silent_weeks : int, default 3
        A candidate with no report at all (not even a zero) in the last this many weeks is
        flagged ``silent``: it may have cases nobody has reported. It is still ranked.
    model : RiskModel, optional
        Score with this model instead of fitting one (same features and horizon).

    Returns
    -------
    pandas.DataFrame
        Indexed by ``unit_id``, sorted by ``rank`` (1 = most likely), columns
        ``probability rank cross_border silent drivers country``, one ``part_<feature>`` per
        feature (contribution to the linear predictor; they sum with ``attrs["baseline"]`` to
        it), the raw feature values under their own names, ``affected_neighbours`` and
        ``note``. A candidate of unknown population is listed last with probability NaN, rank
        ``<NA>`` and a note saying it was not scored.
        ``drivers`` lists up to three affected units within two steps, strongest first.
        ``attrs`` holds ``model`` ("fitted" or "prior"), ``note``, ``expected_new_units``
        (the sum of probabilities), ``coefficients``, ``as_of``, ``week``, ``n_events``.

    References
    ----------
    Allison, P. D. (1982). Discrete-time methods for the analysis of event histories.
    Sociological Methodology 13, 61-98.

    Examples
    --------
    >>> counts, units, graph = _example()
    >>> risk = border_risk(counts, units, graph, as_of="2026-03-30", horizon_weeks=2)
    >>> risk.index.tolist(), risk.attrs["model"]
    (['c', 'd'], 'prior')
    >>> bool(risk.loc["c", "probability"] > risk.loc["d", "probability"])
    True
    """
    _check_options(horizon_weeks, recent_weeks, min_events, penalty, silent_weeks)
    known = _known_panel(
        counts, units, graph, as_of, covariates, recent_weeks, reintroduction_weeks, min_cases
    )
    static, _, panel, _ = known
    if model is None:
        model = _fit_known(known, horizon_weeks, min_events, penalty, min_cases)
    elif tuple(model.features) != static.features:
        raise InputError(
            f"the model's features {list(model.features)} differ from these inputs' "
            f"{list(static.features)}"
        )
    return _score(model, panel, static, silent_weeks=silent_weeks)


def run_backtest(
    counts: pd.DataFrame,
    units: gpd.GeoDataFrame,
    graph: BorderGraph | Graph,
    *,
    horizon_weeks: int = 4,
    origins: Sequence[object] | None = None,
    min_history_weeks: int = 8,
    report_lag_days: int = 3,
    top_k: int = 10,
    recent_weeks: int = 3,
    reintroduction_weeks: int | None = None,
    min_events: int = 10,
    penalty: float = 1.0,
    min_cases: int = 1,
    covariates: pd.DataFrame | None = None,
    n_jobs: int = 1,
    as_of: object = None,
    forecast_paths: int = 0,
    seed: int | None = None,
    executor: Executor | None = None,
    every_weeks: int = 1,
) -> Backtest:
    """Rolling-origin backtest with the by-country and by-origin breakdowns.

    At each origin week ``t`` the data are taken as known ``report_lag_days`` after the week
    ended; the model is fitted on the risk sets whose outcome was known then (weeks up to
    ``t - h``), every candidate at ``t`` is scored, and the score is compared with the final
    data: did the unit report a case in a week up to ``t + h``? The two baselines are the same
    hazard model with a single feature: ``distance`` (distance to the nearest affected unit)
    and ``neighbours`` (count of affected first-order neighbours).

    Parameters
    ----------
    counts, units, graph, horizon_weeks, recent_weeks, reintroduction_weeks, min_events, \
penalty, min_cases, covariates
        As in :func:`fit_risk_model`.
    origins : sequence of date-like, optional
        Origin weeks (any day within the week); default every week from ``min_history_weeks``
        after the first reported case to ``horizon_weeks`` before the last reported week.
    min_history_weeks : int, default 8
    every_weeks : int, default 1
        With the default origins, take every ``every_weeks``-th of them, counted back from the
        last (a continent's month: each origin refits the model on every unit).
    report_lag_days : int, default 3
        Days after an origin week's end at which the data are taken as known.
    top_k : int, default 10
        ``hits_top_k`` counts events among the ``top_k`` highest-scored candidates per origin.
    n_jobs : int, default 1
        Local worker processes over origins (-1: one per CPU) when no ``executor`` is given;
        results do not depend on it.
    as_of : date-like, optional
        Replay only what was known on this date: reports received later are dropped first,
        so outcomes too are judged on the data of that date (for a monthly report).
    forecast_paths : int, default 0
        With ``n > 0``, also score the forecast model (:func:`marchland.projections.forecast`,
        ``n`` simulated paths per origin) as model ``forecast``: P(at least one case within
        the horizon) from its paths. About a second per origin on the demo, hence off by
        default.
    seed : int, optional
        Seed of the forecast model's paths.
    executor : marchland.compute.Executor, optional
        Where the origins run (this process, local processes or a Dask cluster, as
        ``[compute]`` sets); overrides ``n_jobs``. Results do not depend on it. Where local
        processes cannot be forked (not Linux), they are started only when units x origins
        reach ``marchland.risk._backtest.SERIAL_BELOW`` (below it their start-up costs more).

    Returns
    -------
    Backtest

    References
    ----------
    Tashman, L. J. (2000). Out-of-sample tests of forecasting accuracy: an analysis and review.
    International Journal of Forecasting 16, 437-450.
    Hanley, J. A., & McNeil, B. J. (1982). The meaning and use of the area under a receiver
    operating characteristic (ROC) curve. Radiology 143, 29-36.
    Brier, G. W. (1950). Verification of forecasts expressed in terms of probability.
    Monthly Weather Review 78, 1-3.

    Examples
    --------
    >>> counts, units, graph = _example()
    >>> bt = run_backtest(counts, units, graph, horizon_weeks=1, min_history_weeks=1, top_k=1)
    >>> bt.summary.index.tolist()
    ['score', 'distance', 'neighbours']
    >>> int(bt.summary.loc["score", "n_origins"]) > 0
    True
    """
    _check_counts(counts)
    _check_options(horizon_weeks, recent_weeks, min_events, penalty)
    if not isinstance(top_k, (int, np.integer)) or top_k < 1:
        raise InputError(f"'top_k' needs to be a whole number >= 1. {top_k!r} was given instead.")
    if not isinstance(every_weeks, (int, np.integer)) or every_weeks < 1:
        raise InputError(f"'every_weeks' needs to be a whole number >= 1; {every_weeks!r} given.")
    if not isinstance(n_jobs, (int, np.integer)) or n_jobs == 0:
        raise InputError(f"'n_jobs' needs to be a non-zero whole number. {n_jobs!r} given.")
    if executor is None:
        executor = Executor(
            workers=n_jobs if n_jobs > 0 else max(1, default_workers() + 1 + n_jobs)
        )
    static = rf.build_static(units, graph, covariates)
    return _backtest.run(
        counts,
        static,
        horizon_weeks=horizon_weeks,
        origins=origins,
        min_history_weeks=min_history_weeks,
        report_lag_days=report_lag_days,
        top_k=top_k,
        recent_weeks=recent_weeks,
        reintroduction_weeks=reintroduction_weeks,
        min_events=min_events,
        penalty=penalty,
        min_cases=min_cases,
        executor=executor,
        as_of=as_of,
        forecast=(units, graph, int(forecast_paths), seed) if forecast_paths else None,
        every_weeks=every_weeks,
    )


def backtest_risk(
    counts: pd.DataFrame,
    units: gpd.GeoDataFrame,
    graph: BorderGraph | Graph,
    *,
    horizon_weeks: int = 4,
    origins: Sequence[object] | None = None,
    min_history_weeks: int = 8,
    report_lag_days: int = 3,
    top_k: int = 10,
    recent_weeks: int = 3,
    reintroduction_weeks: int | None = None,
    min_events: int = 10,
    penalty: float = 1.0,
    min_cases: int = 1,
    covariates: pd.DataFrame | None = None,
    n_jobs: int = 1,
    as_of: object = None,
    by: str | None = None,
    forecast_paths: int = 0,
    seed: int | None = None,
    executor: Executor | None = None,
) -> pd.DataFrame:
    """Rolling-origin backtest of :func:`border_risk` against two baselines.

    Parameters are those of :func:`run_backtest` (which also gives the per-origin detail and
    the predictions), plus ``by``.

    Parameters
    ----------
    counts, units, graph, horizon_weeks, origins, min_history_weeks, report_lag_days, top_k, \
recent_weeks, reintroduction_weeks, min_events, penalty, min_cases, covariates, n_jobs, \
as_of, forecast_paths, seed, executor
        As in :func:`run_backtest`.
    by : {None, "country"}, optional
        ``"country"``: one row per model and country instead of per model.

    Returns
    -------
    pandas.DataFrame
        Indexed by ``model`` (rows ``score``, ``distance``, ``neighbours``, and ``forecast``
        with ``forecast_paths``), columns ``auc
        brier hits_top_k n_origins n_scored n_events``.

    References
    ----------
    Hanley, J. A., & McNeil, B. J. (1982). Radiology 143, 29-36.

    Examples
    --------
    >>> counts, units, graph = _example()
    >>> bt = backtest_risk(counts, units, graph, horizon_weeks=1, min_history_weeks=1, top_k=1)
    >>> list(bt.columns[:4])
    ['auc', 'brier', 'hits_top_k', 'n_origins']
    """
    if by not in (None, "country"):
        raise InputError(f"'by' needs to be one of (None, 'country'). {by!r} was given instead.")
    bt = run_backtest(
        counts,
        units,
        graph,
        horizon_weeks=horizon_weeks,
        origins=origins,
        min_history_weeks=min_history_weeks,
        report_lag_days=report_lag_days,
        top_k=top_k,
        recent_weeks=recent_weeks,
        reintroduction_weeks=reintroduction_weeks,
        min_events=min_events,
        penalty=penalty,
        min_cases=min_cases,
        covariates=covariates,
        n_jobs=n_jobs,
        as_of=as_of,
        forecast_paths=forecast_paths,
        seed=seed,
        executor=executor,
    )
    return bt.summary if by is None else bt.by_country


def _example():
    """Five squares in a row, a-b in country X, c-d-e in Y; cases in a, then b."""
    import geopandas as gpd
    from shapely.geometry import box

    from ..graph.border import BorderGraph

    ids = list("abcde")
    units = gpd.GeoDataFrame(
        {"country": ["X", "X", "Y", "Y", "Y"], "population": [5e4, 8e4, 1e5, 6e4, 9e4]},
        geometry=[box(i * 1e4, 0, (i + 1) * 1e4, 1e4) for i in range(5)],
        index=pd.Index(ids, name="unit_id"),
        crs="EPSG:3035",
    )
    pairs = [(a, b) for a, b in zip(ids, ids[1:], strict=False)]
    f = [p[0] for p in pairs] + [p[1] for p in pairs]
    n = [p[1] for p in pairs] + [p[0] for p in pairs]
    cb = [units.loc[x, "country"] != units.loc[y, "country"] for x, y in zip(f, n, strict=True)]
    edges = pd.DataFrame(
        {
            "focal": f,
            "neighbor": n,
            "shared_m": 1e4,
            "gap_m": 0.0,
            "cross_border": cb,
            "kind": "shared-boundary",
        }
    )
    graph = BorderGraph(edges, pd.Index(ids))
    weeks = pd.date_range("2026-01-05", periods=12, freq="7D")
    cases = {"a": [1, 3, 6, 9, 7, 5, 4, 3, 2, 2, 1, 1], "b": [0] * 5 + [2, 4, 6, 5, 3, 2, 1]}
    cases.update({u: [0] * 12 for u in "cde"})
    cases["c"][11] = 1
    rows = [
        (u, w, c, w + pd.Timedelta(days=8))
        for u in ids
        for w, c in zip(weeks, cases[u], strict=True)
    ]
    counts = pd.DataFrame(rows, columns=["unit_id", "week", "cases", "received"])
    counts["cases"] = counts["cases"].astype("Int64")
    counts["deaths"] = pd.array([0] * len(counts), dtype="Int64")
    counts["source"] = "example"
    counts["row"] = np.arange(1, len(counts) + 1)
    return counts, units, graph
