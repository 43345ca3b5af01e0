"""Short-term projections of weekly cases per unit from the endemic-epidemic model.

:func:`forecast` fits the model to the recent weeks as known on a date and simulates count
paths over the next weeks; :class:`Forecast` holds the per-unit table, the parameters and the
paths, which :meth:`Forecast.aggregate` sums to provinces, countries or the region (intervals of
a sum come from summed paths, never from summed intervals).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import sparse

from ..graph.border import BorderGraph, as_border_graph
from ._model import DISPERSIONS, ModelSpec
from ._paths import PathStore
from ._setup import (
    DEFAULT_SKIP_RECENT_WEEKS,
    DEFAULT_WINDOW_WEEKS,
    WEEK,
    Origin,
    check_units,
    fit_origin,
    island_warning,
    last_week_over,
    weeks_panel,
)
from ._simulate import path_blocks, simulate_paths
from ._weights import OrderMatrix

TABLE_COLUMNS = ("week", "horizon", "mean", "median", "lower", "upper", "p_any", "note")
GROUPINGS = ("unit", "province", "country", "region")
MAX_ORDER = 5  # neighbourhood reaches 5 graph steps; power-law weights beyond are negligible
DEFAULT_DISPERSION = "country"  # lower CRPS than "shared" at h1-4 (bench_calibration.py)


@dataclass(frozen=True, eq=False)
class Forecast:
    """Projected weekly cases: per-unit table, fitted parameters and simulated paths.

    Attributes
    ----------
    table : pandas.DataFrame
        Indexed by ``unit_id``; one row per unit and forecast week with columns ``week``
        (start of the week), ``horizon`` (1 = the week after the origin), ``mean``, ``median``,
        ``lower``, ``upper`` (central ``conf`` interval of the paths), ``p_any`` (probability of
        at least one case) and ``note`` (why a row is NaN, else "").
    parameters : pandas.DataFrame
        Indexed by parameter (``intercept``, ``lambda``, ``phi``, ``d``, and ``psi`` or one
        ``psi_<country>`` per size group, ...):
        ``estimate lower upper`` (95 % Wald interval, natural scale), ``se`` (on ``scale``),
        ``scale`` and ``at_bound``.
    paths : numpy.ndarray
        Simulated counts, int32, shape (horizon, unit, path), units in ``units`` order: made
        from ``path_store`` at each access (0.8 GB at 50,000 units x 4 weeks x 1,000 paths);
        :meth:`aggregate` and :meth:`unit_paths` read the store without making it whole.
    path_store : PathStore
        The same counts held compactly (one sparse unit x path matrix per week, mostly zeros).
    """

    table: pd.DataFrame
    parameters: pd.DataFrame
    path_store: PathStore
    weeks: pd.DatetimeIndex
    units: pd.DataFrame  # country and province per unit_id, plus whether its start is known
    origin_week: pd.Timestamp
    fit_end: pd.Timestamp
    window_weeks: int
    conf: float
    notes: tuple[str, ...] = field(default=())

    @property
    def paths(self) -> np.ndarray:
        """Simulated counts, dense int32 (horizon, unit, path), made anew at each access."""
        return self.path_store.toarray()

    def unit_paths(self, start: int, stop: int) -> np.ndarray:
        """Dense int32 paths (horizon, unit, path) of the units at positions ``start:stop``."""
        return self.path_store.units(start, stop)

    def aggregate(self, by: str | pd.Series = "country", *, conf: float | None = None):
        """Sum the simulated paths over groups of units and summarise each group and week.

        Parameters
        ----------
        by : {"unit", "province", "country", "region"} or pandas.Series
            Grouping, or a Series mapping ``unit_id`` to a group label.
        conf : float, optional
            Interval level; defaults to the forecast's.

        Returns
        -------
        pandas.DataFrame
            Indexed by group; columns ``week horizon mean median lower upper p_any
            n_units n_unknown`` (units whose starting count was unknown are left out of the
            sums and counted in ``n_unknown``).

        Examples
        --------
        >>> import marchland.pack as region, marchland.demo as demo
        >>> r = region.open_region(demo.scenario_path())
        >>> import warnings
        >>> from marchland.errors import DataWarning
        >>> with warnings.catch_warnings():
        ...     warnings.simplefilter("ignore", DataWarning)  # the demo graph has one island
        ...     f = forecast(r.counts, r.units, r.graph, as_of="2026-09-01", seed=1, n_paths=200)
        >>> f.aggregate("region")[["horizon", "mean"]].shape
        (4, 2)
        """
        if isinstance(by, str):
            if by not in GROUPINGS:
                raise ValueError(f"'by' needs to be one of {GROUPINGS}. {by!r} was given instead.")
            labels = (
                pd.Series("region", index=self.units.index)
                if by == "region"
                else pd.Series(self.units.index, index=self.units.index)
                if by == "unit"
                else self.units[by]
            )
        else:
            labels = pd.Series(by).reindex(self.units.index)
            if labels.isna().any():
                raise ValueError("'by' must give a group for every unit of the forecast")
        known = self.units["start_known"].to_numpy()
        codes, groups = pd.factorize(labels, sort=True)
        g = sparse.csr_matrix(
            (known.astype(float), (codes, np.arange(len(codes)))), shape=(len(groups), len(codes))
        )
        sums = self.path_store.group_sums(g)
        out = summarise_paths(sums, groups, self.weeks, self.conf if conf is None else conf)
        out["n_units"] = np.tile(np.bincount(codes, minlength=len(groups)), len(self.weeks))
        out["n_unknown"] = np.tile(
            np.bincount(codes, weights=~known, minlength=len(groups)).astype(int),
            len(self.weeks),
        )
        out.index.name = "unit_id" if isinstance(by, str) and by == "unit" else "group"
        return out


#: Units summarised at a time (bounds the copy np.quantile makes of the paths).
SUMMARY_BLOCK = 2_000


def summarise_paths(
    paths: np.ndarray | PathStore, ids, weeks: pd.DatetimeIndex, conf: float
) -> pd.DataFrame:
    """Mean, median, central interval and P(Y > 0) per (id, week) from (week, id, path) draws.

    ``paths`` is an array or a :class:`PathStore` (read a block of units at a time).
    """
    a = (1 - conf) / 2
    steps, n = paths.shape[:2]
    q = np.empty((3, steps, n))
    mean, p_any = np.empty((steps, n)), np.empty((steps, n))
    # A block of units at a time: np.quantile sorts a copy of its input, and at 50,000 units
    # x 1,000 paths a copy of every path is 0.8 GB (each unit's numbers do not change).
    for lo in range(0, n, SUMMARY_BLOCK):
        b = (
            paths.units(lo, lo + SUMMARY_BLOCK)
            if isinstance(paths, PathStore)
            else paths[:, lo : lo + SUMMARY_BLOCK]
        )
        q[:, :, lo : lo + SUMMARY_BLOCK] = np.quantile(
            b, [a, 0.5, 1 - a], axis=2, method="inverted_cdf"
        )
        mean[:, lo : lo + SUMMARY_BLOCK] = b.mean(axis=2)
        p_any[:, lo : lo + SUMMARY_BLOCK] = (b > 0).mean(axis=2)
    return pd.DataFrame(
        {
            "week": np.repeat(weeks, n),
            "horizon": np.repeat(np.arange(1, steps + 1), n),
            "mean": mean.ravel(),
            "median": q[1].ravel(),
            "lower": q[0].ravel(),
            "upper": q[2].ravel(),
            "p_any": p_any.ravel(),
        },
        index=pd.Index(np.tile(np.asarray(ids), steps), name="unit_id"),
    )


def _provinces(units: pd.DataFrame) -> pd.Series:
    if "parent_id" not in units.columns:
        return pd.Series(units.index, index=units.index)
    parent = units["parent_id"]
    level = units["level"] if "level" in units.columns else pd.Series(2, index=units.index)
    return parent.where((level != 1) & parent.notna(), pd.Series(units.index, index=units.index))


def run_origin(
    origin: Origin, *, horizon_weeks: int, n_paths: int, seed, keep_means=False, store=False
):
    """Simulate from the fit end through the origin week to ``horizon_weeks`` after it.

    With ``store`` the paths come as a :class:`PathStore` (compressed block by block as drawn,
    the same counts), else as a dense int32 array; ``keep_means`` adds the dense float32
    conditional means after the paths.
    """
    fit = origin.fit
    lead = int(round((origin.origin_week - origin.fit_end) / WEEK))
    steps = lead + horizon_weeks
    weeks = pd.date_range(origin.fit_end + WEEK, periods=steps, freq="7D")
    start = np.nan_to_num(origin.start, nan=0.0)
    kw = dict(
        lam=fit.value("log_lambda"),
        phi=fit.value("log_phi"),
        d=fit.value("log_d", 1.0),
        psi=fit.sizes(),
        orders=origin.orders,
        n_paths=n_paths,
        rng=np.random.default_rng(seed),
    )
    if store:
        blocks = path_blocks(start, origin.endemic(weeks), keep_means=keep_means, **kw)
        means = (
            np.empty((horizon_weeks, len(start), n_paths), dtype=np.float32) if keep_means else None
        )

        def kept():
            # Only the horizon weeks are kept: the lead weeks of each block are dropped first.
            for lo, hi, p, mu in blocks:
                if keep_means:
                    means[:, :, lo:hi] = mu[lead:]
                yield lo, hi, p[lead:]

        paths = PathStore.from_blocks(kept(), n_paths=n_paths)
        return (paths, means, weeks[lead:]) if keep_means else (paths, weeks[lead:])
    out = simulate_paths(start, origin.endemic(weeks), keep_means=keep_means, **kw)
    if keep_means:
        return out[0][lead:], out[1][lead:], weeks[lead:]
    return out[lead:], weeks[lead:]


def forecast(
    counts: pd.DataFrame,
    units: pd.DataFrame,
    graph,
    *,
    as_of,
    horizon_weeks: int = 4,
    conf: float = 0.9,
    seed: int | None = None,
    n_paths: int = 1000,
    panel: pd.DataFrame | None = None,
    window_weeks: int = DEFAULT_WINDOW_WEEKS,
    skip_recent_weeks: int = DEFAULT_SKIP_RECENT_WEEKS,
    seasonal: bool = False,
    covariates: pd.DataFrame | None = None,
    max_order: int = MAX_ORDER,
    dispersion: str = DEFAULT_DISPERSION,
) -> Forecast:
    """Project weekly cases per unit for the next weeks, with intervals, from the data as known.

    Fits the endemic-epidemic model (endemic part with a population offset, autoregressive
    part, and a cross-border neighbourhood part with power-law weights over graph order) to
    the recent weeks and simulates ``n_paths`` count paths.

    Parameters
    ----------
    counts : pandas.DataFrame
        Counts with every revision (``unit_id week cases ... received``).
    units : pandas.DataFrame
        Analysis units indexed by ``unit_id`` with ``population`` (and ``country``,
        ``parent_id``, ``level`` for aggregation).
    graph : BorderGraph or libpysal.graph.Graph
        Contiguity across borders over the units.
    as_of : date-like
        Use what was known on this date; the origin is the last week over by then.
    horizon_weeks : int
        Weeks ahead (1 = the week after the origin).
    conf : float
        Level of the central interval.
    seed : int, optional
        Seed of ``numpy.random.default_rng`` for the paths.
    n_paths : int
        Number of simulated paths.
    panel : pandas.DataFrame, optional
        Unit x week counts to use instead of ``counts`` (e.g. nowcast-corrected recent weeks);
        NaN is unknown. ``as_of`` still sets the origin.
    window_weeks : int
        Number of recent weeks the model is fitted to (at least 8).
    skip_recent_weeks : int
        Most recent weeks left out of the fit as still incomplete; they are simulated.
    seasonal : bool
        Add sin/cos terms of the week of the year to the endemic part.
    covariates : pandas.DataFrame, optional
        Numeric unit-level covariates of the endemic part, indexed by ``unit_id``.
    max_order : int
        Farthest graph order the neighbourhood part reaches.
    dispersion : {"country", "shared"}
        One negative binomial size per country (a country with fewer than 20 non-zero counts in
        the window shares one with the other such countries), or one for all units.

    Returns
    -------
    Forecast
        ``.table`` (per unit and week: ``mean median lower upper p_any``), ``.parameters``,
        ``.paths`` and ``.aggregate(by)``.

    Notes
    -----
    A unit-week with no report is unknown, not zero: a missing lagged count is carried forward
    from the unit's last report at most 4 weeks; a unit with no report in that time starts its
    paths at 0, gets NaN in the table with a note and is left out of aggregates. Units without
    a neighbour (islands) have no neighbourhood part (a ``DataWarning`` says so).
    Projections are decision support, not certainty: reporting is delayed and incomplete, and
    small numbers are unstable. Defer to national authorities.

    References
    ----------
    Held L, Hoehle M, Hofmann M (2005). A statistical framework for the analysis of multivariate
    infectious disease surveillance counts. Statistical Modelling 5:187-199.
    Paul M, Held L (2011). Predictive assessment of a non-linear random effects model for
    multivariate time series of infectious disease counts. Statistics in Medicine 30:1118-1136.
    Meyer S, Held L (2014). Power-law models for infectious disease spread. Annals of Applied
    Statistics 8:1612-1639.
    Meyer S, Held L, Hoehle M (2017). Journal of Statistical Software 77(11):1-55 (grouped
    overdispersion parameters of the endemic-epidemic model).

    Examples
    --------
    >>> import marchland.pack as region, marchland.demo as demo
    >>> r = region.open_region(demo.scenario_path())
    >>> import warnings
    >>> from marchland.errors import DataWarning
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore", DataWarning)  # the demo graph has one island
    ...     f = forecast(r.counts, r.units, r.graph, as_of="2026-09-01", seed=1, n_paths=200)
    >>> sorted(f.table["horizon"].unique().tolist())
    [1, 2, 3, 4]
    >>> list(f.parameters.index)  # one negative binomial size per country
    ['intercept', 'lambda', 'phi', 'd', 'psi_MRW', 'psi_OSK', 'psi_QLN', 'psi_TVR']
    """
    if int(horizon_weeks) != horizon_weeks or horizon_weeks < 1:
        raise ValueError(f"'horizon_weeks' needs to be a whole number >= 1. {horizon_weeks!r}")
    if not 0 < conf < 1:
        raise ValueError(f"'conf' needs to be between 0 and 1. {conf!r} was given instead.")
    if n_paths < 1:
        raise ValueError(f"'n_paths' needs to be >= 1. {n_paths!r} was given instead.")
    ids, e = check_units(units)
    bg = _graph_for(graph, units)
    island_warning(bg, ids, stacklevel=3)
    date = pd.Timestamp(as_of)
    wide = weeks_panel(counts, ids, date) if panel is None else _checked_panel(panel, ids)
    if wide.shape[1] == 0:
        raise ValueError(f"no reports known on {date.date()}: nothing to forecast from")
    origin_week = last_week_over(pd.Timestamp(wide.columns.min()), date)
    orders = OrderMatrix.from_graph(bg, ids, max_order)
    spec = model_spec(dispersion, seasonal=seasonal, max_order=max_order)
    z = None if covariates is None else covariates.reindex(ids)
    if z is not None and z.isna().any().any():
        raise ValueError("'covariates' must have a value for every unit")
    origin = fit_origin(
        wide,
        e,
        orders,
        origin_week,
        window_weeks=window_weeks,
        skip_recent_weeks=skip_recent_weeks,
        spec=spec,
        covariates=z,
        groups=size_labels(units, ids),
    )
    paths, weeks = run_origin(
        origin, horizon_weeks=horizon_weeks, n_paths=n_paths, seed=seed, store=True
    )
    table = summarise_paths(paths, ids, weeks, conf)
    known = np.isfinite(origin.start)
    table["note"] = ""
    unknown_rows = np.tile(~known, horizon_weeks)
    table.loc[unknown_rows, ["mean", "median", "lower", "upper", "p_any"]] = np.nan
    table.loc[unknown_rows, "note"] = "no report in the 4 weeks before the fit end"
    notes = []
    if (~known).any():
        notes.append(f"{int((~known).sum())} unit(s) with no recent report: start taken as 0")
    if origin.fit.at_bound:
        names = [n.removeprefix("log_") for n in origin.fit.at_bound]
        notes.append(f"parameters at a bound of the search: {', '.join(names)}")
    unit_info = pd.DataFrame(
        {
            "country": units["country"] if "country" in units.columns else "all",
            "province": _provinces(units),
            "start_known": known,
        },
        index=ids,
    )
    return Forecast(
        table=table.loc[:, list(TABLE_COLUMNS)],
        parameters=origin.fit.table(),
        path_store=paths,
        weeks=weeks,
        units=unit_info,
        origin_week=origin_week,
        fit_end=origin.fit_end,
        window_weeks=window_weeks,
        conf=conf,
        notes=tuple(notes),
    )


def model_spec(dispersion: str, **kw) -> ModelSpec:
    """Model parts with the dispersion checked against the allowed values."""
    if dispersion not in DISPERSIONS:
        raise ValueError(
            f"'dispersion' needs to be one of {DISPERSIONS}. {dispersion!r} was given instead."
        )
    return ModelSpec(dispersion=dispersion, **kw)


def size_labels(units: pd.DataFrame, ids: pd.Index) -> np.ndarray | None:
    """Country of each unit, the groups of a per-country size (None without a country)."""
    if "country" not in units.columns:
        return None
    return units["country"].reindex(ids).astype(str).to_numpy()


def _graph_for(graph, units) -> BorderGraph:
    countries = units["country"] if "country" in units.columns else None
    bg = as_border_graph(graph, countries=countries)
    missing = pd.Index(units.index).difference(bg.ids)
    if len(missing):
        raise ValueError(
            f"the graph must hold every unit; {len(missing)} are not in it: {missing[:5].tolist()}"
        )
    return bg


def _checked_panel(panel: pd.DataFrame, ids: pd.Index) -> pd.DataFrame:
    if not isinstance(panel.columns, pd.DatetimeIndex):
        raise ValueError("'panel' needs weeks (Timestamps) as columns and unit_id as index")
    out = panel.reindex(ids).astype(float)
    if (out < 0).any().any():
        raise ValueError("'panel' must not hold negative counts")
    return out
