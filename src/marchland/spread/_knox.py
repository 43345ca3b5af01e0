"""Knox space-time interaction count and its null distributions (private to spread).

pointpats has a Knox test, but its permutation loop runs in Python per event and draws from
numpy's global random state; we need ``seed=`` and speed on line lists of thousands of cases,
so the count is done here on the spatial pair list (scipy KD-tree) with all permutations of
one chunk evaluated as one array operation. pointpats is the outside check in the tests.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats
from scipy.spatial import cKDTree

# Elements of one (permutations x spatial pairs) block; bounds memory at ~80 MB of float64.
_CHUNK_ELEMENTS = 10_000_000


def close_in_time_pairs(t: np.ndarray, interval: float) -> int:
    """Count unordered pairs with ``|t_i - t_j| <= interval`` (sorted search, no n^2)."""
    ts = np.sort(t)
    right = np.searchsorted(ts, ts + interval, side="right")
    return int((right - np.arange(len(ts)) - 1).sum())


def knox_counts(xy: np.ndarray, t: np.ndarray, distance: float, interval: float) -> dict:
    """Observed counts: pairs close in space, in time, in both; total pairs; pair list."""
    n = len(t)
    pairs = cKDTree(xy).query_pairs(r=distance, output_type="ndarray")
    close_t = np.abs(t[pairs[:, 0]] - t[pairs[:, 1]]) <= interval
    return {
        "n": n,
        "pairs": n * (n - 1) // 2,
        "space_pairs": len(pairs),
        "time_pairs": close_in_time_pairs(t, interval),
        "statistic": int(close_t.sum()),
        "pair_index": pairs,
    }


def permutation_counts(pairs, t, interval, permutations: int, rng) -> np.ndarray:
    """Knox counts with the times shuffled over the events, ``permutations`` times."""
    out = np.empty(permutations, dtype=np.int64)
    if len(pairs) == 0:
        out[:] = 0
        return out
    step = max(1, _CHUNK_ELEMENTS // len(pairs))
    for start in range(0, permutations, step):  # loop over memory chunks, not events
        k = min(step, permutations - start)
        perm = rng.permuted(np.tile(np.arange(len(t)), (k, 1)), axis=1)
        tt = t[perm]
        close = np.abs(tt[:, pairs[:, 0]] - tt[:, pairs[:, 1]]) <= interval
        out[start : start + k] = close.sum(axis=1)
    return out


def poisson_p(statistic: int, expected: float) -> tuple[float, float]:
    """P(X >= observed) (reported) and P(X > observed) (pointpats' convention), X ~ Poisson."""
    return float(stats.poisson.sf(statistic - 1, expected)), float(
        stats.poisson.sf(statistic, expected)
    )


def as_arrays(points, times, interval) -> tuple[np.ndarray, np.ndarray, float]:
    """Coordinates (n, 2), times as floats (datetimes -> days) and the interval to match."""
    if hasattr(points, "geometry"):
        geom = points.geometry
        xy = np.column_stack([geom.x.to_numpy(), geom.y.to_numpy()])
    else:
        xy = np.asarray(points, dtype=float)
    t = pd.Series(np.asarray(times).ravel())
    if pd.api.types.is_datetime64_any_dtype(t):
        t = (t - t.min()) / pd.Timedelta(days=1)
        if isinstance(interval, pd.Timedelta):
            interval = interval / pd.Timedelta(days=1)
    elif isinstance(interval, pd.Timedelta):
        raise ValueError(
            "'interval' is a Timedelta but 'times' are numbers; give the interval in the "
            "times' own unit, or give the times as dates"
        )
    t = t.to_numpy(dtype=float)
    if xy.ndim != 2 or xy.shape[1] != 2 or len(xy) != len(t):
        raise ValueError(
            f"'points' need to be n x 2 coordinates matching 'times'; got {xy.shape} points "
            f"and {len(t)} times"
        )
    if len(t) < 3:
        raise ValueError(f"the Knox test needs at least 3 cases; {len(t)} given")
    if not (np.isfinite(xy).all() and np.isfinite(t).all()):
        raise ValueError("'points' and 'times' must not contain missing values")
    return xy, t, float(interval)


def knox_test(xy, t, distance: float, interval: float, permutations: int, seed) -> dict:
    """Observed count, Poisson p-values and the Monte Carlo p-value, as KnoxResult fields."""
    rng = np.random.default_rng(seed)
    c = knox_counts(xy, t, float(distance), float(interval))
    expected = c["space_pairs"] * c["time_pairs"] / c["pairs"]
    p_ge, p_gt = poisson_p(c["statistic"], expected)
    if permutations > 0:
        sims = permutation_counts(c["pair_index"], t, float(interval), permutations, rng)
        p_sim = (1 + int((sims >= c["statistic"]).sum())) / (1 + permutations)
    else:
        p_sim = np.nan
    return dict(
        statistic=c["statistic"],
        expected=float(expected),
        p_sim=float(p_sim),
        p_poisson=p_ge,
        p_poisson_above=p_gt,
        n_events=c["n"],
        space_pairs=c["space_pairs"],
        time_pairs=c["time_pairs"],
        pairs=c["pairs"],
        distance=float(distance),
        interval=float(interval),
        permutations=int(permutations),
    )


@dataclass(frozen=True)
class KnoxResult:
    """Knox test: pairs of cases close in both space and time, against chance.

    ``p_poisson`` is P(X >= statistic) for X ~ Poisson(expected), the usual one-sided p-value
    (the one marchland reports); ``p_poisson_above`` is P(X > statistic), pointpats'
    ``p_poisson``. ``p_sim`` is the Monte Carlo p-value (1 + #{perm >= observed}) / (1 + R).
    """

    statistic: int
    expected: float
    p_sim: float
    p_poisson: float
    p_poisson_above: float
    n_events: int
    space_pairs: int
    time_pairs: int
    pairs: int
    distance: float
    interval: float
    permutations: int
