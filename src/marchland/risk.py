"""Border risk: which still-unaffected units are likely to report a first case soon.

A discrete-time hazard model with complementary log-log link for "first case within h weeks",
fitted on the outbreak's own history of (unit, week) risk sets, scores every *candidate* (an
analysis unit with no case to date that lies within two graph steps of an affected one) and
shows each score with its parts. :func:`backtest_risk` replays the model week by week on the data
as it was known then and compares it with two simple baselines.

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

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from . import _hazard
from . import _riskfeatures as rf
from .errors import InputError
from .reports import as_of as _as_of_view
from .spread import first_cases

__all__ = [
    "RiskModel",
    "Backtest",
    "fit_risk_model",
    "border_risk",
    "run_backtest",
    "backtest_risk",
    "PRIOR_COEFFICIENTS",
    "PRIOR_WEEKLY_INTERCEPT",
]

FEATURES = rf.FEATURES
MODELS = ("score", "distance", "neighbours")
_MODEL_FEATURES = {
    "distance": ("distance_km",),
    "neighbours": ("affected_neighbours",),
}

#: Prior coefficients (per unit of each raw feature) used when the history holds fewer than
#: ``min_events`` first cases. They are judgement, not estimates from data (no published
#: source): more incidence along the border, more growth, more people and less distance raise
#: the hazard; cross-border exposure is neutral a priori (shown, not weighted). Covariates get 0.
PRIOR_COEFFICIENTS: dict[str, float] = {
    "near_pressure": 0.5,
    "far_pressure": 0.25,
    "cross_share": 0.0,
    "growth": 0.3,
    "distance_km": -0.05,
    "log_population": 0.3,
    "affected_neighbours": 0.5,
}
#: Prior weekly hazard on the cloglog scale for a unit of 100,000 people next to an affected unit
#: with no recent incidence: 1 - exp(-exp(-4)) = 1.8 % a week (judgement). For a horizon of h
#: weeks the intercept is this plus log(h), the cloglog's grouped-time property.
PRIOR_WEEKLY_INTERCEPT = -4.0
_PRIOR_REFERENCE = {"log_population": math.log(1e5)}


@dataclass(frozen=True, eq=False)
class RiskModel:
    """A fitted (or prior) border-risk model, as of one date.

    Attributes
    ----------
    kind : {"fitted", "prior"}
        "prior" when the history held fewer than ``min_events`` first cases.
    features : tuple of str
        Feature names, in the order of the ``part_`` columns.
    coefficients : pandas.Series
        ``intercept`` and one coefficient per feature, per unit of the raw feature.
    std_errors : pandas.Series
        Standard errors of ``coefficients`` (penalised-likelihood information); NaN for a prior.
    standardised : pandas.Series
        Coefficients per standard deviation of each feature (what the penalty acts on).
    center : pandas.Series
        Feature means the ``part_`` columns are measured from.
    as_of, week : pandas.Timestamp
        The as-of date and the last complete week it covers.
    horizon_weeks, n_risk_sets, n_events, penalty : numbers
        ``n_events`` counts units with a first case among the risk sets.
    converged : bool
    note : str
        Why a prior was used, or how the fit went.
    """

    kind: str
    features: tuple[str, ...]
    coefficients: pd.Series
    std_errors: pd.Series
    standardised: pd.Series
    center: pd.Series
    as_of: pd.Timestamp
    week: pd.Timestamp
    horizon_weeks: int
    n_risk_sets: int
    n_events: int
    penalty: float
    converged: bool
    note: str

    def linear_predictor(self, x: np.ndarray) -> np.ndarray:
        """Linear predictor for rows of raw features (columns in ``features`` order)."""
        b = self.coefficients.to_numpy()
        return b[0] + np.asarray(x, dtype=float) @ b[1:]

    def probability(self, x: np.ndarray) -> np.ndarray:
        """Probability of a first case within ``horizon_weeks``."""
        return _hazard.inverse_cloglog(self.linear_predictor(x))

    def intervals(self, conf: float = 0.95) -> pd.DataFrame:
        """Wald intervals of the raw coefficients: ``estimate lower upper``."""
        from scipy import stats

        z = stats.norm.ppf(0.5 + conf / 2)
        est, se = self.coefficients, self.std_errors
        return pd.DataFrame({"estimate": est, "lower": est - z * se, "upper": est + z * se})


# --- preparing the data --------------------------------------------------------------------
def _complete_week(weeks: pd.DatetimeIndex, date: pd.Timestamp) -> int:
    """Index of the last week on the grid whose seven days end on or before ``date``.

    The grid ends at the latest week anyone had reported by then, so the scoring week is the
    latest complete week with data: a week nobody has reported yet is not read as all zeros.
    """
    return int(np.searchsorted(weeks + pd.Timedelta(days=6), date, side="right")) - 1


def _check_options(horizon_weeks, recent_weeks, min_events, penalty, silent_weeks=1) -> None:
    for name, v in (
        ("horizon_weeks", horizon_weeks),
        ("recent_weeks", recent_weeks),
        ("silent_weeks", silent_weeks),
    ):
        if not isinstance(v, (int, np.integer)) or v < 1:
            raise InputError(f"'{name}' needs to be a whole number >= 1. {v!r} was given instead.")
    if not isinstance(min_events, (int, np.integer)) or min_events < 0:
        raise InputError(f"'min_events' needs to be a whole number >= 0. {min_events!r} given.")
    if not (np.isfinite(penalty) and penalty >= 0):
        raise InputError(f"'penalty' needs to be a number >= 0. {penalty!r} was given instead.")


def _check_counts(counts: pd.DataFrame) -> None:
    need = ("unit_id", "week", "cases", "received")
    missing = [c for c in need if c not in counts.columns]
    if missing:
        raise InputError(f"counts need columns {list(need)}; missing {missing}", column=missing[0])


def _panel_at(
    counts: pd.DataFrame,
    static: rf.Static,
    date: pd.Timestamp,
    *,
    week0: pd.Timestamp | None,
    recent_weeks: int,
    reintroduction_weeks: int | None,
    min_cases: int,
) -> tuple[rf.Panel | None, pd.Timestamp | None]:
    """Build the panel of data known on ``date``, cut at its last complete week."""
    view = _as_of_view(counts, date)
    if view.empty:
        return None, None
    start = view["week"].min() if week0 is None else week0
    off = (view["week"] - start) % pd.Timedelta(days=7)
    if (off != pd.Timedelta(0)).any():
        bad = view.loc[off != pd.Timedelta(0)].iloc[0]
        raise InputError(
            "counts mix week calendars: every 'week' must start on the same weekday as "
            f"{start.date()} ({start.day_name()})",
            column="week",
            value=str(pd.Timestamp(bad["week"]).date()),
        )
    grid = rf.week_grid(start, max(view["week"].max(), start))
    t0 = _complete_week(grid, date)
    if t0 < 0:
        return None, None
    weeks = grid[: t0 + 1]
    view = view[view["week"] <= weeks[-1]]
    first = first_cases(view, min_cases=min_cases)
    panel = rf.build_panel(
        view,
        first,
        static,
        weeks,
        recent_weeks=recent_weeks,
        reintroduction_weeks=reintroduction_weeks,
        min_cases=min_cases,
    )
    return panel, weeks[-1]


def _risk_sets(panel: rf.Panel | None, names: tuple[str, ...], horizon_weeks: int, min_cases: int):
    """Features ``x``, outcomes ``y`` and (unit, week) positions of the training risk sets."""
    rows = cols = np.zeros(0, dtype=np.int64)
    y = np.zeros(0, dtype=bool)
    if panel is not None:
        last = len(panel.weeks) - 1 - horizon_weeks
        if last >= 0:
            rows, cols = np.nonzero(panel.at_risk[:, : last + 1])
            y = rf.future_any(panel.cases, horizon_weeks, min_cases)[rows, cols]
    x = rf.matrix(panel, names, rows, cols) if panel is not None else np.zeros((0, len(names)))
    return x, y, rows, cols


def _fit(
    panel: rf.Panel | None,
    names: tuple[str, ...],
    *,
    as_of: pd.Timestamp,
    week: pd.Timestamp | None,
    horizon_weeks: int,
    min_events: int,
    penalty: float,
    min_cases: int,
) -> RiskModel:
    """Fit on risk sets whose outcome window ends by the last complete week (or use the prior)."""
    index = pd.Index(["intercept", *names])
    x, y, rows, _ = _risk_sets(panel, names, horizon_weeks, min_cases)
    n_events = int(np.unique(rows[y]).size)
    if n_events >= max(min_events, 1) and 0 < y.sum() < len(y):
        fit = _hazard.fit_cloglog(x, y, penalty=penalty)
        coef = pd.Series(fit.coef_raw, index=index)
        se = pd.Series(np.sqrt(np.clip(np.diag(fit.cov_raw), 0, None)), index=index)
        std = pd.Series(fit.coef, index=index)
        center = pd.Series(fit.center, index=index[1:])
        note = (
            f"fitted on {len(y)} unit-weeks with {n_events} first cases; "
            f"ridge penalty {penalty:g} on standardised features"
            + ("" if fit.converged else "; the fit did not converge")
        )
        return RiskModel(
            "fitted",
            names,
            coef,
            se,
            std,
            center,
            as_of,
            week,
            horizon_weeks,
            len(y),
            n_events,
            float(penalty),
            fit.converged,
            note,
        )
    b = np.array([PRIOR_COEFFICIENTS.get(f, 0.0) for f in names])
    ref = np.array([_PRIOR_REFERENCE.get(f, 0.0) for f in names])
    intercept = PRIOR_WEEKLY_INTERCEPT + math.log(horizon_weeks) - float(b @ ref)
    coef = pd.Series(np.concatenate([[intercept], b]), index=index)
    center = pd.Series(np.zeros(len(names)), index=index[1:])
    note = (
        f"prior coefficients: the history holds {n_events} first cases, fewer than "
        f"min_events={min_events}"
    )
    return RiskModel(
        "prior",
        names,
        coef,
        pd.Series(np.nan, index=index),
        pd.Series(np.nan, index=index),
        center,
        as_of,
        week,
        horizon_weeks,
        len(y),
        n_events,
        float(penalty),
        True,
        note,
    )


def fit_risk_model(
    counts: pd.DataFrame,
    units,
    graph,
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
        Also treat a previously affected unit as a candidate once it has had no case for this
        many weeks; ``None``: only never-affected units are candidates.
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
    _check_counts(counts)
    _check_options(horizon_weeks, recent_weeks, min_events, penalty)
    static = rf.build_static(units, graph, covariates)
    date = pd.Timestamp(as_of)
    panel, week = _panel_at(
        counts,
        static,
        date,
        week0=None,
        recent_weeks=recent_weeks,
        reintroduction_weeks=reintroduction_weeks,
        min_cases=min_cases,
    )
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


# --- scoring -------------------------------------------------------------------------------
def _drivers(panel: rf.Panel, static: rf.Static, cand: np.ndarray, t0: int, top: int = 3):
    """Up to ``top`` affected units within two steps per candidate, strongest pressure first."""
    affected = panel.first <= t0
    sub = static.reach[cand].tocoo()
    u, v = sub.row, sub.col
    keep = affected[v]
    u, v = u[keep], v[keep]
    inc = panel.incidence[:, t0]
    w = np.asarray(static.w1[cand[u], v] + static.w2[cand[u], v]).ravel()
    d = pd.DataFrame({"u": u, "v": static.ids[v], "push": w * inc[v]})
    km = pd.Series(static.pair_km, index=[static.pair_u, static.pair_v])
    d["km"] = km.reindex(pd.MultiIndex.from_arrays([cand[u], v])).to_numpy()
    d = d.sort_values(["u", "push", "km", "v"], ascending=[True, False, True, True])
    d["k"] = d.groupby("u").cumcount()
    d = d[d["k"] < top]
    # Join the ids column-wise (vectorised string sums), not one Python call per candidate.
    wide = d.pivot(index="u", columns="k", values="v").reindex(range(len(cand)))
    out = pd.Series("", index=wide.index)
    for k in wide.columns:
        col = wide[k]
        out = out.where(col.isna(), (out + " " + col.fillna("")).str.lstrip())
    return out.to_numpy(dtype=object)


def _score(
    model: RiskModel,
    panel: rf.Panel | None,
    static: rf.Static,
    *,
    silent_weeks: int,
    details: bool = True,
) -> pd.DataFrame:
    names = model.features
    cols = ["probability", "rank", "cross_border", "silent", "drivers", "country"]
    cols += [f"part_{f}" for f in names] + list(names) + ["affected_neighbours"]
    if panel is None:
        out = pd.DataFrame(columns=cols, index=pd.Index([], name="unit_id"))
        return _attach(out, model, 0.0)
    t0 = len(panel.weeks) - 1
    cand = np.flatnonzero(panel.at_risk[:, t0])
    t = np.full(len(cand), t0)
    x = rf.matrix(panel, names, cand, t)
    p = model.probability(x)
    order = np.lexsort((static.ids[cand].to_numpy(), -p))
    rank = np.empty(len(cand), dtype=np.int64)
    rank[order] = np.arange(1, len(cand) + 1)
    out = pd.DataFrame({"probability": p, "rank": rank}, index=pd.Index(static.ids[cand]))
    if details:
        affected = (panel.first <= t0).astype(float)
        cross = np.asarray(static.reach_cross[cand] @ affected).ravel() > 0
        lo = max(0, t0 - silent_weeks + 1)
        silent = ~panel.reported[cand, lo : t0 + 1].any(axis=1)
        out["cross_border"] = cross
        out["silent"] = silent
        out["drivers"] = _drivers(panel, static, cand, t0)
        out["country"] = static.country[cand]
        b = model.coefficients.to_numpy()[1:]
        parts = (x - model.center.to_numpy()) * b
        for k, f in enumerate(names):
            out[f"part_{f}"] = parts[:, k]
        for k, f in enumerate(names):
            out[f] = x[:, k]
        out["affected_neighbours"] = panel.features["affected_neighbours"][cand, t0]
    out = out.iloc[order].rename_axis("unit_id")
    return _attach(out, model, float(p.sum()))


def _attach(out: pd.DataFrame, model: RiskModel, expected: float) -> pd.DataFrame:
    b = model.coefficients
    out.attrs = {
        "model": model.kind,
        "note": model.note,
        "expected_new_units": expected,
        "as_of": model.as_of.isoformat(),
        "week": None if model.week is None else model.week.isoformat(),
        "horizon_weeks": model.horizon_weeks,
        "n_events": model.n_events,
        "baseline": float(b.iloc[0] + b.iloc[1:].to_numpy() @ model.center.to_numpy()),
        "coefficients": {k: float(v) for k, v in b.items()},
    }
    return out


def border_risk(
    counts: pd.DataFrame,
    units,
    graph,
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
        it), the raw feature values under their own names, and ``affected_neighbours``.
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
    _check_counts(counts)
    _check_options(horizon_weeks, recent_weeks, min_events, penalty, silent_weeks)
    static = rf.build_static(units, graph, covariates)
    date = pd.Timestamp(as_of)
    panel, week = _panel_at(
        counts,
        static,
        date,
        week0=None,
        recent_weeks=recent_weeks,
        reintroduction_weeks=reintroduction_weeks,
        min_cases=min_cases,
    )
    if model is None:
        model = _fit(
            panel,
            static.features,
            as_of=date,
            week=week,
            horizon_weeks=horizon_weeks,
            min_events=min_events,
            penalty=penalty,
            min_cases=min_cases,
        )
    elif tuple(model.features) != static.features:
        raise InputError(
            f"the model's features {list(model.features)} differ from these inputs' "
            f"{list(static.features)}"
        )
    return _score(model, panel, static, silent_weeks=silent_weeks)


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
    p = pred[model].to_numpy()
    y = pred["outcome"].to_numpy(dtype=bool)
    # Top k per origin, ties broken by unit id as in border_risk's rank.
    ranked = pred.assign(_p=-p).sort_values(["origin", "_p", "unit_id"])
    top = ranked.groupby("origin", sort=False).head(top_k)
    n_origins = int(pred["origin"].nunique())
    hits = top.groupby("origin")["outcome"].sum()
    return {
        "auc": _hazard.auc(p, y),
        "brier": _hazard.brier(p, y),
        "hits_top_k": float(hits.reindex(pred["origin"].unique(), fill_value=0).mean())
        if n_origins
        else float("nan"),
        "n_origins": n_origins,
        "n_scored": len(pred),
        "n_events": int(y.sum()),
    }


def _table(pred: pd.DataFrame, top_k: int, by: str | None) -> pd.DataFrame:
    rows = []
    groups = [(None, pred)] if by is None else list(pred.groupby(by, sort=True))
    for model in MODELS:
        for key, g in groups:
            m = _metrics(g, model, top_k)
            rows.append({"model": model, **({} if by is None else {by: key}), **m})
    index = ["model"] if by is None else ["model", by]
    columns = [*index, "auc", "brier", "hits_top_k", "n_origins", "n_scored", "n_events"]
    out = pd.DataFrame(rows, columns=columns).set_index(index)
    return out.astype({"n_origins": "int64", "n_scored": "int64", "n_events": "int64"})


def _origins_task(
    counts: pd.DataFrame,
    final_pos: np.ndarray,
    static: rf.Static,
    grid: pd.DatetimeIndex,
    origins: Sequence[int],
    params: dict,
) -> list[pd.DataFrame]:
    """Score every model at each origin (a worker's share of the backtest)."""
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
        )
        if panel is None:
            continue
        t0 = len(panel.weeks) - 1
        cand = np.flatnonzero(panel.at_risk[:, t0])
        if not len(cand):
            continue
        # What happened by t0 + h in the final data; cases reported late for weeks up to t0
        # count too: the unit was affected and the score should have found it.
        lo = 0 if r is None else max(0, t0 - r + 1)
        outcome = (final_pos[cand, t0 + h + 1] - final_pos[cand, lo]) > 0
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
        out.append(frame)
    return out


def run_backtest(
    counts: pd.DataFrame,
    units,
    graph,
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
    report_lag_days : int, default 3
        Days after an origin week's end at which the data are taken as known.
    top_k : int, default 10
        ``hits_top_k`` counts events among the ``top_k`` highest-scored candidates per origin.
    n_jobs : int, default 1
        Worker processes over origins (joblib); results do not depend on it.
    as_of : date-like, optional
        Replay only what was known on this date: reports received later are dropped first,
        so outcomes too are judged on the data of that date (for a monthly report).

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
    if not isinstance(n_jobs, (int, np.integer)) or n_jobs == 0:
        raise InputError(f"'n_jobs' needs to be a non-zero whole number. {n_jobs!r} given.")
    static = rf.build_static(units, graph, covariates)
    slim = counts.loc[:, ["unit_id", "week", "cases", "received"]]
    if as_of is not None:
        slim = slim[slim["received"] <= pd.Timestamp(as_of)]
    final = _as_of_view(slim, None)
    empty = _backtest(_empty_predictions(), top_k, horizon_weeks)
    if final.empty:
        return empty
    grid = rf.week_grid(final["week"].min(), final["week"].max())
    final_panel_cases = np.zeros((len(static.ids), len(grid)))
    ui = static.ids.get_indexer(final["unit_id"])
    if (ui < 0).any():
        bad = final["unit_id"].to_numpy()[ui < 0][0]
        raise InputError(
            "counts name units that are not analysis units of the graph; aggregate counts to "
            "the analysis units first",
            column="unit_id",
            value=bad,
        )
    c = pd.to_numeric(final["cases"], errors="coerce").fillna(0).to_numpy(dtype=float)
    np.add.at(final_panel_cases, (ui, grid.get_indexer(final["week"])), c)
    pos = final_panel_cases >= min_cases
    final_pos = np.concatenate([np.zeros((len(static.ids), 1)), np.cumsum(pos, axis=1)], axis=1)
    last = len(grid) - 1 - horizon_weeks
    if origins is None:
        any_case = np.flatnonzero(pos.any(axis=0))
        if not len(any_case):
            return empty
        idx = list(range(int(any_case[0]) + min_history_weeks, last + 1))
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
    }
    if n_jobs == 1 or len(idx) < 2:
        frames = _origins_task(slim, final_pos, static, grid, idx, params)
    else:
        from joblib import Parallel, delayed, effective_n_jobs

        k = min(effective_n_jobs(n_jobs), len(idx))
        # Interleaved shares balance early (small) and late (large) origins across workers.
        shares = [idx[i::k] for i in range(k)]
        parts = Parallel(n_jobs=k, backend="loky")(
            delayed(_origins_task)(slim, final_pos, static, grid, s, params) for s in shares
        )
        frames = [f for p in parts for f in p]
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


def backtest_risk(
    counts: pd.DataFrame,
    units,
    graph,
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
) -> pd.DataFrame:
    """Rolling-origin backtest of :func:`border_risk` against two baselines.

    Parameters are those of :func:`run_backtest` (which also gives the per-origin detail and
    the predictions), plus ``by``.

    Parameters
    ----------
    counts, units, graph, horizon_weeks, origins, min_history_weeks, report_lag_days, top_k, \
recent_weeks, reintroduction_weeks, min_events, penalty, min_cases, covariates, n_jobs, \
as_of
        As in :func:`run_backtest`.
    by : {None, "country"}, optional
        ``"country"``: one row per model and country instead of per model.

    Returns
    -------
    pandas.DataFrame
        Indexed by ``model`` (rows ``score``, ``distance``, ``neighbours``), columns ``auc
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
    )
    return bt.summary if by is None else bt.by_country


def _example():
    """Five squares in a row, a-b in country X, c-d-e in Y; cases in a, then b."""
    import geopandas as gpd
    from shapely.geometry import box

    from .graph import BorderGraph

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
