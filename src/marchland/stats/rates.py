"""Attack rates, case fatality, empirical Bayes smoothing, and rates up the unit hierarchy.

Every function takes pandas objects indexed by ``unit_id`` and returns new ones on the same
index; none changes its inputs. Counts are whole numbers of reported cases (or deaths);
``<NA>`` means "not reported" and is carried through as a missing rate, never read as zero.

Windows
-------
``attack_rates`` and ``case_fatality`` also take a DataFrame of counts with one column per time
window (for example ``cumulative``, ``last_4w``, ``month``, as made by :func:`window_counts`).
The result then has two column levels, ``(window, field)``, so ``result["last_4w"]`` is exactly
the one-window table. Population may be one Series (the same for every window) or a DataFrame
with the same window columns.

Small numbers are unstable: a district of 2,000 people with 3 cases has an attack rate of
150 per 100,000 and an interval from 31 to 438. Read the limits, not only the rate.

The attack-rate limits cover Poisson noise only. Weekly outbreak counts are over-dispersed
(negative-binomial-like); with such counts the 95% limits cover 62-88% in simulation. We do not
widen them with an estimated dispersion: a unit's month holds four or five weekly counts, too
few to estimate it per unit, and a pooled quasi-Poisson estimate would read the epidemic's own
growth within the month as noise. Every place that shows the limits says so.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd
from scipy import stats

from ..errors import InputError
from ..graph.border import BorderGraph, as_border_graph
from ._align import align_units
from ._ebsmooth import global_eb, spatial_eb

RATE_COLUMNS = ("cases", "population", "rate", "lower", "upper")
CFR_COLUMNS = ("deaths", "cases", "cfr", "lower", "upper", "too_few", "above_threshold")
WINDOW_FIELDS = ("cases", "deaths", "cases_with_deaths", "weeks_reported")

# Common practice, not a source: with treatment, a CFR above 1% for cholera-like disease is
# usually read as a sign of late care seeking or poor access to treatment.
CFR_THRESHOLD = 0.01
# Common practice: below about 10 cases a CFR is too unstable to read on its own.
CFR_MIN_CASES = 10
# Interval methods of case_fatality: "exact" (Clopper-Pearson, the default) or "wilson".
CFR_METHODS = ("exact", "wilson")


# --- input checks ----------------------------------------------------------------------------
def _as_float(values: pd.Series, name: str) -> np.ndarray:
    """Values as float with <NA> -> NaN, or an InputError naming the first bad unit."""
    try:
        arr = (
            pd.to_numeric(values, errors="raise")
            .astype("Float64")
            .to_numpy(dtype=float, na_value=np.nan)
        )
    except (TypeError, ValueError) as exc:
        raise InputError(f"{name} must be numbers per unit_id ({exc})", column=name) from None
    return arr


def _counts(values: pd.Series, name: str) -> np.ndarray:
    """Whole, non-negative counts (NaN for not reported)."""
    arr = _as_float(values, name)
    bad = np.isfinite(arr) & ((arr < 0) | (arr != np.round(arr)))
    bad |= np.isinf(arr)
    if bad.any():
        unit = values.index[np.flatnonzero(bad)[0]]
        raise InputError(
            f"{name} must be whole numbers >= 0; unit {unit!r} has {arr[bad][0]!r}",
            column=name,
            value=arr[bad][0],
        )
    return arr


def _population(values: pd.Series) -> np.ndarray:
    arr = _as_float(values, "population")
    bad = np.isfinite(arr) & (arr < 0) | np.isinf(arr)
    if bad.any():
        unit = values.index[np.flatnonzero(bad)[0]]
        raise InputError(
            f"population must be >= 0; unit {unit!r} has {arr[bad][0]!r}",
            column="population",
            value=arr[bad][0],
        )
    return arr


def _check_conf(conf: float) -> float:
    if not 0 < conf < 1:
        raise ValueError(f"'conf' needs to be between 0 and 1. {conf!r} was given instead.")
    return 1.0 - conf


def _per_window(
    func: Callable[..., pd.DataFrame], first: object, second: object, **kwargs: object
) -> pd.DataFrame:
    """Apply a one-window function to each column of a windowed DataFrame."""
    if not isinstance(first, pd.DataFrame):
        return func(first, second, **kwargs)
    out = {}
    for window in first.columns:
        other = second[window] if isinstance(second, pd.DataFrame) else second
        out[window] = func(first[window], other, **kwargs)
    result = pd.concat(out, axis=1, names=["window", "field"])
    return result


# --- attack rates ----------------------------------------------------------------------------
def poisson_limits(counts: np.ndarray, conf: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Exact (Garwood 1936) confidence limits for a Poisson count.

    Lower limit ``chi2(alpha/2, 2x) / 2`` (0 when ``x`` is 0), upper limit
    ``chi2(1 - alpha/2, 2x + 2) / 2``; NaN counts give NaN limits.

    Parameters
    ----------
    counts : array-like
        Observed counts.
    conf : float
        Two-sided confidence level.

    Returns
    -------
    lower, upper : numpy.ndarray

    References
    ----------
    Garwood, F. (1936). Fiducial limits for the Poisson distribution. Biometrika 28, 437-442.

    Examples
    --------
    >>> lo, hi = poisson_limits([0, 10])
    >>> lo.round(3).tolist(), hi.round(3).tolist()
    ([0.0, 4.795], [3.689, 18.39])
    """
    alpha = _check_conf(conf)
    x = np.asarray(counts, dtype=float)
    with np.errstate(invalid="ignore"):
        lower = np.where(x > 0, stats.chi2.ppf(alpha / 2, 2 * np.where(x > 0, x, 1)) / 2, 0.0)
        upper = stats.chi2.ppf(1 - alpha / 2, 2 * x + 2) / 2
    lower = np.where(np.isnan(x), np.nan, lower)
    return lower, upper


def _attack_rates_one(
    cases: pd.Series, population: pd.Series, *, per: float, conf: float
) -> pd.DataFrame:
    pop_s = align_units(population, cases.index, "population", "cases")
    x = _counts(cases, "cases")
    pop = _population(pop_s)
    lower, upper = poisson_limits(x, conf)
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = np.where(pop > 0, per / pop, np.nan)
    out = pd.DataFrame(
        {
            "cases": pd.array(np.where(np.isnan(x), pd.NA, x), dtype="Int64"),
            "population": pop,
            "rate": x * scale,
            "lower": lower * scale,
            "upper": upper * scale,
        },
        index=pd.Index(cases.index, name="unit_id"),
    )
    return out


def attack_rates(
    cases: pd.Series | pd.DataFrame,
    population: pd.Series | pd.DataFrame,
    *,
    per: float = 100_000,
    conf: float = 0.95,
) -> pd.DataFrame:
    """Attack rate per ``per`` people with exact Poisson (Garwood) confidence limits.

    Parameters
    ----------
    cases : pandas.Series or pandas.DataFrame
        Cases per unit_id (``<NA>`` = not reported). A DataFrame holds one column per time
        window (see :func:`window_counts`).
    population : pandas.Series or pandas.DataFrame
        Population per unit_id, with the same unit_ids as ``cases``; a DataFrame must have the
        same window columns.
    per : float
        Rate denominator, 100,000 by default.
    conf : float
        Two-sided confidence level of the limits.

    Returns
    -------
    pandas.DataFrame
        Indexed by unit_id with columns ``cases population rate lower upper``. Rates are NaN
        where cases were not reported or the population is 0 or missing. A 0 count has lower
        limit 0 and a finite upper limit. For windowed input the columns are
        ``(window, field)``. The limits cover Poisson noise only (see the module notes):
        over-dispersed weekly counts make the true uncertainty wider.

    References
    ----------
    Garwood, F. (1936). Fiducial limits for the Poisson distribution. Biometrika 28, 437-442.

    Examples
    --------
    >>> cases = pd.Series({"TVR-01": 0, "TVR-02": 12}, name="cases")
    >>> pop = pd.Series({"TVR-01": 20_000, "TVR-02": 48_000})
    >>> attack_rates(cases, pop).round(1)
             cases  population  rate  lower  upper
    unit_id
    TVR-01       0     20000.0   0.0    0.0   18.4
    TVR-02      12     48000.0  25.0   12.9   43.7
    >>> windows = pd.DataFrame({"cumulative": [5, 12], "last_4w": [0, 3]},
    ...                        index=cases.index)
    >>> attack_rates(windows, pop)["last_4w"]["rate"].round(2).tolist()
    [0.0, 6.25]
    """
    if per <= 0:
        raise ValueError(f"'per' needs to be > 0. {per!r} was given instead.")
    _check_conf(conf)
    return _per_window(_attack_rates_one, cases, population, per=per, conf=conf)


# --- case fatality ---------------------------------------------------------------------------
def binomial_limits(
    successes: np.ndarray, trials: np.ndarray, conf: float = 0.95
) -> tuple[np.ndarray, np.ndarray]:
    """Exact (Clopper-Pearson 1934) limits of a binomial proportion, from beta quantiles.

    Lower ``Beta(alpha/2; x, n - x + 1)`` (0 when ``x`` is 0), upper
    ``Beta(1 - alpha/2; x + 1, n - x)`` (1 when ``x = n``). Coverage is at least ``conf``
    for every true proportion, where Wilson's falls to about 0.83 near 1% with up to 100
    cases; the price is a somewhat wider interval.

    Parameters
    ----------
    successes, trials : array-like
        Counts with ``0 <= successes <= trials`` and ``trials > 0``.
    conf : float
        Two-sided confidence level.

    Returns
    -------
    lower, upper : numpy.ndarray

    References
    ----------
    Clopper, C. J. & Pearson, E. S. (1934). The use of confidence or fiducial limits
    illustrated in the case of the binomial. Biometrika 26, 404-413.

    Examples
    --------
    >>> lo, hi = binomial_limits([0, 2], [10, 80])
    >>> lo.round(4).tolist(), hi.round(4).tolist()
    ([0.0, 0.003], [0.3085, 0.0874])
    """
    alpha = _check_conf(conf)
    x = np.asarray(successes, dtype=float)
    n = np.asarray(trials, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        lower = np.where(x > 0, stats.beta.ppf(alpha / 2, np.maximum(x, 1), n - x + 1), 0.0)
        upper = np.where(x < n, stats.beta.ppf(1 - alpha / 2, x + 1, np.maximum(n - x, 1)), 1.0)
    bad = ~(np.isfinite(x) & np.isfinite(n))
    return np.where(bad, np.nan, lower), np.where(bad, np.nan, upper)


def _case_fatality_one(
    deaths: pd.Series,
    cases: pd.Series,
    *,
    conf: float,
    min_cases: int,
    threshold: float,
    method: str,
) -> pd.DataFrame:
    from statsmodels.stats.proportion import proportion_confint

    cases = align_units(cases, deaths.index, "cases", "deaths")
    d = _counts(deaths, "deaths")
    n = _counts(cases, "cases")
    over = np.isfinite(d) & np.isfinite(n) & (d > n)
    if over.any():
        unit = deaths.index[np.flatnonzero(over)[0]]
        raise InputError(
            f"deaths cannot exceed cases; unit {unit!r} has {d[over][0]:.0f} deaths and "
            f"{n[over][0]:.0f} cases",
            column="deaths",
            value=d[over][0],
        )
    ok = np.isfinite(d) & np.isfinite(n) & (n > 0)
    cfr = np.full(len(d), np.nan)
    lower = np.full(len(d), np.nan)
    upper = np.full(len(d), np.nan)
    if ok.any():
        cfr[ok] = d[ok] / n[ok]
        if method == "exact":
            lo, hi = binomial_limits(d[ok], n[ok], conf)
        else:
            lo, hi = proportion_confint(d[ok], n[ok], alpha=1 - conf, method="wilson")
        lower[ok], upper[ok] = lo, hi
    known = np.isfinite(n)
    too_few = pd.array(np.where(known, n < min_cases, pd.NA), dtype="boolean")
    # Flag on the interval, not the point estimate: a point CFR above the threshold fires
    # 18-40% of the time when the true CFR equals it; the lower limit fires at most alpha/2.
    above = pd.array(np.where(ok, lower > threshold, pd.NA), dtype="boolean")
    return pd.DataFrame(
        {
            "deaths": pd.array(np.where(np.isnan(d), pd.NA, d), dtype="Int64"),
            "cases": pd.array(np.where(np.isnan(n), pd.NA, n), dtype="Int64"),
            "cfr": cfr,
            "lower": lower,
            "upper": upper,
            "too_few": too_few,
            "above_threshold": above,
        },
        index=pd.Index(deaths.index, name="unit_id"),
    )


def case_fatality(
    deaths: pd.Series | pd.DataFrame,
    cases: pd.Series | pd.DataFrame,
    *,
    conf: float = 0.95,
    min_cases: int = CFR_MIN_CASES,
    threshold: float = CFR_THRESHOLD,
    method: str = "exact",
) -> pd.DataFrame:
    """Case fatality ratio (deaths / cases) with exact limits, flagged not hidden.

    Parameters
    ----------
    deaths, cases : pandas.Series or pandas.DataFrame
        Counts per unit_id (``<NA>`` = not reported). Use as ``cases`` only the cases of the
        weeks whose deaths were reported (``window_counts(...)["cases_with_deaths"]``), so
        numerator and denominator cover the same weeks. DataFrames hold one column per window.
    conf : float
        Two-sided confidence level of the limits.
    min_cases : int
        Units with fewer cases are flagged ``too_few`` (common practice: 10).
    threshold : float
        ``above_threshold`` flags a unit whose interval lies above this proportion (lower
        limit > threshold), so a unit whose true CFR equals it is flagged at most
        ``(1 - conf) / 2`` of the time. The default 1% is a common rule of thumb for treated
        cholera-like disease, not a sourced standard.
    method : {"exact", "wilson"}
        Interval: Clopper-Pearson (exact; coverage never below ``conf``) or Wilson score
        (shorter, but coverage falls to about 0.83 near a CFR of 1% with under 100 cases).

    Returns
    -------
    pandas.DataFrame
        Indexed by unit_id with columns ``deaths cases cfr lower upper too_few
        above_threshold`` (CFR as a proportion, 0-1). ``cfr`` is NaN where there are no cases
        or either count is missing; the flags are then ``<NA>``.

    References
    ----------
    Clopper, C. J. & Pearson, E. S. (1934). Biometrika 26, 404-413.
    Wilson, E. B. (1927). Probable inference, the law of succession, and statistical
    inference. J. Am. Stat. Assoc. 22, 209-212. Newcombe, R. G. (1998). Two-sided confidence
    intervals for the single proportion. Stat. Med. 17, 857-872.

    Examples
    --------
    >>> deaths = pd.Series({"OSK-01": 2, "OSK-02": 0})
    >>> cases = pd.Series({"OSK-01": 80, "OSK-02": 4})
    >>> case_fatality(deaths, cases).round(4)
             deaths  cases    cfr   lower   upper  too_few  above_threshold
    unit_id
    OSK-01        2     80  0.025  0.0030  0.0874    False            False
    OSK-02        0      4  0.000  0.0000  0.6024     True            False
    """
    if min_cases < 0:
        raise ValueError(f"'min_cases' needs to be >= 0. {min_cases!r} was given instead.")
    if method not in CFR_METHODS:
        raise ValueError(
            f"'method' needs to be one of {CFR_METHODS}. {method!r} was given instead."
        )
    _check_conf(conf)
    return _per_window(
        _case_fatality_one,
        deaths,
        cases,
        conf=conf,
        min_cases=min_cases,
        threshold=threshold,
        method=method,
    )


# --- smoothing -------------------------------------------------------------------------------
def _rates_inputs(
    cases: pd.Series, population: pd.Series
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    pop_s = align_units(population, cases.index, "population", "cases")
    e = _counts(cases, "cases")
    b = _population(pop_s)
    valid = np.isfinite(e) & np.isfinite(b) & (b > 0)
    return e, b, valid


def smooth_rates(
    cases: pd.Series,
    population: pd.Series,
    *,
    graph: BorderGraph | object | None = None,
    per: float = 100_000,
) -> pd.Series:
    """Empirical Bayes smoothed rates: global (Marshall 1991) or spatial, with a graph.

    Each raw rate is pulled toward a prior mean by an amount that grows as the unit's
    population shrinks, so small units with a few cases stop dominating the map. The global
    prior is the whole region's rate; the spatial prior is the rate of the unit and its
    neighbours (binary contiguity, the unit itself included). An island (no neighbour with a
    usable population) has no neighbourhood to borrow from: it is shrunk by the global
    estimator instead, and listed in the result's ``attrs["islands_global"]``.

    Parameters
    ----------
    cases, population : pandas.Series
        Per unit_id, the same unit_ids in both.
    graph : BorderGraph or libpysal.graph.Graph, optional
        Neighbours for the spatial version; its ids must match the unit_ids.
    per : float
        Rate denominator, as in :func:`attack_rates`.

    Returns
    -------
    pandas.Series
        ``rate_smoothed`` per ``per`` people, indexed by unit_id; NaN where cases were not
        reported or the population is 0 or missing (those units are left out of the priors).

    References
    ----------
    Marshall, R. J. (1991). Mapping disease and mortality rates using empirical Bayes
    estimators. Applied Statistics 40, 283-294.

    Examples
    --------
    >>> cases = pd.Series({"a": 0, "b": 10, "c": 3, "d": 40})
    >>> pop = pd.Series({"a": 500, "b": 20_000, "c": 1_000, "d": 90_000})
    >>> smooth_rates(cases, pop).round(1).tolist()
    [45.5, 49.1, 68.0, 44.8]
    """
    e, b, valid = _rates_inputs(cases, population)
    out = np.full(len(e), np.nan)
    if graph is None:
        if valid.any():
            out[valid] = global_eb(e[valid], b[valid])
        index = pd.Index(cases.index, name="unit_id")
    else:
        bg = as_border_graph(graph)
        index = bg.ids
        align_units(cases, bg.ids, "cases", "the graph")
        e, b, valid = _rates_inputs(cases.reindex(bg.ids), population)
        out, island = spatial_eb(e, b, valid, bg)
        result = pd.Series(out * per, index=index, name="rate_smoothed")
        result.attrs["islands_global"] = list(index[island])
        return result
    return pd.Series(out * per, index=index, name="rate_smoothed")


def eb_standardised(cases: pd.Series, population: pd.Series) -> pd.Series:
    """Rates standardised by their empirical Bayes mean and variance (Assuncao & Reis 1999).

    ``(r_i - m) / sqrt(a + m / n_i)`` with ``m`` the region's rate and ``a`` the
    method-of-moments prior variance; where ``a + m / n_i`` is negative, ``m / n_i`` is used.
    This is the variable the rate-adjusted Moran's I is computed on. Written here (not
    esda's ``assuncao_rate``) to leave out units without a usable population and to stay
    vectorised; the test checks it against esda.

    Parameters
    ----------
    cases, population : pandas.Series
        Per unit_id, the same unit_ids in both.

    Returns
    -------
    pandas.Series
        ``rate_z`` indexed by unit_id, NaN where cases or population are missing or
        population is 0.

    References
    ----------
    Assuncao, R. M. & Reis, E. A. (1999). A new proposal to adjust Moran's I for population
    density. Statistics in Medicine 18, 2147-2162.

    Examples
    --------
    >>> e = pd.Series([30, 25, 25, 15, 33, 21, 30, 20], index=list("abcdefgh"))
    >>> b = pd.Series([100, 100, 110, 90, 100, 90, 110, 90], index=list("abcdefgh"))
    >>> eb_standardised(e, b).round(3).tolist()[:4]
    [1.038, -0.041, -0.563, -1.731]
    """
    e, b, valid = _rates_inputs(cases, population)
    out = np.full(len(e), np.nan)
    if valid.any():
        ev, bv = e[valid], b[valid]
        m = ev.sum() / bv.sum()
        rate = ev / bv
        a = (bv * (rate - m) ** 2).sum() / bv.sum() - m / bv.mean()
        var = a + m / bv
        var = np.where(var < 0, m / bv, var)
        with np.errstate(invalid="ignore", divide="ignore"):
            out[valid] = (rate - m) / np.sqrt(var)
    return pd.Series(out, index=pd.Index(cases.index, name="unit_id"), name="rate_z")
