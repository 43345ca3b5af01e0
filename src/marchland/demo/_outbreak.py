"""The outbreak: a weekly stochastic metapopulation model over the true district adjacency.

Each district holds a pool of people at risk of a reported-severity illness (a share of its
population). Each week the force of infection on district ``i`` is

    lambda_i(t) = beta_i(t) * (x_i + sum_j eps_ij * x_j) [+ hot-area water hazard],

where ``x_j`` is the infectious share of ``j``'s pool (last week's cases and 0.4 of the week
before's) and ``eps_ij`` couples neighbours by shared border length and population - stronger
between river districts, weaker across international borders and over ferry and bridge
links. ``beta`` carries a rainy-season cycle and, in the hot area during ``HOT_MONTHS``, a
multiplier; there the pool is also refilled by newcomers. New cases are binomial draws from
the susceptible pool, deaths binomial draws from the cases with a case fatality that rises
where care is poor. Immunity wanes slowly, which keeps the epidemic going through a second
season. Only the loop over weeks is in Python.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

START = pd.Timestamp("2025-04-07")  # a Monday
N_WEEKS = 82  # to the week starting 2026-10-26
HOT_MONTHS = pd.period_range("2026-05", "2026-10", freq="M")

# Model constants, chosen so the epidemic crosses all four borders in about 18 months.
_POOL = {"TVR": 0.022, "OSK": 0.02, "MRW": 0.009, "QLN": 0.02}  # share of people at risk
_REPORTING = {"TVR": 0.7, "OSK": 0.6, "MRW": 0.5, "QLN": 0.65}
_BETA = 1.2  # weekly transmission within a district's pool
_SEASON = 0.3  # seasonal amplitude; peak in the rainy season (February)
_COUPLE = 0.05  # neighbour coupling per unit share of a district's border
_RIVER = 4.0  # both districts on the Senn
_CROSS = 0.3  # across an international border
_LINK = {"ferry": 0.02, "bridge": 0.05, "road": 0.05}
_HOT = 2.5  # transmission multiplier in the hot area during HOT_MONTHS
_HOT_ENV = 0.03  # weekly hazard from contaminated water in the hot area during HOT_MONTHS
_WANE = 0.006  # weekly return of recovered people to the pool
_HOT_INFLUX = 0.08  # in the hot area during HOT_MONTHS: newcomers refill the pool this fast
_HOT_POOL = 2.5  # ... up to this multiple of the usual pool (crowded shore settlements)
_SEED_CASES = 6


@dataclass(frozen=True)
class Outbreak:
    """True weekly cases, deaths and force of infection (districts x weeks) and seeding."""

    weeks: pd.DatetimeIndex
    cases: np.ndarray
    deaths: np.ndarray
    force: np.ndarray
    first_week: np.ndarray  # index of the first week with a case, -1 if never
    seeded_by: np.ndarray  # position of the seeding district, -1 for the seed / unaffected
    cfr: np.ndarray


def simulate(
    ids: pd.Index,
    country: np.ndarray,
    population: np.ndarray,
    care: np.ndarray,
    river: np.ndarray,
    adjacency: pd.DataFrame,
    links: pd.DataFrame,
    seed_id: str,
    hot_ids: list[str],
    rng: np.random.Generator,
) -> Outbreak:
    """Run the model.

    Parameters
    ----------
    ids : pandas.Index
        District ids, in the order of the arrays.
    country, population, care, river : numpy.ndarray
        Per district: country code, people, care quality in [0, 1], on the Senn.
    adjacency : pandas.DataFrame
        True adjacency ``a b cross_border shared_m``.
    links : pandas.DataFrame
        ``from_id to_id kind``.
    seed_id : str
        The district where the outbreak starts.
    hot_ids : list of str
        Districts of the hot area.
    rng : numpy.random.Generator

    Returns
    -------
    Outbreak
    """
    n = len(ids)
    pos = pd.Series(np.arange(n), index=ids)
    a, b = pos[adjacency["a"]].to_numpy(), pos[adjacency["b"]].to_numpy()
    shared = adjacency["shared_m"].to_numpy(float)
    perim = np.bincount(a, shared, n) + np.bincount(b, shared, n)
    eps = np.zeros((n, n))
    mult = np.where(river[a] & river[b], _RIVER, 1.0) * np.where(
        adjacency["cross_border"].to_numpy(bool), _CROSS, 1.0
    )
    eps[a, b] = (
        _COUPLE * shared / np.maximum(perim[a], 1) * mult * (population[b] / population[a]) ** 0.3
    )
    eps[b, a] = (
        _COUPLE * shared / np.maximum(perim[b], 1) * mult * (population[a] / population[b]) ** 0.3
    )
    la, lb = pos[links["from_id"]].to_numpy(), pos[links["to_id"]].to_numpy()
    lw = links["kind"].map(_LINK).to_numpy(float)
    eps[la, lb] += lw
    eps[lb, la] += lw
    np.fill_diagonal(eps, 1.0)

    pool = np.round(population * pd.Series(country).map(_POOL).to_numpy()).astype(np.int64)
    cfr = 0.007 + 0.03 * (1 - care)
    weeks = pd.date_range(START, periods=N_WEEKS, freq="7D")
    woy = weeks.isocalendar().week.to_numpy()
    season = 1 + _SEASON * np.cos(2 * np.pi * (woy - 6) / 52)
    months = weeks.to_period("M")
    hot = np.isin(ids, hot_ids)

    cases = np.zeros((n, N_WEEKS), dtype=np.int64)
    deaths = np.zeros_like(cases)
    force = np.zeros((n, N_WEEKS))
    s = pool.astype(float).copy()
    first = np.full(n, -1)
    seeded_by = np.full(n, -1)
    i0 = pos[seed_id]
    for t in range(N_WEEKS):
        prev = cases[:, t - 1] if t >= 1 else 0
        prev2 = cases[:, t - 2] if t >= 2 else 0
        x = (prev + 0.4 * prev2) / np.maximum(pool, 1)
        hot_now = hot & (months[t] in HOT_MONTHS)
        beta = _BETA * season[t] * np.where(hot_now, _HOT, 1.0)
        contrib = eps * x[None, :]  # contrib[i, j]: infection of i coming from j
        lam = beta * contrib.sum(axis=1) + np.where(hot_now, _HOT_ENV, 0.0)
        force[:, t] = lam
        c = rng.binomial(np.floor(s).astype(np.int64), 1 - np.exp(-lam))
        if t == 0:
            c[i0] += _SEED_CASES
        new = (c > 0) & (first < 0)
        if t > 0 and new.any():
            rows = np.flatnonzero(new)
            cum = np.cumsum(contrib[rows], axis=1)
            u = rng.random(len(rows)) * cum[:, -1]
            src = (cum < u[:, None]).sum(axis=1)
            # A first case caused only by the hot area's contaminated water has no source.
            seeded_by[rows] = np.where(cum[:, -1] > 0, src, -1)
        first[new] = t
        cases[:, t] = c
        deaths[:, t] = rng.binomial(c, cfr)
        target = np.where(hot_now, _HOT_POOL * pool, pool)
        s = s - c + np.where(hot_now, _HOT_INFLUX, _WANE) * (target - s)
        s = np.maximum(s, 0)
    seeded_by[i0] = -1
    return Outbreak(weeks, cases, deaths, force, first, seeded_by, cfr)


def reporting_share(country: str) -> float:
    """Return the share of true cases that the country's surveillance reports."""
    return _REPORTING[country]
