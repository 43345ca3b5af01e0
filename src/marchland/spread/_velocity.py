"""Speed of spread from arrival times at unit centroids (private to the spread stage).

Two estimators, both ordinary least squares in statsmodels:

* **trend surface**: arrival week as a polynomial in the centroid coordinates (km); the local
  speed is ``1 / |grad T|`` at each unit, summarised by the median over units. Its interval
  comes from drawing coefficient vectors from the fit's sampling distribution (multivariate
  normal with the OLS covariance) and taking quantiles of the median speed: one vectorised
  array operation, no refitting loop.
* **distance regression**: arrival week on distance (km) from the origin; speed = 1 / slope.
  The interval is the inverse of the slope's interval, valid only when that interval lies
  above zero; otherwise the upper limit is infinite (speed not bounded by the data).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import geopandas as gpd
import numpy as np
import pandas as pd

# The OLS module alone: ``statsmodels.api`` also loads formulas, plots and every model
# (0.38-0.47 s more of a cold start, measured with pandas and scipy already loaded).
from statsmodels.regression.linear_model import OLS
from statsmodels.tools.tools import add_constant

VELOCITY_METHODS = ("trend_surface", "distance_regression")
VELOCITY_COLUMNS = ("km_per_week", "lower", "upper", "n_units", "method", "note")

# Fewest units per polynomial coefficient before the degree is lowered (common practice:
# several observations per parameter keep a trend surface from chasing noise).
UNITS_PER_TERM = 5
MIN_UNITS = 4
# Elements per block of simulated gradients (draws x units float64, ~16 MB each).
SIM_ELEMENTS = 1 << 21


def _terms(degree: int) -> list[tuple[int, int]]:
    return [(i, j) for d in range(degree + 1) for i in range(d + 1) for j in [d - i]]


def _design(xs: np.ndarray, ys: np.ndarray, terms) -> np.ndarray:
    return np.column_stack([xs**i * ys**j for i, j in terms])


def _gradient(beta: np.ndarray, xs: np.ndarray, ys: np.ndarray, terms) -> tuple:
    """Partial derivatives of the polynomial; beta may be (p,) or (draws, p)."""
    beta = np.atleast_2d(beta)
    dx = np.zeros((beta.shape[0], len(xs)))
    dy = np.zeros_like(dx)
    for k, (i, j) in enumerate(terms):  # loop over the <= 10 terms, not over units
        if i > 0:
            dx += beta[:, [k]] * (i * xs ** (i - 1) * ys**j)
        if j > 0:
            dy += beta[:, [k]] * (j * xs**i * ys ** (j - 1))
    return dx, dy


def trend_surface(x_km, y_km, t_weeks, *, degree: int, conf: float, draws: int, rng) -> dict:
    """Median local speed (km/week) of a polynomial trend surface, with a simulation interval."""
    n = len(t_weeks)
    if n < MIN_UNITS:
        return _empty("trend_surface", n, f"needs at least {MIN_UNITS} affected units")
    used = degree
    while used > 1 and n < UNITS_PER_TERM * len(_terms(used)):
        used -= 1
    if n <= len(_terms(used)):
        return _empty("trend_surface", n, "too few units for a linear surface")
    # Centre and scale so the polynomial is well conditioned; undo the scale in the gradient.
    cx, cy = x_km.mean(), y_km.mean()
    scale = max(np.ptp(x_km), np.ptp(y_km)) / 2 or 1.0
    xs, ys = (x_km - cx) / scale, (y_km - cy) / scale
    # Lower the degree until the design has full rank (units along a line or a few rows).
    while True:
        terms = _terms(used)
        design = _design(xs, ys, terms)
        if np.linalg.matrix_rank(design) == len(terms):
            break
        if used == 1:
            return _empty(
                "trend_surface",
                n,
                "unit centroids lie (nearly) on a line: a surface "
                "cannot be fitted; use the distance regression",
            )
        used -= 1
    fit = OLS(t_weeks, design).fit()
    dx, dy = _gradient(fit.params, xs, ys, terms)
    speed = scale / np.hypot(dx, dy)[0]
    est = float(np.median(speed))
    cov = np.asarray(fit.cov_params())
    if not np.all(np.isfinite(cov)):
        lo = hi = np.nan
    else:
        sims = rng.multivariate_normal(np.asarray(fit.params), cov, size=draws, method="svd")
        # Draws x units gradients in blocks of draws: each draw's median is its own row, so
        # the blocks give the same numbers as one array (2,000 draws x the 10,732 affected
        # units of a 50,000-unit region were 172 MB an array, several alive at once).
        step = max(1, SIM_ELEMENTS // n)
        med = np.concatenate(
            [
                np.median(scale / np.hypot(*_gradient(sims[i : i + step], xs, ys, terms)), axis=1)
                for i in range(0, max(draws, 1), step)
            ]
        )
        a = (1 - conf) / 2
        lo, hi = (float(v) for v in np.quantile(med, [a, 1 - a]))
    note = f"degree {used}" + (f" (lowered from {degree}: {n} units)" if used < degree else "")
    note += f"; R2 {fit.rsquared:.2f}"
    return {
        "km_per_week": est,
        "lower": lo,
        "upper": hi,
        "n_units": n,
        "method": "trend_surface",
        "note": note,
    }


def distance_regression(d_km, t_weeks, *, conf: float) -> dict:
    """Speed (km/week) as the inverse slope of arrival week on distance from the origin."""
    n = len(t_weeks)
    if n < 3 or np.ptp(d_km) == 0:
        return _empty("distance_regression", n, "needs 3 units at different distances")
    fit = OLS(t_weeks, add_constant(d_km, has_constant="add")).fit()
    slope = float(fit.params[1])
    s_lo, s_hi = (float(v) for v in np.asarray(fit.conf_int(alpha=1 - conf))[1])
    note = f"slope {slope:.4g} weeks/km [{s_lo:.4g}, {s_hi:.4g}]; R2 {fit.rsquared:.2f}"
    if slope <= 0:
        return _empty("distance_regression", n, "arrival does not get later with distance; " + note)
    lower = 1 / s_hi if s_hi > 0 else np.nan
    upper = 1 / s_lo if s_lo > 0 else np.inf
    if s_lo <= 0:
        note += "; slope interval includes 0, so the speed has no upper bound"
    return {
        "km_per_week": 1 / slope,
        "lower": lower,
        "upper": upper,
        "n_units": n,
        "method": "distance_regression",
        "note": note,
    }


def _empty(method: str, n: int, why: str) -> dict:
    return {
        "km_per_week": np.nan,
        "lower": np.nan,
        "upper": np.nan,
        "n_units": n,
        "method": method,
        "note": why,
    }


def estimate(
    cent: pd.DataFrame,
    first: pd.Series,
    origin,
    groups: dict | None,
    *,
    degree: int,
    conf: float,
    draws: int,
    rng,
) -> tuple[pd.DataFrame, pd.DataFrame | None]:
    """Both estimators overall (table by method) and per group (or None)."""
    t = first.reindex(cent.index)
    affected = t.notna().to_numpy()
    start = t.min()
    weeks = ((t - start) / pd.Timedelta(days=7)).to_numpy(dtype=float)
    if origin is None:
        origin_xy = cent[(t == start).to_numpy()].mean().to_numpy()
    elif isinstance(origin, tuple) and len(origin) == 2 and not isinstance(origin[0], str):
        origin_xy = np.asarray(origin, dtype=float) / 1000
    else:
        ids = [origin] if isinstance(origin, str) else list(origin)
        origin_xy = cent.loc[ids].mean().to_numpy()
    opts = {"degree": degree, "conf": conf, "draws": draws, "rng": rng}
    xy = cent[["x", "y"]].to_numpy()
    table = velocity_table(xy[affected], weeks[affected], origin_xy, **opts)
    by_group = None
    if groups is not None:
        parts = []
        for name, members in groups.items():  # a handful of groups
            sel = cent.index.isin(members) & affected
            part = velocity_table(xy[sel], weeks[sel], origin_xy, **opts)
            parts.append(part.assign(group=name))
        by_group = pd.concat(parts).reset_index().set_index(["group", "method"])
    return table, by_group


def velocity_table(xy, t_weeks, origin_xy, *, degree, conf, draws, rng) -> pd.DataFrame:
    """One row per estimator for the given units."""
    x, y = xy[:, 0], xy[:, 1]
    d = np.hypot(x - origin_xy[0], y - origin_xy[1])
    rows = [
        trend_surface(x, y, t_weeks, degree=degree, conf=conf, draws=draws, rng=rng),
        distance_regression(d, t_weeks, conf=conf),
    ]
    # The method is the index (one key, one place): a CSV of the table has no repeated column.
    return pd.DataFrame(rows, columns=list(VELOCITY_COLUMNS)).set_index("method")


def groups_of(groups, units: gpd.GeoDataFrame) -> dict:
    """Group name -> unit ids, from a column name, a Series or a dict."""
    if isinstance(groups, str):
        if groups not in units.columns:
            raise KeyError(f"'groups' names column {groups!r}, which units lack")
        groups = units[groups]
    if isinstance(groups, pd.Series):
        return {k: v.index for k, v in groups.dropna().groupby(groups.dropna())}
    if isinstance(groups, dict):
        return {k: pd.Index(list(v)) for k, v in groups.items()}
    raise TypeError(
        "'groups' needs to be a column name of units, a Series (unit id -> group) or a dict "
        f"(group -> unit ids). {type(groups).__name__} was given instead."
    )


@dataclass(frozen=True, eq=False)
class Velocity:
    """Speed of spread in km per week, with its interval, from one method (the headline).

    ``by_method`` holds every method's estimate (index ``method``; columns ``km_per_week
    lower upper n_units note``, ``note`` saying how it was fitted or why it is NaN);
    ``by_group`` the same per group and method when groups were asked for (index ``group``,
    ``method``), else ``None``. ``conf`` is the interval's confidence level.
    """

    km_per_week: float
    lower: float
    upper: float
    n_units: int
    method: str
    by_method: pd.DataFrame = field(repr=False)
    by_group: pd.DataFrame | None = field(default=None, repr=False)
    conf: float = 0.95
