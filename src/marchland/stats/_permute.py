"""Conditional permutation inference for local statistics, vectorised in numpy.

Why our own and not esda's ``crand``: esda's engine is written for numba, which this project
does not install; without it esda runs the same loops in plain Python (one unit at a time)
and seeds numpy's *global* generator, which our rules forbid. With numba, its kernels are
compiled afresh in every new process (tens of seconds on two cores). This module runs the
same scheme as whole-array numpy operations over blocks of units, with an explicit
``numpy.random.Generator``.

The scheme is esda's (``esda.crand``): one table of ``permutations x max_cardinality``
draws without replacement from the ``n - 1`` *other* units is shared by all units; unit
``i`` with ``k`` neighbours uses the first ``k`` columns, mapped past itself (draw ``j``
stands for unit ``j`` if ``j < i`` else ``j + 1``). Given the same table, the p-values are
identical to esda's wherever no permuted statistic ties with the observed one (tested); only
the random stream differs. On ties see :func:`folded_pvalues`.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
from scipy import sparse

# Elements per block of the (units x permutations x neighbours) gather: ~32 MB of float64,
# which keeps peak memory flat at any number of units.
BLOCK_ELEMENTS = 1 << 22
# Relative tolerance under which a permuted statistic counts as equal to the observed one.
TIE_TOLERANCE = 1e-9


def permutation_table(
    n: int, max_card: int, permutations: int, rng: np.random.Generator | np.random.RandomState
) -> np.ndarray:
    """Draws without replacement from ``range(n - 1)``, one row per permutation.

    The loop runs over permutations (not units); each draw is a single numpy call.
    """
    out = np.empty((permutations, max_card), dtype=np.int64)
    if max_card == 0:
        return out
    for k in range(permutations):
        out[k] = rng.choice(n - 1, size=max_card, replace=False)
    return out


def folded_pvalues(at_least: np.ndarray, at_most: np.ndarray, permutations: int) -> np.ndarray:
    """Pseudo p-value of the tail the observed value lies in: ``(min(M, L) + 1) / (P + 1)``.

    ``M`` counts permuted statistics >= the observed one and ``L`` those <= it. Without ties
    ``L = P - M`` and this is esda's "directed" p-value ``(min(M, P - M) + 1) / (P + 1)``.
    With ties (a permutation redrawing a neighbourhood of equal values, common in count
    data) both tails include them, so a unit whose every permutation ties gets p = 1; esda
    then returns ``1 / (P + 1)`` or a large p depending on the last bit of rounding.
    """
    at_least = np.asarray(at_least, dtype=np.int64)
    at_most = np.asarray(at_most, dtype=np.int64)
    return (np.minimum(at_least, at_most) + 1.0) / (permutations + 1.0)


def _gather_lags(values, weights, units, ids):
    """Weighted lags summing each unit's draws as esda does: (permutations, units).

    Draw ``j`` is ``values[j]`` for units after it and ``values[j + 1]`` for units at or
    before it, so the drawn values are a select between two small (permutations x k)
    tables rather than a random gather; the sum is the same matmul as esda's, bit for bit.
    """
    k = ids.shape[1]
    offsets = weights.indptr[units][:, None] + np.arange(k)
    w_u = weights.data[offsets][:, :, None]  # each unit's weights in CSR (column) order
    low, high = values[ids], values[ids + 1]
    drawn = np.where(ids[None, :, :] >= units[:, None, None], high[None], low[None])
    return np.matmul(drawn, w_u)[:, :, 0].T


def _step_lags(values, weights, units, ids):
    """Compute the same lags when every weight of a unit is equal (binary, row-standardised).

    A draw ``j`` stands for ``values[j]`` for units after it and ``values[j + 1]`` for units
    at or before it. Across a block of units in increasing order, each permutation's sum of
    draws is therefore a step function with at most ``k`` steps, written out with one
    ``numpy.repeat``: O(permutations x units), not O(permutations x units x neighbours).
    """
    n_perm, k = ids.shape
    c = len(units)
    # pos: how many units of the block are at or before the draw (they take values[j + 1])
    pos = np.searchsorted(units, ids, side="right")
    order = np.argsort(pos, axis=1, kind="stable")
    pos = np.take_along_axis(pos, order, axis=1)
    ids_sorted = np.take_along_axis(ids, order, axis=1)
    low, high = values[ids_sorted], values[ids_sorted + 1]
    # level j (units from pos[:, j - 1] to pos[:, j]): draws before j are past, the rest not
    past = np.concatenate([np.zeros((n_perm, 1)), np.cumsum(low, axis=1)], axis=1)
    ahead = np.concatenate([np.cumsum(high[:, ::-1], axis=1)[:, ::-1], np.zeros((n_perm, 1))],
                           axis=1)  # fmt: skip
    levels = past + ahead
    edges = np.concatenate([np.zeros((n_perm, 1), dtype=pos.dtype), pos,
                            np.full((n_perm, 1), c, dtype=pos.dtype)], axis=1)  # fmt: skip
    sums = np.repeat(levels.ravel(), np.diff(edges, axis=1).ravel()).reshape(n_perm, c)
    return sums * weights.data[weights.indptr[units]][None, :]


def conditional_permutation(
    values: np.ndarray,
    weights: sparse.csr_matrix,
    observed: np.ndarray,
    table: np.ndarray,
    statistic: Callable[[np.ndarray, np.ndarray], np.ndarray],
    *,
    rows: np.ndarray | None = None,
    method: str = "auto",
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Permutation counts for a local statistic that is a function of the spatial lag.

    Parameters
    ----------
    values : numpy.ndarray
        The variable the neighbours' values are drawn from (length n).
    weights : scipy.sparse.csr_matrix
        Weights without self-weights (zero diagonal), rows in the order of ``values``; within
        a row the weights are used in column order, as esda does.
    observed : numpy.ndarray
        The observed statistic per unit.
    table : numpy.ndarray
        ``permutations x max_cardinality`` draws from :func:`permutation_table`.
    statistic : callable
        ``statistic(units, lags)`` -> statistics of the same shape, where ``lags[p, u]`` is
        the weighted sum of the permuted neighbour values of unit ``units[u]`` in
        permutation ``p``.
    rows : numpy.ndarray, optional
        Units to test (default: every unit with at least one neighbour).
    method : {"auto", "gather", "step"}
        "gather" sums each unit's draws as esda does (same floating-point order, so the same
        p-values bit for bit given the same table); "step" is the faster equal-weights
        path (the same sums up to rounding); "auto" takes "step" where every row's weights
        are equal.

    Returns
    -------
    at_least, at_most, mean, std : numpy.ndarray
        Per unit (-1 / NaN for units not tested): the counts of permuted statistics >= and
        <= the observed one (ties within a relative ``TIE_TOLERANCE`` count in both), and
        the mean and standard deviation of the permuted statistics.
    """
    if method not in ("auto", "gather", "step"):
        raise ValueError(f"'method' needs to be one of auto, gather, step. {method!r} given.")
    weights = sparse.csr_matrix(weights)
    values = np.ascontiguousarray(values, dtype=float)
    n = weights.shape[0]
    card = np.diff(weights.indptr)
    if rows is None:
        rows = np.flatnonzero(card > 0)
    rows = np.sort(np.asarray(rows, dtype=np.int64))
    if method == "auto":
        row_max = np.maximum.reduceat(weights.data, weights.indptr[:-1][card > 0])
        row_min = np.minimum.reduceat(weights.data, weights.indptr[:-1][card > 0])
        method = "step" if np.array_equal(row_max, row_min) else "gather"
    lags_of = _step_lags if method == "step" else _gather_lags
    n_perm = table.shape[0]
    at_least = np.full(n, -1, dtype=np.int64)
    at_most = np.full(n, -1, dtype=np.int64)
    mean = np.full(n, np.nan)
    std = np.full(n, np.nan)
    # Units are grouped by their number of neighbours so each block is a dense array with no
    # padding; the loop is over distinct cardinalities and blocks, not over units.
    for k in np.unique(card[rows]):
        if k == 0:
            continue
        units_k = rows[card[rows] == k]
        ids = table[:, :k]
        per_unit = n_perm * (int(k) if method == "gather" else 3)
        block = max(1, BLOCK_ELEMENTS // per_unit)
        for start in range(0, len(units_k), block):
            units = units_k[start : start + block]
            sims = statistic(units, lags_of(values, weights, units, ids))  # (perms, units)
            mu = sims.mean(axis=0)
            dev = sims - mu[None, :]
            spread = np.sqrt(np.einsum("pu,pu->u", dev, dev) / n_perm)
            # A permutation that redraws equal neighbour values ties with the observed
            # value; count ties in both tails whatever the last bit of rounding says.
            obs = observed[units]
            tol = TIE_TOLERANCE * (np.abs(obs) + spread)
            at_least[units] = np.count_nonzero(sims >= (obs - tol)[None, :], axis=0)
            at_most[units] = np.count_nonzero(sims <= (obs + tol)[None, :], axis=0)
            mean[units] = mu
            std[units] = spread
    return at_least, at_most, mean, std
