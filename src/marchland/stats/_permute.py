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

Labels come from :func:`two_sided_pvalues` of :func:`adaptive_counts`: a first round of draws
for every unit, then more draws only for units with few permuted values as extreme as the
observed one, up to :func:`needed_permutations` (enough for Benjamini-Hochberg to reach its
level). Memory stays bounded: draws are made and counted in chunks, never all held at once.
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


# Draws per chunk of the refinement rounds (a chunk's table is chunk x max_cardinality ints).
DRAW_CHUNK = 1 << 14
# A unit gets more draws while at most this many permuted values are as extreme as the
# observed one in its smaller tail: its p-value is then known to within about 1/sqrt(20).
REFINE_EXTREMES = 20
# Each refinement round multiplies the number of draws by this (999 -> 3999 -> 15999 ...).
REFINE_FACTOR = 4


def permutation_table(
    n: int, max_card: int, permutations: int, rng: np.random.Generator | np.random.RandomState
) -> np.ndarray:
    """Draws without replacement from ``range(n - 1)``, one row per permutation.

    Each row is a uniformly random ordered ``max_card``-subset. Vectorised: where duplicates
    are rare (``max_card**2 < n``) rows are drawn with replacement and rows holding a
    duplicate are redrawn (the accepted rows are uniform over distinct tuples); otherwise a
    row is the first ``max_card`` entries of the argsort of random keys.
    """
    out = np.empty((permutations, max_card), dtype=np.int64)
    if max_card == 0 or permutations == 0:
        return out
    if rng is None or isinstance(rng, np.random.RandomState):
        for k in range(permutations):  # legacy generator: esda's own way, one row at a time
            out[k] = (rng or np.random).choice(n - 1, size=max_card, replace=False)
        return out
    if max_card * max_card < n:
        todo = np.arange(permutations)
        while len(todo):
            out[todo] = rng.integers(0, n - 1, size=(len(todo), max_card))
            srt = np.sort(out[todo], axis=1)
            todo = todo[(srt[:, 1:] == srt[:, :-1]).any(axis=1)]
        return out
    step = max(1, (1 << 22) // max(n - 1, 1))
    for start in range(0, permutations, step):
        stop = min(start + step, permutations)
        keys = rng.random((stop - start, n - 1))
        out[start:stop] = np.argsort(keys, axis=1)[:, :max_card]
    return out


def needed_permutations(m: int, fdr: float) -> int:
    """Draws per unit so that Benjamini-Hochberg can label a lone extreme unit among ``m``.

    The smallest p-value with ``P`` draws is ``1 / (P + 1)``; BH labels the most extreme
    unit only if ``m p < fdr``, and a block of ``r`` units only if their p-values reach
    ``r fdr / m``. We ask for ``P + 1 >= 4 m / fdr`` (a lone unit's smallest q is then
    ``fdr / 4``: headroom for the Monte Carlo error near the threshold): 31,999 draws for
    400 units at 5%. Only units that stay extreme get that many (:func:`adaptive_counts`).

    Examples
    --------
    >>> needed_permutations(400, 0.05)
    31999
    """
    return int(np.ceil(4.0 * max(m, 1) / fdr)) - 1


def two_sided_pvalues(extreme: np.ndarray, draws: np.ndarray) -> np.ndarray:
    """Two-sided pseudo p-value ``(E + 1) / (P + 1)``.

    ``E`` counts the ``P`` permuted statistics at least as far from the exact conditional-
    permutation mean as the observed one (ties count). That is an ordinary permutation test
    of ``|T - E[T]|``, so ``P(p <= a) <= a`` under the null. The folded one-sided value
    (esda's ``p_sim``) is not a valid two-sided p-value: under the null it falls below 0.05
    about 10% of the time, which doubled the false labels after FDR. Doubling it would be
    valid but halves the smallest reachable p; the centred count does not.
    """
    return (np.asarray(extreme, dtype=float) + 1.0) / (np.asarray(draws, dtype=float) + 1.0)


def adaptive_counts(
    values: np.ndarray,
    weights: sparse.csr_matrix,
    observed: np.ndarray,
    statistic: Callable[[np.ndarray, np.ndarray], np.ndarray],
    *,
    centre: np.ndarray,
    rows: np.ndarray,
    permutations: int,
    max_permutations: int,
    rng: np.random.Generator,
    method: str = "auto",
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Tail counts with more draws only where they can change a label.

    Round 1 draws ``permutations`` for every unit in ``rows``. A unit goes on to the next
    round (``REFINE_FACTOR`` times as many draws in all, fresh draws added to its counts,
    capped at ``max_permutations``) while at most ``REFINE_EXTREMES`` permuted values are as
    extreme as its observed one. That is "continue while p_k <= c_k" with fixed thresholds
    ``c_k = (REFINE_EXTREMES + 1) / (P_k + 1)`` that fall from round to round, so the
    reported p-value stays valid: if it is <= a, the p-value of the round whose threshold
    first drops below a was already <= a, and each round's p-value, from a fixed number of
    draws, is valid on its own. (The idea of sequential Monte Carlo tests, Besag & Clifford
    1991, Biometrika 78, 301-304.) Draws are made and counted ``DRAW_CHUNK`` at a time.

    Returns
    -------
    at_least, at_most, extreme, draws, mean, std : numpy.ndarray
        One-sided and two-sided counts and draws per unit (-1 / 0 where not tested); mean
        and std of the round-1 permuted statistics.
    """
    n = weights.shape[0]
    card = np.diff(weights.indptr)
    rows = np.sort(np.asarray(rows, dtype=np.int64))
    table = permutation_table(n, int(card[rows].max(initial=0)), permutations, rng)
    at_least, at_most, mean, std, extreme = tail_counts(
        values, weights, observed, table, statistic, rows=rows, method=method, centre=centre
    )
    draws = np.zeros(n, dtype=np.int64)
    draws[rows] = permutations
    total = permutations
    active = rows[extreme[rows] <= REFINE_EXTREMES]
    while total < max_permutations and len(active):
        target = min(max_permutations, REFINE_FACTOR * (total + 1) - 1)
        k = int(card[active].max(initial=0))
        for start in range(total, target, DRAW_CHUNK):
            size = min(DRAW_CHUNK, target - start)
            chunk = permutation_table(n, k, size, rng)
            more = tail_counts(values, weights, observed, chunk, statistic, rows=active,
                               method=method, centre=centre)  # fmt: skip
            at_least[active] += more[0][active]
            at_most[active] += more[1][active]
            extreme[active] += more[4][active]
        draws[active] = target
        total = target
        active = active[extreme[active] <= REFINE_EXTREMES]
    return at_least, at_most, extreme, draws, mean, std


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


def tail_counts(
    values: np.ndarray,
    weights: sparse.csr_matrix,
    observed: np.ndarray,
    table: np.ndarray,
    statistic: Callable[[np.ndarray, np.ndarray], np.ndarray],
    *,
    rows: np.ndarray | None = None,
    method: str = "auto",
    centre: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
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
    centre : numpy.ndarray, optional
        Each unit's exact mean of the statistic over all conditional permutations; with it,
        ``extreme`` counts permuted statistics at least as far from it as the observed one.

    Returns
    -------
    at_least, at_most, mean, std, extreme : numpy.ndarray
        Per unit (-1 / NaN for units not tested): the counts of permuted statistics >= and
        <= the observed one (ties within a relative ``TIE_TOLERANCE`` count in both), the
        mean and standard deviation of the permuted statistics, and the two-sided count
        (-1 everywhere without ``centre``).
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
    extreme = np.full(n, -1, dtype=np.int64)
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
            if centre is not None:
                c = centre[units]
                far = np.abs(obs - c) - tol
                extreme[units] = np.count_nonzero(np.abs(sims - c[None, :]) >= far, axis=0)
            mean[units] = mu
            std[units] = spread
    return at_least, at_most, mean, std, extreme
