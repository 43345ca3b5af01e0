"""Feature arrays of the border-risk model over a unit x week grid.

Everything here is array work, vectorised over units and weeks: the graph becomes sparse
matrices once (:class:`Static`), and each as-of view of the counts becomes dense
``(n_units, n_weeks)`` arrays (:class:`Panel`) from which every feature at every week follows by
sparse matrix products and cumulative sums. :mod:`marchland.risk.score` names and fits them.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import shapely
from scipy import sparse

from ..config.schema import EXTRA_FEATURES, FEATURES
from ..errors import InputError
from ..graph.border import as_border_graph
from ..spread._timeline import episode_over

WEEK = pd.Timedelta(days=7)

# The feature names are the config's (it reserves them for covariate names).


@dataclass(frozen=True, eq=False)
class Static:
    """What does not change between as-of dates: ids, population, graph matrices, distances."""

    ids: pd.Index
    country: np.ndarray
    population: np.ndarray  # NaN where unknown or not positive
    a1: sparse.csr_matrix  # binary first-order neighbours, links included
    reach: sparse.csr_matrix  # binary, within two steps (first or second order)
    reach_cross: sparse.csr_matrix  # reach kept where the two units' countries differ
    w1: sparse.csr_matrix  # first order, shared-boundary length, row sums of one
    w1_cross: sparse.csr_matrix  # w1 kept on cross-border edges only
    w2: sparse.csr_matrix  # exactly two steps, binary, row sums of one
    pair_u: np.ndarray  # unit pairs within two steps (both directions) ...
    pair_v: np.ndarray
    pair_km: np.ndarray  # ... and their boundary-to-boundary distance in km
    covariates: np.ndarray  # (n_units, n_covariates)
    covariate_names: tuple[str, ...]

    @property
    def features(self) -> tuple[str, ...]:
        """Model features including the covariates."""
        return FEATURES + self.covariate_names


def _row_standardise(m: sparse.csr_matrix) -> sparse.csr_matrix:
    s = np.asarray(m.sum(axis=1)).ravel()
    inv = np.divide(1.0, s, out=np.zeros_like(s), where=s > 0)
    return sparse.csr_matrix(sparse.diags(inv) @ m)


def build_static(units, graph, covariates: pd.DataFrame | None = None) -> Static:
    """Sparse matrices and within-two-steps distances for ``units`` on ``graph``."""
    if "country" not in units.columns or "population" not in units.columns:
        raise InputError("units need columns 'country' and 'population'", column="population")
    g = as_border_graph(graph, countries=units["country"])
    ids = g.ids
    missing = ids.difference(units.index)
    if len(missing):
        raise InputError(
            f"the graph names units that are not in units: {list(missing[:5])}",
            column="unit_id",
            value=missing[0],
        )
    u = units.loc[ids]
    pop = pd.to_numeric(u["population"], errors="coerce").to_numpy(dtype=float)
    # Units without a usable population stay in the graph; build_panel refuses them only if
    # they have cases (no incidence without a denominator) and they are shown but not scored.
    pop = np.where(np.isfinite(pop) & (pop > 0), pop, np.nan)
    n = len(ids)
    e = g.edges
    fi = ids.get_indexer(e["focal"])
    ni = ids.get_indexer(e["neighbor"])
    a1 = sparse.csr_matrix((np.ones(len(e)), (fi, ni)), shape=(n, n))
    # Shared-length weights as the graph defines them (links get the median length).
    sw = g.weights("shared").adjacency
    sw = sw[sw.index.get_level_values(0) != sw.index.get_level_values(1)]
    si = ids.get_indexer(sw.index.get_level_values(0))
    sj = ids.get_indexer(sw.index.get_level_values(1))
    shared = sparse.csr_matrix((sw.to_numpy(dtype=float), (si, sj)), shape=(n, n))
    cross_e = e["cross_border"].to_numpy(dtype=bool)
    cross = sparse.csr_matrix((np.ones(cross_e.sum()), (fi[cross_e], ni[cross_e])), shape=(n, n))
    w1 = _row_standardise(shared)
    w1_cross = w1.multiply(cross).tocsr()
    # Two steps by a sparse product: graph.higher_order builds a dense n x n distance matrix,
    # too much memory at 10,000 units.
    two = (a1 @ a1).astype(bool).astype(float)
    two.setdiag(0)
    two.eliminate_zeros()
    a2 = (two - two.multiply(a1)).tocsr()
    a2.eliminate_zeros()
    reach = ((a1 + a2) > 0).astype(float).tocsr()
    w2 = _row_standardise(a2)
    country = u["country"].astype(str).to_numpy()
    rc = reach.tocoo()
    differ = country[rc.row] != country[rc.col]
    reach_cross = sparse.csr_matrix(
        (np.ones(differ.sum()), (rc.row[differ], rc.col[differ])), shape=(n, n)
    )
    # Boundary-to-boundary distances: first-order pairs from the edge table (0 when they
    # share a boundary, the gap when bridged), second-order pairs from the geometry.
    gap = pd.Series(np.nan_to_num(e["gap_m"].to_numpy(dtype=float), nan=0.0), index=[fi, ni])
    coo = sparse.triu(reach, k=1).tocoo()
    pu, pv = coo.row, coo.col
    d = np.full(len(pu), np.nan)
    first = a1[pu, pv].A1 > 0 if len(pu) else np.zeros(0, dtype=bool)
    kinds = pd.Series(e["kind"].to_numpy(), index=[fi, ni])
    if first.any():
        key = pd.MultiIndex.from_arrays([pu[first], pv[first]])
        kind = kinds.reindex(key).to_numpy()
        gm = gap.reindex(key).to_numpy()
        d[first] = np.where(kind == "link", np.nan, gm)
    todo = np.isnan(d)
    if todo.any():
        geom = u.geometry.to_numpy()
        d[todo] = shapely.distance(geom[pu[todo]], geom[pv[todo]])
    km = np.maximum(d, 0.0) / 1000.0
    pair_u = np.concatenate([pu, pv])
    pair_v = np.concatenate([pv, pu])
    pair_km = np.concatenate([km, km])
    names: tuple[str, ...] = ()
    cov = np.zeros((n, 0))
    if covariates is not None and len(covariates.columns):
        miss = ids.difference(covariates.index)
        if len(miss):
            raise InputError(
                f"covariates lack rows for units {list(miss[:5])}", column="unit_id", value=miss[0]
            )
        cv = covariates.loc[ids].apply(pd.to_numeric, errors="coerce")
        if cv.isna().any().any():
            col = cv.columns[cv.isna().any()][0]
            raise InputError("covariates must be numbers with no gaps", column=str(col))
        names = tuple(str(c) for c in cv.columns)
        clash = set(names) & set(FEATURES + EXTRA_FEATURES)
        if clash:
            raise InputError(f"covariate names clash with model features: {sorted(clash)}")
        cov = cv.to_numpy(dtype=float)
    return Static(
        ids=ids,
        country=country,
        population=pop,
        a1=a1,
        reach=reach,
        reach_cross=reach_cross,
        w1=w1,
        w1_cross=w1_cross,
        w2=w2,
        pair_u=pair_u,
        pair_v=pair_v,
        pair_km=pair_km,
        covariates=cov,
        covariate_names=names,
    )


def _rolling(a: np.ndarray, window: int, lag: int = 0) -> np.ndarray:
    """Sum over weeks (t - lag - window, t - lag] along axis 1 (zeros before the start)."""
    nt = a.shape[1]
    # The cumulative sum written straight after its zero columns (no concatenated copy).
    c = np.zeros((a.shape[0], window + lag + nt))
    np.cumsum(a, axis=1, out=c[:, window + lag :])
    return c[:, window : window + nt] - c[:, :nt]


def _rolling_known(a: np.ndarray, window: int, lag: int = 0) -> np.ndarray:
    """Window sum with unknown (NaN) weeks left out: the known weeks' mean times ``window``.

    NaN where no week of the window is known: an unreported week is unknown, never zero.
    """
    known = np.isfinite(a)
    total = _rolling(np.where(known, a, 0.0), window, lag)
    n = _rolling(known, window, lag)
    del known
    total *= window
    some = n > 0
    np.divide(total, n, out=total, where=some)
    total[~some] = np.nan
    return total


def _known_mean(w: sparse.csr_matrix, v: np.ndarray) -> np.ndarray:
    """``w @ v`` over the known (finite) entries of ``v``, weights renormalised to them.

    A row whose neighbours are all unknown gets 0 (no known pressure).
    """
    known = np.isfinite(v)
    num = w @ np.where(known, v, 0.0)
    den = w @ known.astype(float)
    del known
    num *= np.asarray(w.sum(axis=1)).reshape(-1, 1)
    some = den > 0
    np.divide(num, den, out=num, where=some)
    num[~some] = 0.0
    return num


@dataclass(frozen=True, eq=False)
class Panel:
    """Dense unit x week arrays of one as-of view, and the features at every week."""

    weeks: pd.DatetimeIndex
    cases: np.ndarray
    reported: np.ndarray
    first: np.ndarray  # week index of the first case (n_weeks where none)
    incidence: np.ndarray  # cases per 100,000 in the last ``recent_weeks`` weeks
    features: dict[str, np.ndarray]
    at_risk: np.ndarray  # candidate at the end of week t
    complete: np.ndarray  # per unit, the last week index whose cases are taken as complete


def units_not_in_graph(bad: np.ndarray) -> InputError:
    """Return the error for counts on ``bad`` ids, units not among the graph's analysis units."""
    return InputError(
        "counts name units that are not analysis units of the graph: "
        f"{sorted(set(map(str, bad)))[:5]}; aggregate counts to the analysis units first",
        column="unit_id",
        value=bad[0],
    )


def week_grid(start: pd.Timestamp, end: pd.Timestamp) -> pd.DatetimeIndex:
    """Weekly steps from ``start`` to ``end`` inclusive."""
    return pd.date_range(start, end, freq="7D")


def build_panel(
    view: pd.DataFrame,
    first_week: pd.Series,
    static: Static,
    weeks: pd.DatetimeIndex,
    *,
    recent_weeks: int = 3,
    reintroduction_weeks: int | None = None,
    min_cases: int = 1,
    filled: np.ndarray | None = None,
    complete: np.ndarray | None = None,
) -> Panel:
    """Arrays and features on ``weeks`` from an as-of ``view`` and its first-case weeks.

    ``filled`` (units x weeks, NaN unknown), when given, is the nowcast-adjusted panel the
    incidence features are computed from (:func:`marchland.delays.fill_gaps`); otherwise the
    reported cases are used with unreported weeks unknown. ``complete`` gives per unit the
    last week whose count is taken as complete (default: the last week).
    """
    cases, reported, counted = place_view(view, static, weeks)
    return panel_from(
        cases,
        reported,
        counted,
        first_week,
        static,
        weeks,
        recent_weeks=recent_weeks,
        reintroduction_weeks=reintroduction_weeks,
        min_cases=min_cases,
        filled=filled,
        complete=complete,
    )


def place_view(
    view: pd.DataFrame, static: Static, weeks: pd.DatetimeIndex
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Place an as-of view on the unit x week grid: ``cases``, ``reported`` and ``counted``.

    ``counted`` marks reports with a number of cases (spread counts a row without cases as no
    report). The arrays are what :func:`panel_from` needs of the view, so a caller can let the
    view (a frame of every reported unit-week) go before the filled panel is made.
    """
    n, nt = len(static.ids), len(weeks)
    v = view[view["week"].isin(weeks)]
    ui = static.ids.get_indexer(v["unit_id"])
    unknown = ui < 0
    if unknown.any():
        raise units_not_in_graph(v["unit_id"].to_numpy()[unknown])
    wi = weeks.get_indexer(v["week"])
    cases = np.zeros((n, nt))
    c_raw = pd.to_numeric(v["cases"], errors="coerce")
    c = c_raw.fillna(0).to_numpy(dtype=float)
    np.add.at(cases, (ui, wi), c)
    reported = np.zeros((n, nt), dtype=bool)
    reported[ui, wi] = True
    # Counted as spread counts them (spread._timeline): a row without cases is not a report.
    counted = np.zeros((n, nt), dtype=bool)
    counted[ui, wi] = c_raw.notna().to_numpy()
    return cases, reported, counted


def panel_from(
    cases: np.ndarray,
    reported: np.ndarray,
    counted: np.ndarray,
    first_week: pd.Series,
    static: Static,
    weeks: pd.DatetimeIndex,
    *,
    recent_weeks: int = 3,
    reintroduction_weeks: int | None = None,
    min_cases: int = 1,
    filled: np.ndarray | None = None,
    complete: np.ndarray | None = None,
) -> Panel:
    """:func:`build_panel` from the arrays :func:`place_view` made of the view."""
    n, nt = len(static.ids), len(weeks)
    fw = first_week.reindex(static.ids)
    fwi = np.full(n, nt, dtype=np.int64)
    known = fw.notna().to_numpy()
    if known.any():
        pos = weeks.get_indexer(pd.DatetimeIndex(fw[known]))
        # A first case before the grid still counts as affected from the start.
        pos = np.where(pos < 0, np.where(pd.DatetimeIndex(fw[known]) < weeks[0], 0, nt), pos)
        fwi[known] = pos
    t = np.arange(nt)
    affected = fwi[:, None] <= t[None, :]

    known = np.isfinite(static.population)
    no_pop = ~known & (cases > 0).any(axis=1)
    if no_pop.any():
        raise InputError(
            "border risk needs a population > 0 for every unit with cases (incidence per "
            f"100,000); missing or not positive for {list(static.ids[no_pop][:5])}",
            column="population",
            value=static.ids[no_pop][0],
        )
    pop = np.where(known, static.population, 1.0)
    # Incidence from the nowcast-adjusted panel, or the reports; a week nobody reported is
    # unknown (left out, the window's known weeks scaled up), not zero.
    base = np.where(counted, cases, np.nan) if filled is None else filled
    del filled  # Every units x weeks array goes as soon as its features are made.
    recent = _rolling_known(base, recent_weeks)
    before = _rolling_known(base, recent_weeks, lag=recent_weeks)
    del base
    growth = np.log1p(static.reach @ np.nan_to_num(recent))
    nb_before = static.reach @ np.nan_to_num(before)
    del before
    growth -= np.log1p(nb_before, out=nb_before)
    del nb_before
    inc = recent / pop[:, None]
    del recent
    inc *= 1e5
    near = np.log1p(_known_mean(static.w1, inc))
    far = np.log1p(_known_mean(static.w2, inc))
    inc0 = np.nan_to_num(inc)
    del inc
    near0 = static.w1 @ inc0
    # The cross-border share among the known neighbours (renormalising cancels in the ratio).
    cross = np.divide(static.w1_cross @ inc0, near0, out=np.zeros_like(near0), where=near0 > 0)
    del near0
    # Distance to the nearest affected unit within two steps: the smallest pair distance
    # among neighbours affected by week t, as a running minimum over weeks.
    dist = np.full((n, nt + 1), np.inf)
    np.minimum.at(dist, (static.pair_u, fwi[static.pair_v]), static.pair_km)
    dist = np.minimum.accumulate(dist[:, :nt], axis=1)
    n_aff = static.a1 @ affected.astype(float)
    logpop = np.broadcast_to(np.where(known, np.log(pop), np.nan)[:, None], (n, nt))
    feats = {
        "near_pressure": near,
        "far_pressure": far,
        "cross_share": cross,
        "growth": growth,
        "distance_km": dist,
        "log_population": logpop,
        "affected_neighbours": n_aff,
    }
    for k, name in enumerate(static.covariate_names):
        feats[name] = np.broadcast_to(static.covariates[:, k][:, None], (n, nt))
    within2 = (static.reach @ affected.astype(float)) > 0
    if reintroduction_weeks is None:
        free = ~affected
    else:
        # Spread's re-introduction rule (one definition, in marchland.spread._timeline): a unit is a
        # candidate again after ``reintroduction_weeks`` *reported* weeks without a case; weeks
        # nobody reported are unknown, not quiet.
        positive = counted & (cases >= min_cases)
        free = episode_over(
            positive, counted & ~positive, reintroduction_weeks, before=affected[:, 0]
        )
    at_risk = free & within2
    if complete is None:
        complete = np.full(n, nt - 1, dtype=np.int64)
    return Panel(weeks, cases, reported, fwi, inc0, feats, at_risk, complete)


def future_any(cases: np.ndarray, horizon: int, min_cases: int = 1) -> np.ndarray:
    """Mark where a unit reports a case in weeks (t, t + h]; False where the grid ends early."""
    pos = cases >= min_cases
    c = np.concatenate([np.zeros((cases.shape[0], 1)), np.cumsum(pos, axis=1)], axis=1)
    nt = cases.shape[1]
    hi = np.minimum(np.arange(nt) + horizon, nt - 1) + 1
    return (c[:, hi] - c[:, 1 : nt + 1]) > 0


def matrix(panel: Panel, names: tuple[str, ...], rows: np.ndarray, cols: np.ndarray) -> np.ndarray:
    """Feature matrix (one column per name) at the (unit, week) pairs ``rows, cols``."""
    if not names:
        return np.zeros((len(rows), 0))
    return np.column_stack([panel.features[f][rows, cols] for f in names])
