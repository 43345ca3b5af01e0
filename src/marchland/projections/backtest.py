"""Rolling-origin backtest of the forecast against naive baselines, on the outbreak's own data.

At every origin the model sees only the data as known then (``as_of``), and its forecasts are
scored against the latest data for the weeks that followed. Baselines: the last week carried
forward and the mean of the last 4 weeks, each with negative binomial noise whose size is
fitted, per horizon, on the same fitting window.
"""

from __future__ import annotations

import copy
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from ..compute import Executor
from ._model import ModelSpec
from ._scores import (
    BASELINE_FLOOR,
    Rows,
    crps,
    fit_size,
    mixture_scores,
    nb_scores,
    pit_interval_share,
    summarise_scores,
)
from ._setup import (
    DEFAULT_SKIP_RECENT_WEEKS,
    DEFAULT_WINDOW_WEEKS,
    WEEK,
    check_units,
    fit_origin,
    island_warning,
    last_week_over,
    weeks_panel,
)
from ._weights import OrderMatrix
from .projection import (
    DEFAULT_DISPERSION,
    MAX_ORDER,
    _graph_for,
    model_spec,
    run_origin,
    size_labels,
)

MODELS = ("endemic-epidemic", "last-week", "mean-4-weeks")
#: Scored rows per block of :func:`_scored` (each CRPS temporary is rows x paths floats: 8 MB
#: at 200 paths).
SCORE_BLOCK = 5_000


def backtest_forecast(
    counts: pd.DataFrame,
    units: pd.DataFrame,
    graph,
    *,
    horizon_weeks: int = 4,
    window_weeks: int = DEFAULT_WINDOW_WEEKS,
    skip_recent_weeks: int = DEFAULT_SKIP_RECENT_WEEKS,
    origins=None,
    step_weeks: int = 1,
    report_lag_days: int | None = None,
    conf: float = 0.9,
    n_paths: int = 500,
    seed: int | None = 0,
    max_order: int = MAX_ORDER,
    dispersion: str = DEFAULT_DISPERSION,
    details: bool = False,
    executor: Executor | None = None,
) -> pd.DataFrame:
    """Score forecasts made at rolling origins against what was reported afterwards.

    Parameters
    ----------
    counts, units, graph
        As for :func:`forecast`.
    horizon_weeks : int
        Weeks ahead scored (1 to ``horizon_weeks``).
    window_weeks, skip_recent_weeks, max_order, dispersion
        Model options, as for :func:`forecast`.
    origins : sequence of date-like, optional
        Dates the forecasts are made on. By default one per ``step_weeks`` weeks, from the
        first week with a full fitting window to the last week that leaves ``horizon_weeks``
        to score, each ``report_lag_days`` after the week ended.
    report_lag_days : int, optional
        Days after a week ends on which it is forecast from; by default the median delay of
        first reports in ``counts``.
    conf : float
        Level of the intervals whose coverage is reported.
    n_paths : int
        Paths (and baseline samples) per forecast.
    seed : int, optional
        Seed of the run: every origin gets its own ``numpy.random.default_rng`` from
        ``SeedSequence(seed).spawn`` (by origin position), so the scores are the same whether
        the origins run one after the other or in parallel.
    details : bool
        Return one row per scored unit-week instead of the summary.
    executor : marchland.compute.Executor, optional
        Where the origins run (:meth:`~marchland.compute.Executor.map_seeded`); by default one
        after the other in this process.

    Returns
    -------
    pandas.DataFrame
        Indexed by ``model`` ("endemic-epidemic", "last-week", "mean-4-weeks"), one row per
        model, ``horizon`` and ``country`` ("all" pools every country), with ``crps`` (mean,
        lower is better), ``log_score`` (mean negative log predictive probability),
        ``coverage`` (share inside the central ``conf`` interval of the samples),
        ``coverage_expected`` (the coverage those same intervals would have if the forecasts
        were right: above ``conf`` for counts with much mass at 0),
        ``coverage_pit`` (expected share of the randomised PIT inside the central ``conf``
        range, given ``F(y - 1)`` and ``F(y)``: coverage with the discreteness of counts taken
        out, Czado, Gneiting and Held 2009), ``pit_ks`` and ``pit_p``
        (Kolmogorov-Smirnov statistic and p-value of the randomised PIT against uniform) and
        ``n`` (unit-weeks scored). With ``details``: ``origin unit_id country week horizon y
        mean crps log_score pit covered covered_expected covered_pit`` per model (``mean``: of
        the samples).

    References
    ----------
    Gneiting T, Raftery AE (2007). Strictly proper scoring rules, prediction, and estimation.
    JASA 102:359-378.
    Czado C, Gneiting T, Held L (2009). Predictive model assessment for count data.
    Biometrics 65:1254-1261.

    Examples
    --------
    >>> import marchland.pack as region, marchland.demo as demo
    >>> r = region.open_region(demo.scenario_path())
    >>> import warnings
    >>> from marchland.errors import DataWarning
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore", DataWarning)  # the demo graph has one island
    ...     bt = backtest_forecast(r.counts, r.units, r.graph, origins=["2026-08-04"],
    ...                            n_paths=100)
    >>> sorted(bt.index.unique())
    ['endemic-epidemic', 'last-week', 'mean-4-weeks']
    """
    ids, e = check_units(units)
    bg = _graph_for(graph, units)
    island_warning(bg, ids, stacklevel=3)
    orders = OrderMatrix.from_graph(bg, ids, max_order)
    truth = weeks_panel(counts, ids, None)
    anchor = pd.Timestamp(truth.columns.min())
    if origins is None:
        lag = _report_lag(counts) if report_lag_days is None else int(report_lag_days)
        first = anchor + (window_weeks + skip_recent_weeks) * WEEK
        last = pd.Timestamp(truth.columns.max()) - horizon_weeks * WEEK
        weeks = pd.date_range(first, last, freq=f"{7 * step_weeks}D")
        origins = weeks + WEEK + pd.Timedelta(days=lag)
    if len(origins) == 0:
        raise ValueError(
            f"no backtest origin fits: the data need at least {window_weeks} weeks to fit "
            f"plus {horizon_weeks} to score"
        )
    country = units["country"].reindex(ids).to_numpy() if "country" in units else "all"
    job = _Job(
        counts=counts,
        ids=ids,
        e=e,
        orders=orders,
        truth=truth,
        anchor=anchor,
        country=country,
        spec=model_spec(dispersion, max_order=max_order),
        groups=size_labels(units, ids),
        window_weeks=window_weeks,
        skip_recent_weeks=skip_recent_weeks,
        horizon_weeks=horizon_weeks,
        n_paths=n_paths,
        conf=conf,
        details=details,
    )
    ex = Executor() if executor is None else executor
    parts = ex.map_seeded(_score_origin, list(pd.DatetimeIndex(origins)), job, seed=seed)
    parts = [p for origin_parts in parts for p in origin_parts]
    detail = pd.concat(parts, ignore_index=True)
    return detail if details else summarise_scores(detail)


@dataclass(frozen=True, eq=False)
class _Job:
    """What every origin of one backtest shares (shipped once per task to a worker)."""

    counts: pd.DataFrame
    ids: pd.Index
    e: np.ndarray
    orders: OrderMatrix
    truth: pd.DataFrame
    anchor: pd.Timestamp
    country: Any
    spec: ModelSpec
    window_weeks: int
    skip_recent_weeks: int
    horizon_weeks: int
    n_paths: int
    conf: float
    groups: Any = None
    details: bool = True  # score rows with their origin, unit, week and count


def _score_origin(date: pd.Timestamp, job: _Job, seed) -> list[pd.DataFrame]:
    """Fit at one origin, simulate, and score the model and both baselines (one task)."""
    rng = np.random.default_rng(seed)
    ids, horizon_weeks, n_paths, conf = job.ids, job.horizon_weeks, job.n_paths, job.conf
    wide = weeks_panel(job.counts, ids, date)
    origin = fit_origin(
        wide,
        job.e,
        job.orders,
        last_week_over(job.anchor, date),
        window_weeks=job.window_weeks,
        skip_recent_weeks=job.skip_recent_weeks,
        spec=job.spec,
        groups=job.groups,
    )
    # The paths compressed as drawn (the means stay dense, float32): the dense int32 paths
    # were 0.16 GB at 50,000 units x 4 weeks x 200 paths, beside the means.
    paths, means, fweeks = run_origin(
        origin, horizon_weeks=horizon_weeks, n_paths=n_paths, seed=rng, keep_means=True, store=True
    )
    y = job.truth.reindex(columns=fweeks).to_numpy(dtype=float).T  # (h, n)
    ok = np.isfinite(y) & np.isfinite(origin.start)[None, :]
    hh, ui = np.nonzero(ok)
    yv = y[hh, ui]
    # The summary needs the scores by horizon and country only: the ids, weeks and counts of
    # every scored row (three models x 200,000 rows per origin at 50,000 units, sent back from
    # the workers and stacked) are kept for the details alone.
    base = (
        dict(origin=date, unit_id=ids[ui], week=fweeks[hh], horizon=hh + 1, y=yv)
        if job.details
        else dict(horizon=hh + 1)
    )
    base["country"] = job.country[ui] if not isinstance(job.country, str) else job.country
    psi = origin.fit.sizes()[ui]
    # The scored rows' draws are read a block of rows at a time (Rows), not copied whole: at
    # 50,000 units x 4 weeks x 200 paths each copy, and each temporary of the scores, was
    # 0.16-0.3 GB.
    sc = mixture_scores(yv, Rows(means, hh, ui), psi, rng)
    del means
    parts = [_scored(base, "endemic-epidemic", yv, Rows(paths, hh, ui), sc, conf)]
    del paths
    for name, m, hist in _baselines(wide, origin.fit_end, job.window_weeks, horizon_weeks):
        mu = np.maximum(np.broadcast_to(m, y.shape)[hh, ui], BASELINE_FLOOR)
        size = np.array([fit_size(*hist(h)) for h in range(1, horizon_weeks + 1)])[hh]
        sc = nb_scores(yv, mu, size, rng)
        parts.append(_scored(base, name, yv, _MixtureRows(size, mu / size, n_paths, rng), sc, conf))
    return parts


class _MixtureRows:
    """Gamma-Poisson draws ``rng.poisson(rng.gamma(shape, scale, (rows, paths)))`` by row slices.

    The same numbers as drawing every gamma for all rows first and then the Poisson draws a
    slice of rows at a time, without holding the gammas (0.32 GB at 50,000 units x 4 weeks x
    200 paths): ``rng`` is first moved past the gamma draws a block of rows at a time, and a
    copy of its earlier state draws them again, slice by slice, as the Poisson draws ask.
    Drawing consecutive row blocks one after the other gives the draws of one call over all
    rows (the same stream in the same order).
    """

    def __init__(self, shape, scale, n_paths: int, rng: np.random.Generator):
        self.shape, self.scale, self.n_paths, self.rng, self.next = shape, scale, n_paths, rng, 0
        self.gamma_rng = copy.deepcopy(rng)
        for i in range(0, len(shape), SCORE_BLOCK):
            self._gamma(rng, slice(i, i + SCORE_BLOCK))

    def _gamma(self, rng: np.random.Generator, rows: slice) -> np.ndarray:
        a, s = self.shape[rows], self.scale[rows]
        return rng.gamma(a[:, None], s[:, None], (len(a), self.n_paths))

    def __len__(self) -> int:
        return len(self.shape)

    def __getitem__(self, rows: slice) -> np.ndarray:
        if rows.start != self.next:
            raise RuntimeError("mixture rows must be read once, in order")
        self.next = min(rows.stop, len(self.shape))
        return self.rng.poisson(self._gamma(self.gamma_rng, rows))


def _scored(base, model, y, samples, scores, conf) -> pd.DataFrame:
    """Scores per observation; ``samples[i:j]`` gives rows of draws (read a block at a time)."""
    log_score, pit, pit_lo, pit_hi = scores
    a = (1 - conf) / 2
    n = len(y)
    mean, crps_v, expected = np.empty(n), np.empty(n), np.empty(n)
    covered = np.empty(n, dtype=bool)
    for i in range(0, n, SCORE_BLOCK):
        j = min(i + SCORE_BLOCK, n)
        s, yb = samples[i:j], y[i:j]
        lo, hi = np.quantile(s, [a, 1 - a], axis=-1, method="inverted_cdf")
        mean[i:j] = s.mean(axis=-1)
        crps_v[i:j] = crps(yb, s)
        covered[i:j] = (lo <= yb) & (yb <= hi)
        # What "covered" would average to if the forecast were right: the share of its own
        # samples inside the interval (over conf for counts with much mass at one value).
        expected[i:j] = ((lo[:, None] <= s) & (s <= hi[:, None])).mean(-1)
    return pd.DataFrame(
        {
            **base,
            "model": model,
            "mean": mean,
            "crps": crps_v,
            "log_score": log_score,
            "pit": pit,
            "covered": covered,
            "covered_expected": expected,
            "covered_pit": pit_interval_share(pit_lo, pit_hi, conf),
        }
    )


def _baselines(wide: pd.DataFrame, fit_end, window_weeks: int, horizon_weeks: int):
    """Point predictors at the fit end, and (predictor, outcome) pairs in the window per h."""
    weeks = pd.date_range(end=fit_end, periods=window_weeks + 4, freq="7D")
    block = wide.reindex(columns=weeks).to_numpy(dtype=float)
    last = pd.DataFrame(block.T).ffill(limit=4).to_numpy().T  # last known count
    mean4 = pd.DataFrame(block.T).rolling(4, min_periods=1).mean().to_numpy().T
    for name, pred in (("last-week", last), ("mean-4-weeks", mean4)):

        def hist(h, pred=pred):
            p = np.maximum(pred[:, 3:-h], BASELINE_FLOOR)
            return block[:, 3 + h :].ravel(), p.ravel()

        yield name, pred[:, -1], hist


def _report_lag(counts: pd.DataFrame) -> int:
    """Median days from a week's end to its first report (at least 0)."""
    first = counts.groupby(["unit_id", "week"])["received"].min().reset_index()
    days = (first["received"] - first["week"] - WEEK).dt.days
    return max(int(np.median(days)), 0)
