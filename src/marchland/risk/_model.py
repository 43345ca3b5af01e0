"""The border-risk hazard model: risk sets, fit or prior, and scoring with parts.

:mod:`marchland.risk.score` is the public front; this module holds the model behind it, and
:mod:`marchland.risk._backtest` replays it week by week.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..delays.gaps import MAX_DELAY_WEEKS, Versions, filled_cases
from ..errors import InputError
from ..inputs._order import grouped_order
from ..inputs.reports import as_of as _as_of_view
from ..spread.arrival import first_cases
from ..stats._align import unit_positions
from . import _features as rf
from . import _hazard

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
        Standard errors of ``coefficients``, clustered by unit (sandwich on the penalised
        likelihood): one unit's overlapping outcome windows are not independent. NaN for a
        prior.
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
    #: Model-based (information) standard errors, which ignore the clustering; for comparison.
    std_errors_model: pd.Series | None = None

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


def slim_counts(counts: pd.DataFrame, static: rf.Static, as_of: object = None) -> pd.DataFrame:
    """Keep the four columns the model reads, received by ``as_of``, ids as categories.

    The categories are the graph's ids (``static.ids``): the as-of views sort and group the
    category codes, not a Python string per row (at 50,000 units four million of them, and
    every copy of the frame carried them). Used by :func:`border_risk` and the backtest alike.
    """
    slim = counts.loc[:, ["unit_id", "week", "cases", "received"]]
    if as_of is not None:
        keep = slim["received"] <= pd.Timestamp(as_of)
        if not keep.all():
            slim = slim[keep]
    # Positions among the graph's ids looked up by Arrow for text ids: ``isin`` and
    # ``pd.Categorical`` each made a Python string per row (0.25 GB each at 50,000 units, a
    # heap that then stayed fragmented under the step's peak).
    where = unit_positions(slim["unit_id"], pd.Index(static.ids))
    missing = where < 0
    if missing.any():
        raise rf.units_not_in_graph(slim["unit_id"].to_numpy()[missing])
    unit = pd.Categorical.from_codes(where, categories=pd.Index(static.ids))
    return slim.assign(unit_id=unit)


def _panel_at(
    counts: pd.DataFrame,
    static: rf.Static,
    date: pd.Timestamp,
    *,
    week0: pd.Timestamp | None,
    recent_weeks: int,
    reintroduction_weeks: int | None,
    min_cases: int,
    replay: Replay | None = None,
) -> tuple[rf.Panel | None, pd.Timestamp | None]:
    """Build the panel of data known on ``date``, cut at its last complete week.

    ``replay`` (built once from the same ``counts``) gives the same panel without sorting and
    filtering every version again: the backtest asks for one panel per origin week.
    """
    view = _as_of_view(counts, date) if replay is None else replay.view(date)
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
    # The view's numbers on the grid; the view itself (a row per reported unit-week) is let
    # go before the filled panel is made, the step's largest moment.
    placed = rf.place_view(view, static, weeks)
    del view
    if replay is None:
        by_then = (counts["received"] <= date).to_numpy()
        known = counts if by_then.all() else counts[by_then]
        # Categorical ids (slim_counts) stay categorical: delays factorises their codes.
        gap_counts = (
            known
            if isinstance(known["unit_id"].dtype, pd.CategoricalDtype)
            else known.assign(unit_id=known["unit_id"].astype(str))
        )
        first_positive = _first_positive(known, static)
    else:
        gap_counts, first_positive = replay.known(date)
    panel = rf.panel_from(
        *placed,
        first,
        static,
        weeks,
        recent_weeks=recent_weeks,
        reintroduction_weeks=reintroduction_weeks,
        min_cases=min_cases,
        filled=_filled(gap_counts, static, weeks, date),
        complete=_complete_from(first_positive, static, len(weeks) - 1),
    )
    return panel, weeks[-1]


@dataclass(frozen=True, eq=False)
class Replay:
    """The versions of the counts arranged once for as-of views at many dates.

    ``rows`` are the versions sorted as :func:`marchland.inputs.reports.as_of` sorts them (unit,
    week, received; stable), with ``next_received`` the receipt of the next version of the same
    unit-week: a row is in the view of ``date`` when it was received by then and its successor
    was not. ``versions`` are the versions placed once in the reporting triangle of every date
    (``delays._triangle.Versions``): the filled panel of a date does not sort or place the
    versions again. ``first_receipt`` is, per unit-week with cases, when the first positive
    version arrived and its delay (``_first_positive``). Every as-of quantity is then a mask.
    """

    rows: pd.DataFrame
    received: np.ndarray
    next_received: np.ndarray
    versions: Versions
    first_receipt: pd.DataFrame

    @classmethod
    def build(cls, counts: pd.DataFrame, static: rf.Static) -> Replay:
        """Arrange ``counts`` (``unit_id week cases received``) for replay."""
        # The same order: whole blocks of units moved, when they come in blocks (the reader's).
        order = grouped_order(counts)
        if order is None:
            rows = counts.sort_values(["unit_id", "week", "received"], kind="stable")
        else:
            rows = counts.take(order)
        rows = rows.reset_index(drop=True)
        rec = rows["received"].to_numpy("datetime64[ns]").view(np.int64)
        never = np.iinfo(np.int64).max
        nxt = np.full(len(rows), never)
        if len(rows) > 1:
            uid = rows["unit_id"].to_numpy()
            wk = rows["week"].to_numpy("datetime64[ns]")
            same = (uid[1:] == uid[:-1]) & (wk[1:] == wk[:-1])
            nxt[:-1] = np.where(same, rec[1:], never)
        # Categorical ids stay categorical: delays factorises them from their codes.
        versions = Versions(counts, MAX_DELAY_WEEKS)
        return cls(rows, rec, nxt, versions, _first_positive(counts, static))

    def view(self, date: pd.Timestamp) -> pd.DataFrame:
        """Return the as-of view of ``date``, equal to ``reports.as_of(counts, date)``."""
        d = pd.Timestamp(date).as_unit("ns").value
        keep = (self.received <= d) & (self.next_received > d)
        return self.rows[keep].reset_index(drop=True)

    def known(self, date: pd.Timestamp) -> tuple[Versions, pd.DataFrame]:
        """Return the versions (for the triangle of ``date``) and the first positive receipts."""
        first = self.first_receipt
        return self.versions, first[first["received"] <= pd.Timestamp(date)]


def _filled(
    known: pd.DataFrame | Versions, static: rf.Static, weeks: pd.DatetimeIndex, date
) -> np.ndarray:
    """Nowcast-adjusted cases on the unit x week grid (NaN unknown), from delays.fill_gaps.

    ``known`` holds the versions received by ``date`` (unit ids as strings or categories), or
    every version arranged once (``Replay.versions``; those received later are not used).
    """
    units = pd.DataFrame({"country": static.country}, index=static.ids)
    gap_weeks, cases = filled_cases(known, units, as_of=date, max_delay_weeks=MAX_DELAY_WEEKS)
    wi = weeks.get_indexer(gap_weeks)
    if np.array_equal(wi, np.arange(len(weeks))):
        return cases  # the same grid (the usual case): no second units x weeks array
    out = np.full((len(static.ids), len(weeks)), np.nan)
    ok = wi >= 0
    out[:, wi[ok]] = cases[:, ok]
    return out


#: Share of first reports of a week with cases that arrive within the delay taken as complete.
DELAY_QUANTILE = 0.9


def complete_weeks(known: pd.DataFrame, static: rf.Static, last: int) -> np.ndarray:
    """Per unit, the last week index (of a grid ending at ``last``) taken as fully reported.

    A week counts as complete once it is older than its country's ``DELAY_QUANTILE`` reporting
    delay: the delay, in whole weeks after the week ended, to the first report of a unit-week
    with cases, among the reports known. Outcome windows running past it are censored, not
    negatives (a case may still be on its way).
    """
    return _complete_from(_first_positive(known, static), static, last)


def _first_positive(known: pd.DataFrame, static: rf.Static) -> pd.DataFrame:
    """Per (unit_id, week) with cases: first receipt with cases, its delay, the unit's country.

    The delay is in whole weeks after the week ended (0 at the least), as a float.
    """
    pos = known[pd.to_numeric(known["cases"], errors="coerce").fillna(0) > 0]
    ids = pos["unit_id"]
    if isinstance(ids.dtype, pd.CategoricalDtype) and ids.cat.categories.equals(static.ids):
        # Grouped by position among the graph's ids (slim_counts), not by a string per row.
        key = pd.Series(ids.cat.codes.to_numpy(), index=pos.index)
        country_of = pd.Series(static.country)
    else:
        key = ids.astype(str)
        country_of = pd.Series(static.country, index=static.ids)
    first_rec = pos.groupby([key, pos["week"]], observed=True)["received"].min()
    wk = first_rec.index.get_level_values(1)
    delay = (first_rec.to_numpy() - (wk + pd.Timedelta(days=7))) // pd.Timedelta(days=7)
    country = country_of.reindex(first_rec.index.get_level_values(0))
    return pd.DataFrame(
        {
            "received": first_rec.to_numpy(),
            "delay": np.maximum(np.asarray(delay, dtype=float), 0.0),
            "country": country.to_numpy(),
        }
    )


def _complete_from(first: pd.DataFrame, static: rf.Static, last: int) -> np.ndarray:
    """``complete_weeks`` from the first positive receipts known (``_first_positive``)."""
    q = pd.Series(0, index=pd.Index(np.unique(static.country)), dtype=np.int64)
    if len(first):
        d = pd.Series(first["delay"].to_numpy(), index=first["country"].to_numpy())
        qq = d.groupby(level=0).quantile(DELAY_QUANTILE)
        q = q.add(np.ceil(qq).astype(np.int64), fill_value=0).astype(np.int64)
    return last - q.reindex(static.country).to_numpy(dtype=np.int64)


def _risk_sets(panel: rf.Panel | None, names: tuple[str, ...], horizon_weeks: int, min_cases: int):
    """Features ``x``, outcomes ``y`` and (unit, week) positions of the training risk sets."""
    rows = cols = np.zeros(0, dtype=np.int64)
    y = np.zeros(0, dtype=bool)
    if panel is not None:
        last = len(panel.weeks) - 1 - horizon_weeks
        if last >= 0:
            rows, cols = np.nonzero(panel.at_risk[:, : last + 1])
            # Windows running past the weeks taken as complete are censored, not negatives.
            done = cols + horizon_weeks <= panel.complete[rows]
            rows, cols = rows[done], cols[done]
            y = rf.future_any(panel.cases, horizon_weeks, min_cases)[rows, cols]
    x = rf.matrix(panel, names, rows, cols) if panel is not None else np.zeros((0, len(names)))
    ok = np.isfinite(x).all(axis=1)  # units of unknown population are not fitted on
    return x[ok], y[ok], rows[ok], cols[ok]


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
        fit = _hazard.fit_cloglog(x, y, penalty=penalty, groups=rows)
        coef = pd.Series(fit.coef_raw, index=index)
        se = pd.Series(np.sqrt(np.clip(np.diag(fit.cov_cluster_raw), 0, None)), index=index)
        se_model = pd.Series(np.sqrt(np.clip(np.diag(fit.cov_raw), 0, None)), index=index)
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
            se_model,
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
    cols += [f"part_{f}" for f in names] + list(names) + ["affected_neighbours", "note"]
    if panel is None:
        out = pd.DataFrame(columns=cols, index=pd.Index([], name="unit_id"))
        return _attach(out, model, 0.0)
    t0 = len(panel.weeks) - 1
    cand = np.flatnonzero(panel.at_risk[:, t0])
    t = np.full(len(cand), t0)
    x = rf.matrix(panel, names, cand, t)
    scored = np.isfinite(x).all(axis=1)
    p = np.where(scored, model.probability(np.where(scored[:, None], x, 0.0)), np.nan)
    # Unscored candidates (unknown population) go last, without a rank.
    order = np.lexsort((static.ids[cand].to_numpy(), -np.nan_to_num(p, nan=-1.0), ~scored))
    rank = np.empty(len(cand), dtype=np.int64)
    rank[order] = np.arange(1, len(cand) + 1)
    rank = pd.array(rank, dtype="Int64")
    rank[~scored] = pd.NA
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
        out["note"] = np.where(scored, "", "population unknown: not scored")
    out = out.iloc[order].rename_axis("unit_id")
    return _attach(out, model, float(np.nansum(p)))


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
